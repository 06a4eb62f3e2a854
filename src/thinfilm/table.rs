//! Angle tables: one stack, one wavelength, one side, tabulated against the incidence angle
//! for constant-time lookup in the tracer's inner loop.
//!
//! # Sampling
//!
//! Every quantity is an analytic function of cos θ_i except at the critical angle of the
//! exit medium, where q_f = N_f cos θ_f = n₀ √(cos² θ_i − c²) turns imaginary (c = cos θ_c):
//! there R, T and the absorptances have a square-root kink. (Finite layers give no kink:
//! their characteristic matrix depends on q² only; Born & Wolf 1999 §1.6.2.) The range of
//! cos θ_i is therefore split at c into two segments, each mapped onto x ∈ [0, 1] by a
//! variable in which the functions are smooth:
//!
//! * propagating, cos θ_i ∈ [c, 1]: x = √(cos² θ_i − c²)/√(1 − c²), proportional to
//!   Re q_f; cos θ_i = √(c² + x²(1 − c²)) is analytic in x.
//! * total internal reflection, cos θ_i ∈ [0, c]: x = cos θ_i/(c + √(c² − cos² θ_i)), the
//!   half-angle (stereographic) parameter of the circle cos² θ_i + |q_f|²/n₀² = c², so that
//!   both cos θ_i = 2cx/(1 + x²) and |q_f| are analytic in x, at grazing and at c alike.
//!
//! Without a critical angle (exit index ≥ incidence index) c = 0 and x = cos θ_i. Each
//! segment has `COARSE_CELLS` uniform cells in x; a cell is split into 2^k equal sub-cells
//! until the measured error is below half the tolerance (so resonances, e.g. a surface
//! plasmon behind a thin oxide, get fine sampling where they are and nowhere else). On every
//! sub-cell each channel is the cubic through four equally spaced samples (Lagrange), stored
//! as monomial coefficients in the local coordinate t ∈ [0, 1]. A lookup is: one square
//! root, one division, two table indexings, and Horner's rule, with at most one
//! (well-predicted) branch.
//!
//! # Accuracy, measured
//!
//! During the build, every sub-cell is checked against the direct transfer-matrix solution
//! at the midpoints between its samples (t = 1/6, 1/2, 5/6) and at two pseudo-random points;
//! [`AngleTable::max_error`] is the largest absolute error found over all channels (R, T,
//! cross terms, per-layer absorptances, s and p). [`AngleTable::measure_error`] repeats the
//! measurement on any number of fresh random angles. All channels share the same samples
//! and the interpolation is linear in the sampled values, so interpolated values keep
//! R + T + ΣA = 1 to round-off; they may leave [0, 1] by at most the interpolation error.

use super::stack::{FilmResponse, FilmStack, Work, mueller};
use num_complex::Complex64;

/// Default absolute accuracy of every tabulated quantity.
pub const DEFAULT_TOL_ABS: f64 = 1e-5;
/// Uniform cells per segment before refinement.
const COARSE_CELLS: usize = 32;
/// Deepest refinement of one coarse cell: 2^MAX_LEVEL sub-cells.
const MAX_LEVEL: u32 = 11;
/// Pseudo-random checks per sub-cell during the build, besides the three midpoints.
const RANDOM_CHECKS: usize = 2;
/// Fast channels: R_s, R_p, T_s, T_p.
const FAST: usize = 4;

/// Power coefficients at one angle.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct PowerCoefficients {
    pub r_s: f64,
    pub r_p: f64,
    pub t_s: f64,
    pub t_p: f64,
}

impl PowerCoefficients {
    /// Reflectance for unpolarised light.
    #[inline]
    pub fn reflectance_unpolarised(&self) -> f64 {
        0.5 * (self.r_s + self.r_p)
    }

    /// Transmittance for unpolarised light.
    #[inline]
    pub fn transmittance_unpolarised(&self) -> f64 {
        0.5 * (self.t_s + self.t_p)
    }
}

/// Everything an angle table knows at one angle: the power coefficients, the Mueller cross
/// terms and the absorptance of every layer (in the order the light meets them).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct FullSample {
    pub power: PowerCoefficients,
    /// r_s conj(r_p) (see [`FilmResponse::reflection_cross`]).
    pub reflection_cross: Complex64,
    /// t_s conj(t_p) √(f_s f_p) (see [`FilmResponse::transmission_cross`]).
    pub transmission_cross: Complex64,
    pub absorptance_s: Vec<f64>,
    pub absorptance_p: Vec<f64>,
}

impl FullSample {
    /// A zeroed sample for a stack of `n_layers` films, to reuse across lookups.
    pub fn new(n_layers: usize) -> FullSample {
        FullSample {
            absorptance_s: vec![0.0; n_layers],
            absorptance_p: vec![0.0; n_layers],
            ..FullSample::default()
        }
    }

    /// Mueller matrix of reflection (layout as [`FilmResponse::mueller_reflection`]).
    pub fn mueller_reflection(&self) -> [[f64; 4]; 4] {
        mueller(self.power.r_s, self.power.r_p, self.reflection_cross)
    }

    /// Mueller matrix of transmission (layout as [`FilmResponse::mueller_transmission`]).
    pub fn mueller_transmission(&self) -> [[f64; 4]; 4] {
        mueller(self.power.t_s, self.power.t_p, self.transmission_cross)
    }

    /// Absorptance of the films for unpolarised light, summed over layers.
    pub fn absorptance_total_unpolarised(&self) -> f64 {
        0.5 * (self.absorptance_s.iter().sum::<f64>() + self.absorptance_p.iter().sum::<f64>())
    }
}

/// One coarse cell: where its sub-cells start and how many there are.
#[derive(Debug, Clone, Copy)]
struct Coarse {
    start: u32,
    n_sub_f: f64,
}

/// Film response tabulated against the incidence angle, for one stack, one wavelength and
/// light from the stack's `above` side (tabulate [`FilmStack::reversed`] for the other).
#[derive(Debug, Clone)]
pub struct AngleTable {
    stack: FilmStack,
    wavelength_nm: f64,
    tol_abs: f64,
    /// Critical cosine c (0 without a critical angle), c², 1/√(1 − c²).
    cos_crit: f64,
    cos_crit_sq: f64,
    inv_span: f64,
    /// Coarse cells of the TIR segment (none when c = 0), then of the propagating one.
    n_tir: usize,
    coarse: Vec<Coarse>,
    /// Per sub-cell, Horner coefficients [power][channel] of R_s, R_p, T_s, T_p.
    fast: Vec<[[f64; FAST]; 4]>,
    /// Per sub-cell, [power][channel] of the other channels, `n_slow` each.
    slow: Vec<f64>,
    n_slow: usize,
    max_error: f64,
}

/// Channels of one direct solution: R_s, R_p, T_s, T_p, Re/Im ρ, Re/Im τ, A_s…, A_p….
fn channels(f: &FilmResponse, out: &mut Vec<f64>) {
    out.clear();
    out.extend([
        f.s.reflectance,
        f.p.reflectance,
        f.s.transmittance,
        f.p.transmittance,
    ]);
    let (rho, tau) = (f.reflection_cross(), f.transmission_cross());
    out.extend([rho.re, rho.im, tau.re, tau.im]);
    out.extend_from_slice(&f.s.absorptance);
    out.extend_from_slice(&f.p.absorptance);
}

/// Monomial coefficients in t ∈ [0, 1] of the cubic through y(0), y(1/3), y(2/3), y(1).
#[inline]
fn cubic(y0: f64, y1: f64, y2: f64, y3: f64) -> [f64; 4] {
    [
        y0,
        0.5 * (-11.0 * y0 + 18.0 * y1 - 9.0 * y2 + 2.0 * y3),
        4.5 * (2.0 * y0 - 5.0 * y1 + 4.0 * y2 - y3),
        4.5 * (-y0 + 3.0 * y1 - 3.0 * y2 + y3),
    ]
}

#[inline(always)]
fn horner(c: &[f64; 4], t: f64) -> f64 {
    ((c[3] * t + c[2]) * t + c[1]) * t + c[0]
}

/// SplitMix64 (G. L. Steele, D. Lea & C. H. Flood, OOPSLA 2014): deterministic test points.
struct SplitMix(u64);

impl SplitMix {
    fn next_unit(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        (z >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }
}

/// Direct evaluator of the channels, reusing its scratch space.
struct Direct<'a> {
    stack: &'a FilmStack,
    wavelength_nm: f64,
    work: Work,
    response: FilmResponse,
    values: Vec<f64>,
}

impl Direct<'_> {
    fn eval(&mut self, cos_theta_i: f64) -> &[f64] {
        self.stack.solve_with(
            self.wavelength_nm,
            cos_theta_i,
            &mut self.work,
            &mut self.response,
        );
        channels(&self.response, &mut self.values);
        &self.values
    }
}

impl AngleTable {
    /// Table with the default accuracy, 1e-5 absolute on every channel.
    ///
    /// * `stack` – as seen by the incoming light (use [`FilmStack::reversed`] for light
    ///   from below).
    /// * `wavelength_nm` – vacuum wavelength, nm, finite and > 0.
    pub fn build(stack: &FilmStack, wavelength_nm: f64) -> AngleTable {
        AngleTable::with_tolerance(stack, wavelength_nm, DEFAULT_TOL_ABS)
    }

    /// Table refined until the measured absolute error of every channel is below
    /// `tol_abs / 2` in every cell, or the deepest refinement (2^11 sub-cells per coarse
    /// cell) is reached; [`Self::max_error`] tells which. `tol_abs` is clamped to ≥ 1e-12.
    pub fn with_tolerance(stack: &FilmStack, wavelength_nm: f64, tol_abs: f64) -> AngleTable {
        let tol_abs = if tol_abs.is_nan() {
            DEFAULT_TOL_ABS
        } else {
            tol_abs.max(1e-12)
        };
        let cos_crit = stack.critical_cos().unwrap_or(0.0);
        let n_slow = 4 + 2 * stack.n_layers();
        let mut table = AngleTable {
            stack: stack.clone(),
            wavelength_nm,
            tol_abs,
            cos_crit,
            cos_crit_sq: cos_crit * cos_crit,
            inv_span: 1.0 / ((1.0 - cos_crit) * (1.0 + cos_crit)).sqrt(),
            n_tir: if cos_crit > 0.0 { COARSE_CELLS } else { 0 },
            coarse: Vec::new(),
            fast: Vec::new(),
            slow: Vec::new(),
            n_slow,
            max_error: 0.0,
        };
        let mut direct = Direct {
            stack,
            wavelength_nm,
            work: Work::default(),
            response: FilmResponse::with_layers(stack.n_layers()),
            values: Vec::new(),
        };
        let n_cells = table.n_tir + COARSE_CELLS;
        for cell in 0..n_cells {
            table.refine_cell(cell, &mut direct);
        }
        table
    }

    /// Incidence cosine at position x ∈ [0, 1] of coarse cell `cell`'s segment.
    fn cos_at(&self, cell: usize, x: f64) -> f64 {
        let c = self.cos_crit;
        if cell < self.n_tir {
            2.0 * c * x / (1.0 + x * x)
        } else {
            let span_sq = (1.0 - c) * (1.0 + c);
            (self.cos_crit_sq + x * x * span_sq).sqrt().min(1.0)
        }
    }

    /// Tabulate coarse cell `cell`, doubling its sub-cells until the error bound holds.
    fn refine_cell(&mut self, cell: usize, direct: &mut Direct) {
        let n_ch = FAST + self.n_slow;
        let local = if cell < self.n_tir {
            cell
        } else {
            cell - self.n_tir
        };
        let h_coarse = 1.0 / COARSE_CELLS as f64;
        let x_lo = local as f64 * h_coarse;
        let mut rng = SplitMix(0x5EED_0000 ^ ((cell as u64) << 8));
        let mut level = 0;
        loop {
            let n_sub = 1usize << level;
            let h = h_coarse / n_sub as f64;
            // Samples at x_lo + h k / 3, k = 0..=3 n_sub, channel-major.
            let n_nodes = 3 * n_sub + 1;
            let mut samples = vec![0.0; n_nodes * n_ch];
            for k in 0..n_nodes {
                let x = x_lo + h * (k as f64 / 3.0);
                let v = direct.eval(self.cos_at(cell, x));
                samples[k * n_ch..(k + 1) * n_ch].copy_from_slice(v);
            }
            // Cubic coefficients per sub-cell and channel.
            let mut coeffs = vec![[0.0; 4]; n_sub * n_ch];
            for j in 0..n_sub {
                for ch in 0..n_ch {
                    let y = |k: usize| samples[(3 * j + k) * n_ch + ch];
                    coeffs[j * n_ch + ch] = cubic(y(0), y(1), y(2), y(3));
                }
            }
            // Measured error at the midpoints between samples and at random points.
            let mut err: f64 = 0.0;
            for j in 0..n_sub {
                let mut ts = [1.0 / 6.0, 0.5, 5.0 / 6.0, 0.0, 0.0];
                for t in ts.iter_mut().skip(3).take(RANDOM_CHECKS) {
                    *t = rng.next_unit();
                }
                for &t in &ts {
                    let x = x_lo + h * (j as f64 + t);
                    let v = direct.eval(self.cos_at(cell, x));
                    for (ch, exact) in v.iter().enumerate() {
                        let e = (horner(&coeffs[j * n_ch + ch], t) - exact).abs();
                        err = err.max(if e.is_nan() { f64::INFINITY } else { e });
                    }
                }
            }
            if err <= 0.5 * self.tol_abs || level == MAX_LEVEL {
                self.max_error = self.max_error.max(err);
                self.coarse.push(Coarse {
                    start: self.fast.len() as u32,
                    n_sub_f: n_sub as f64,
                });
                for cell_coeffs in coeffs.chunks_exact(n_ch) {
                    // Transpose to [power][channel] so that Horner runs across channels.
                    let mut fast = [[0.0; FAST]; 4];
                    for (ch, c) in cell_coeffs[..FAST].iter().enumerate() {
                        for (power, row) in fast.iter_mut().enumerate() {
                            row[ch] = c[power];
                        }
                    }
                    self.fast.push(fast);
                    for power in 0..4 {
                        self.slow
                            .extend(cell_coeffs[FAST..].iter().map(|c| c[power]));
                    }
                }
                return;
            }
            level += 1;
        }
    }

    /// Sub-cell and local coordinate t ∈ [0, 1] of an incidence cosine.
    ///
    /// Branch-light: both segment variables are written as computed and one is picked with
    /// a bit mask (the compiler may still emit one well-predicted branch around the
    /// division); indices are clamped as floats first, so no NaN or out-of-range value
    /// reaches an index, and the clamped truncation needs no saturation code.
    #[inline(always)]
    #[allow(clippy::manual_clamp)] // min/max map NaN into range; `clamp` would keep NaN
    fn locate(&self, cos_theta_i: f64) -> (usize, f64) {
        const M: f64 = COARSE_CELLS as f64;
        let c = cos_theta_i.clamp(0.0, 1.0);
        let d = c * c - self.cos_crit_sq;
        let s = d.abs().sqrt();
        let x_tir = c / (self.cos_crit + s).max(f64::MIN_POSITIVE);
        let x_prop = s * self.inv_span;
        let mask = u64::from(d < 0.0).wrapping_neg(); // all ones inside total reflection
        let x = f64::from_bits((x_tir.to_bits() & mask) | (x_prop.to_bits() & !mask));
        let base = self.n_tir & !(mask as usize);
        // Truncation of the clamped, non-negative values is their floor (and, unlike
        // `f64::floor` on baseline x86-64, a single instruction).
        let g = x * M;
        let i = g.min(M - 1.0).max(0.0) as u32;
        let cell = self.coarse[base + i as usize];
        let h = (g - f64::from(i)) * cell.n_sub_f;
        let j = h.min(cell.n_sub_f - 1.0).max(0.0) as u32;
        (cell.start as usize + j as usize, h - f64::from(j))
    }

    /// R_s, R_p, T_s, T_p at incidence cosine `cos_theta_i` ∈ [0, 1] (clamped), within
    /// [`Self::max_error`] of the direct solution.
    #[inline]
    pub fn lookup(&self, cos_theta_i: f64) -> PowerCoefficients {
        let (k, t) = self.locate(cos_theta_i);
        self.fast_at(k, t)
    }

    #[inline(always)]
    fn fast_at(&self, k: usize, t: f64) -> PowerCoefficients {
        let c = &self.fast[k];
        let mut v = c[3];
        for power in (0..3).rev() {
            for ch in 0..FAST {
                v[ch] = v[ch] * t + c[power][ch];
            }
        }
        PowerCoefficients {
            r_s: v[0],
            r_p: v[1],
            t_s: v[2],
            t_p: v[3],
        }
    }

    /// Every tabulated quantity at `cos_theta_i` into `out` (its vectors are resized to the
    /// number of layers).
    pub fn lookup_full(&self, cos_theta_i: f64, out: &mut FullSample) {
        let (k, t) = self.locate(cos_theta_i);
        out.power = self.fast_at(k, t);
        let n = self.n_slow;
        let rows = &self.slow[k * 4 * n..(k + 1) * 4 * n];
        let value = |ch: usize| {
            let c = [rows[ch], rows[n + ch], rows[2 * n + ch], rows[3 * n + ch]];
            horner(&c, t)
        };
        out.reflection_cross = Complex64::new(value(0), value(1));
        out.transmission_cross = Complex64::new(value(2), value(3));
        let n_layers = self.stack.n_layers();
        out.absorptance_s.resize(n_layers, 0.0);
        out.absorptance_p.resize(n_layers, 0.0);
        for l in 0..n_layers {
            out.absorptance_s[l] = value(4 + l);
            out.absorptance_p[l] = value(4 + n_layers + l);
        }
    }

    /// Largest absolute error over all channels measured during the build (see the module
    /// documentation). Below the requested tolerance unless a cell hit the deepest
    /// refinement.
    pub fn max_error(&self) -> f64 {
        self.max_error
    }

    /// Measure the largest absolute error over all channels against the direct solution
    /// at `n_points` fresh pseudo-random angles (half uniform in cos θ_i, half uniform in
    /// the table variable of each segment, which crowds them near the critical angle and
    /// grazing), drawn from `seed`. Costs `n_points` direct solutions.
    pub fn measure_error(&self, n_points: usize, seed: u64) -> f64 {
        let mut direct = Direct {
            stack: &self.stack,
            wavelength_nm: self.wavelength_nm,
            work: Work::default(),
            response: FilmResponse::with_layers(self.stack.n_layers()),
            values: Vec::new(),
        };
        let mut sample = FullSample::new(self.stack.n_layers());
        let mut rng = SplitMix(seed);
        let mut tabulated = Vec::new();
        let mut err: f64 = 0.0;
        for i in 0..n_points {
            let u = rng.next_unit();
            let cos = match i % 4 {
                0 | 1 => u,
                2 if self.n_tir > 0 => self.cos_at(0, u),
                _ => self.cos_at(self.n_tir, u),
            };
            self.lookup_full(cos, &mut sample);
            tabulated.clear();
            let p = sample.power;
            tabulated.extend([p.r_s, p.r_p, p.t_s, p.t_p]);
            let (rho, tau) = (sample.reflection_cross, sample.transmission_cross);
            tabulated.extend([rho.re, rho.im, tau.re, tau.im]);
            tabulated.extend_from_slice(&sample.absorptance_s);
            tabulated.extend_from_slice(&sample.absorptance_p);
            let exact = direct.eval(cos);
            for (a, b) in tabulated.iter().zip(exact) {
                let e = (a - b).abs();
                err = err.max(if e.is_nan() { f64::INFINITY } else { e });
            }
        }
        err
    }

    /// Tolerance the table was built for.
    pub fn tol_abs(&self) -> f64 {
        self.tol_abs
    }

    pub fn n_layers(&self) -> usize {
        self.stack.n_layers()
    }

    pub fn wavelength_nm(&self) -> f64 {
        self.wavelength_nm
    }

    /// The stack as seen by the incoming light.
    pub fn stack(&self) -> &FilmStack {
        &self.stack
    }

    /// Critical incidence cosine at which the table's segments meet (0 if none).
    pub fn critical_cos(&self) -> f64 {
        self.cos_crit
    }

    /// Number of interpolation cells (memory: 128 + 32·(4 + 2·layers) bytes each).
    pub fn n_cells(&self) -> usize {
        self.fast.len()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::thinfilm::Layer;

    fn c(re: f64, im: f64) -> Complex64 {
        Complex64::new(re, im)
    }

    #[test]
    fn cubic_reproduces_cubics() {
        let f = |t: f64| 0.3 - 1.2 * t + 2.5 * t * t - 0.7 * t * t * t;
        let k = cubic(f(0.0), f(1.0 / 3.0), f(2.0 / 3.0), f(1.0));
        for t in [0.0, 0.1, 0.77, 1.0] {
            assert!((horner(&k, t) - f(t)).abs() < 1e-14);
        }
    }

    #[test]
    fn segment_maps_meet_at_the_critical_angle() {
        let st = FilmStack::bare(c(3.5, 0.0), c(1.0, 0.0)).unwrap();
        let table = AngleTable::build(&st, 1000.0);
        let cc = table.critical_cos();
        assert!((table.cos_at(0, 1.0) - cc).abs() < 1e-15);
        assert!((table.cos_at(table.n_tir, 0.0) - cc).abs() < 1e-15);
        assert!((table.cos_at(table.n_tir, 1.0) - 1.0).abs() < 1e-15);
        assert_eq!(table.cos_at(0, 0.0), 0.0);
    }

    #[test]
    fn lookup_at_nodes_equals_direct_solution() {
        let st = FilmStack::new(
            c(1.0, 0.0),
            vec![Layer::new(c(2.0, 0.0), 75.0)],
            c(3.9, 0.02),
        )
        .unwrap();
        let table = AngleTable::build(&st, 600.0);
        let f = st.solve(600.0, 1.0);
        let p = table.lookup(1.0);
        assert!((p.r_s - f.s.reflectance).abs() < 1e-13);
        assert!((p.t_p - f.p.transmittance).abs() < 1e-13);
    }
}
