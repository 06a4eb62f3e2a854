//! Angle tables: one stack, one wavelength, one side, tabulated against the incidence angle
//! for constant-time lookup in the tracer's inner loop.
//!
//! # Sampling
//!
//! Every quantity is an analytic function of y = cos θ_i and of q_f = N_f cos θ_f =
//! n₀ √(y² − c²) (c = cos θ_c, the critical cosine of the exit medium, 0 without a critical
//! angle); finite layers add no other branch point (their characteristic matrix depends on
//! q² only; Born & Wolf 1999 §1.6.2). So the functions are smooth in y except at y = c,
//! where they have a square-root kink, f = A(y) + B(y) √|y − c| on either side (A, B
//! analytic). The table splits the range at c into two sides, y < c (towards grazing) and
//! y ≥ c, and on each side uses the normalised distance v = |y − c| / (length of the side)
//! ∈ [0, 1]:
//!
//! * v ∈ [2^−8, 1): the 8 octaves [2^−(o+1), 2^−o) of v, each cut into cells linear in v.
//!   An octave starts from cells of width ≤ 1/32 in cos θ_i (at most 16, at least one), so
//!   near the kink the cells shrink with the distance to it, as √ needs: on [a, 2a] the
//!   kink term is a smooth function of v/a.
//! * v < 2^−8, the near zone: cells uniform in x = √(v 2^8), in which A(x²) + B(x²)·x is
//!   analytic.
//!
//! Each initial cell is split into 2^k equal sub-cells until the measured error is below
//! half the tolerance (so resonances, e.g. a surface plasmon behind a thin oxide, get fine
//! sampling where they are and nowhere else). On every sub-cell each channel is the cubic
//! through four equally spaced samples (Lagrange), as monomial coefficients in the local
//! coordinate t ∈ [0, 1].
//!
//! # Lookup
//!
//! Cells are found from the bits of the floating-point v (IEEE 754: v = 2^e (1 + f/2^52)):
//! its exponent and top four fraction bits name one of 16 records per octave (one integer
//! subtraction), and the record holds the first cell and the cell width as a power of two
//! of fraction units, so the cell is a shift of the fraction bits and t is the bits below
//! the shift, exactly. A lookup is then a subtraction, a multiplication, two table reads and
//! the cubic: no square root, division, float-to-integer conversion, or data-dependent
//! branch (only the near zone, hit with probability ~2^−8 for uniform angles, takes a cold
//! path with one square root). The cubic runs by Estrin's scheme, (c₀ + c₁t) + t²(c₂ + c₃t),
//! a shorter dependency chain than Horner's rule for the same operations.
//!
//! Per cell, the coefficients of the four power channels (R_s, R_p, T_s, T_p) are one
//! 128-byte record, 64-byte aligned (two cache lines), laid out `[power][channel]` so that
//! the cubic runs across the channels in SIMD pairs. The full lookup reads two more
//! arrays, same index: the four cross-term channels in the same form, and per layer the
//! absorptance coefficients interleaved s, p (64 bytes), one SIMD pair per layer.
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
/// Deepest refinement of one initial cell: 2^MAX_LEVEL sub-cells.
const MAX_LEVEL: u32 = 11;
/// Pseudo-random checks per sub-cell during the build, besides the three midpoints.
const RANDOM_CHECKS: usize = 2;
/// Channels besides the absorptances: R_s, R_p, T_s, T_p, Re ρ, Im ρ, Re τ, Im τ.
const N_FIXED: usize = 8;
/// Octaves of the normalised distance v from the critical angle tabulated per side; below
/// them is the near zone.
const OCTAVES: usize = 8;
/// Leading fraction bits of v that, with its exponent, pick a record: 16 records per octave.
const RECORD_BITS: u32 = 4;
const RECORDS_PER_OCTAVE: usize = 1 << RECORD_BITS;
/// Records of both sides.
const N_RECORDS: usize = 2 * OCTAVES * RECORDS_PER_OCTAVE;

/// Index of the record for fraction bits `q` (of `RECORD_BITS`) in octave `o` of `side`.
fn record_slot(side: usize, o: usize, q: usize) -> usize {
    (side * OCTAVES + o) * RECORDS_PER_OCTAVE + RECORDS_PER_OCTAVE - 1 - q
}

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

/// Mueller cross terms at one angle (see [`FilmResponse::reflection_cross`] and
/// [`FilmResponse::transmission_cross`]).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct CrossTerms {
    /// r_s conj(r_p).
    pub reflection: Complex64,
    /// t_s conj(t_p) √(f_s f_p).
    pub transmission: Complex64,
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

/// Cubic coefficients `[power][channel]` of four channels on one cell (R_s, R_p, T_s, T_p,
/// or Re ρ, Im ρ, Re τ, Im τ): one record of two cache lines.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
#[repr(C, align(64))]
struct Quad([[f64; 4]; 4]);

impl Quad {
    /// The four channels at t, by Estrin's scheme.
    #[inline(always)]
    fn at(&self, t: f64) -> [f64; 4] {
        let [c0, c1, c2, c3] = &self.0;
        let t2 = t * t;
        let mut v = [0.0; 4];
        for ch in 0..4 {
            v[ch] = (c3[ch] * t + c2[ch]) * t2 + (c1[ch] * t + c0[ch]);
        }
        v
    }
}

/// Where the cells of one range of records start, and their width (see [`AngleTable`]'s
/// `locate`): cell = `start` + (fraction bits of v >> `shift`), wrapping; t = the fraction
/// bits below the shift, moved up by `lift` = 52 − `shift` (stored to save the subtraction).
#[derive(Debug, Clone, Copy)]
struct Record {
    start: u32,
    shift: u16,
    lift: u16,
}

impl Record {
    /// For the records of an empty side, never read: cell 0.
    const UNUSED: Record = Record {
        start: 0,
        shift: 52,
        lift: 0,
    };
}

/// The zone next to the critical angle (v < 2^−OCTAVES), uniform in x = √(v·2^OCTAVES).
#[derive(Debug, Clone, Copy, Default)]
struct Near {
    start: usize,
    /// Cells per unit of x, and the last cell counted from `start`, as floats.
    scale: f64,
    last: f64,
}

/// Film response tabulated against the incidence angle, for one stack, one wavelength and
/// light from the stack's `above` side (tabulate [`FilmStack::reversed`] for the other).
#[derive(Debug, Clone)]
pub struct AngleTable {
    stack: FilmStack,
    wavelength_nm: f64,
    tol_abs: f64,
    /// Critical cosine c (0 without a critical angle).
    cos_crit: f64,
    /// Per side (0: cos θ_i < c, 1: cos θ_i ≥ c), 1/(length of the side in cos θ_i); 0 for
    /// an empty side.
    inv_span: [f64; 2],
    /// Per side, `RECORDS_PER_OCTAVE` records for each of the `OCTAVES` octaves of v,
    /// largest v first.
    records: Box<[Record; N_RECORDS]>,
    near: [Near; 2],
    /// Per cell, cubic coefficients of R_s, R_p, T_s, T_p (the fast channels).
    fast: Vec<Quad>,
    /// Per cell, of Re ρ, Im ρ, Re τ, Im τ.
    cross: Vec<Quad>,
    /// Per cell and layer, cubic coefficients [power][s, p] of the layer's absorptance.
    absorb: Vec<[[f64; 2]; 4]>,
    n_layers: usize,
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

impl<'a> Direct<'a> {
    fn new(stack: &'a FilmStack, wavelength_nm: f64) -> Direct<'a> {
        Direct {
            stack,
            wavelength_nm,
            work: Work::default(),
            response: FilmResponse::with_layers(stack.n_layers()),
            values: Vec::new(),
        }
    }

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

/// One refined cell: its level and, per sub-cell, the cubic of every channel.
struct Refined {
    level: u32,
    /// `n_ch` cubics per sub-cell, sub-cells in order.
    coeffs: Vec<[f64; 4]>,
}

/// Incidence cosine at normalised distance `v` ∈ [0, 1] from the critical cosine `c` on
/// `side` (0 towards grazing, 1 towards normal incidence).
fn cos_at(c: f64, side: usize, v: f64) -> f64 {
    if side == 0 {
        (c - v * c).max(0.0)
    } else {
        (c + v * (1.0 - c)).min(1.0)
    }
}

/// Normalised distance v of the fraction `p` ∈ [0, 1] through octave `o`: 2^−(o+1)(1 + p).
fn octave_v(o: usize, p: f64) -> f64 {
    (1.0 + p) / (2u64 << o) as f64
}

/// Normalised distance v at position `x` ∈ [0, 1] of the near zone: x² 2^−OCTAVES.
fn near_v(x: f64) -> f64 {
    x * x / (1u64 << OCTAVES) as f64
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
    /// `tol_abs / 2` in every cell, or the deepest refinement (2^11 sub-cells per initial
    /// cell) is reached; [`Self::max_error`] tells which. `tol_abs` is clamped to ≥ 1e-12.
    pub fn with_tolerance(stack: &FilmStack, wavelength_nm: f64, tol_abs: f64) -> AngleTable {
        let tol_abs = if tol_abs.is_nan() {
            DEFAULT_TOL_ABS
        } else {
            tol_abs.max(1e-12)
        };
        let c = stack.critical_cos().unwrap_or(0.0);
        let spans = [c, 1.0 - c];
        let mut table = AngleTable {
            stack: stack.clone(),
            wavelength_nm,
            tol_abs,
            cos_crit: c,
            inv_span: spans.map(|s| if s > 0.0 { 1.0 / s } else { 0.0 }),
            records: Box::new([Record::UNUSED; N_RECORDS]),
            near: [Near::default(); 2],
            fast: Vec::new(),
            cross: Vec::new(),
            absorb: Vec::new(),
            n_layers: stack.n_layers(),
            max_error: 0.0,
        };
        let mut direct = Direct::new(stack, wavelength_nm);
        let mut cell_no = 0u64;
        for side in (0..2).filter(|&side| spans[side] > 0.0) {
            // The near zone, uniform in x.
            let r = table.refine(
                |x| cos_at(c, side, near_v(x)),
                0.0,
                1.0,
                cell_no,
                &mut direct,
            );
            cell_no += 1;
            let n = 1usize << r.level;
            table.near[side] = Near {
                start: table.fast.len(),
                scale: n as f64,
                last: (n - 1) as f64,
            };
            table.push_cells(&r);
            // The octaves of v, each from `initial` cells of width ≤ 1/32 in cos θ_i (at
            // most one per record, at least one per octave).
            for o in 0..OCTAVES {
                let width = spans[side] / (2u64 << o) as f64;
                let mut initial_log2 = 0;
                while initial_log2 < RECORD_BITS && width > f64::from(1 << initial_log2) / 32.0 {
                    initial_log2 += 1;
                }
                let initial = 1usize << initial_log2;
                let records_per_cell = RECORDS_PER_OCTAVE >> initial_log2;
                for j in 0..initial {
                    let h = 1.0 / initial as f64;
                    let map = |p: f64| cos_at(c, side, octave_v(o, p));
                    let r = table.refine(map, j as f64 * h, h, cell_no, &mut direct);
                    cell_no += 1;
                    // Sub-cell m of cell j holds fraction bits [(j 2^level + m) 2^shift, …).
                    let shift = 52 - initial_log2 - r.level;
                    let start = (table.fast.len() as u32).wrapping_sub((j as u32) << r.level);
                    for q in j * records_per_cell..(j + 1) * records_per_cell {
                        let slot = record_slot(side, o, q);
                        table.records[slot] = Record {
                            start,
                            shift: shift as u16,
                            lift: (52 - shift) as u16,
                        };
                    }
                    table.push_cells(&r);
                }
            }
        }
        // An empty side (c = 0, or c = 1 to round-off) is reached only at v = 0 (or for a
        // NaN): its near zone is the other side's first cell, at the critical angle.
        for (side, span) in spans.into_iter().enumerate() {
            if span <= 0.0 {
                table.near[side] = Near {
                    start: table.near[1 - side].start,
                    scale: 0.0,
                    last: 0.0,
                };
            }
        }
        table
    }

    /// Append the cells of one refined cell.
    fn push_cells(&mut self, r: &Refined) {
        let quad = |c: &[[f64; 4]]| {
            // Transposed to [power][channel] so that the cubic runs across channels.
            let mut q = Quad::default();
            for (ch, c) in c.iter().enumerate() {
                for (power, v) in c.iter().enumerate() {
                    q.0[power][ch] = *v;
                }
            }
            q
        };
        let n = self.n_layers;
        for coeffs in r.coeffs.chunks_exact(N_FIXED + 2 * n) {
            self.fast.push(quad(&coeffs[..4]));
            self.cross.push(quad(&coeffs[4..N_FIXED]));
            let (a_s, a_p) = coeffs[N_FIXED..].split_at(n);
            for (c_s, c_p) in a_s.iter().zip(a_p) {
                let mut layer = [[0.0; 2]; 4];
                for power in 0..4 {
                    layer[power] = [c_s[power], c_p[power]];
                }
                self.absorb.push(layer);
            }
        }
    }

    /// Refine the cell [p_lo, p_lo + h] of a parameter p mapped to cos θ_i by `cos_of`,
    /// doubling its sub-cells until the measured error bound holds. The samples of one
    /// level and its checks at the midpoints between them are the samples of the next, so
    /// a level costs only its checks.
    fn refine(
        &mut self,
        cos_of: impl Fn(f64) -> f64,
        p_lo: f64,
        h_cell: f64,
        cell_no: u64,
        direct: &mut Direct,
    ) -> Refined {
        let n_ch = N_FIXED + 2 * self.n_layers;
        let mut rng = SplitMix(0x5EED_0000 ^ (cell_no << 8));
        // Samples at p_lo + h k / 3, k = 0..=3 n_sub, channel-major.
        let mut samples = Vec::with_capacity(4 * n_ch);
        for k in 0..4 {
            samples.extend_from_slice(direct.eval(cos_of(p_lo + h_cell * (k as f64 / 3.0))));
        }
        let mut level = 0;
        loop {
            let n_sub = 1usize << level;
            let h = h_cell / n_sub as f64;
            // Cubic coefficients per sub-cell and channel.
            let mut coeffs = vec![[0.0; 4]; n_sub * n_ch];
            for j in 0..n_sub {
                for ch in 0..n_ch {
                    let y = |k: usize| samples[(3 * j + k) * n_ch + ch];
                    coeffs[j * n_ch + ch] = cubic(y(0), y(1), y(2), y(3));
                }
            }
            // Measured error at the midpoints between samples (kept: t = (2m + 1)/6 on
            // sub-cell j is sample 6j + 2m + 1 of the next level) and at random points.
            let mut midpoints = Vec::with_capacity(3 * n_sub * n_ch);
            let mut err: f64 = 0.0;
            for j in 0..n_sub {
                let mut ts = [1.0 / 6.0, 0.5, 5.0 / 6.0, 0.0, 0.0];
                for t in ts.iter_mut().skip(3).take(RANDOM_CHECKS) {
                    *t = rng.next_unit();
                }
                for (m, &t) in ts.iter().enumerate() {
                    let p = p_lo + h * (j as f64 + t);
                    let v = direct.eval(cos_of(p));
                    for (ch, exact) in v.iter().enumerate() {
                        let e = (horner(&coeffs[j * n_ch + ch], t) - exact).abs();
                        err = err.max(if e.is_nan() { f64::INFINITY } else { e });
                    }
                    if m < 3 {
                        midpoints.extend_from_slice(v);
                    }
                }
            }
            if err <= 0.5 * self.tol_abs || level == MAX_LEVEL {
                self.max_error = self.max_error.max(err);
                return Refined { level, coeffs };
            }
            // Interleave samples and midpoints into the next level's samples.
            let mut next = Vec::with_capacity((6 * n_sub + 1) * n_ch);
            for (node, mid) in samples.chunks_exact(n_ch).zip(midpoints.chunks_exact(n_ch)) {
                next.extend_from_slice(node);
                next.extend_from_slice(mid);
            }
            next.extend_from_slice(&samples[3 * n_sub * n_ch..]);
            samples = next;
            level += 1;
        }
    }

    /// Cell and local coordinate t ∈ [0, 1] of an incidence cosine.
    ///
    /// The side of the critical angle and the normalised distance v ∈ [0, 1) from it take
    /// a subtraction and a multiplication; everything else is integer work on the bits of
    /// v: its exponent and top `RECORD_BITS` fraction bits pick a record (one subtraction),
    /// the record gives the cell as a shift of the fraction bits, and the bits below the
    /// shift are t, exactly. No square root, division, float-to-integer conversion, or
    /// branch on the angle, except into the near zone (v < 2^−OCTAVES, a cold path).
    #[inline(always)]
    fn locate(&self, cos_theta_i: f64) -> (usize, f64) {
        const FRACTION: u64 = (1 << 52) - 1;
        const ONE: u64 = 0x3FF0_0000_0000_0000;
        const BELOW_ONE: f64 = 1.0 - f64::EPSILON / 2.0;
        const KEY: u64 = (1023 << RECORD_BITS) - 1;
        // No clamp of cos θ_i to [0, 1]: beyond either end of a side v > 1, clamped below;
        // a side that is empty (inv_span 0, v = 0) leads to the other side's first cell at
        // the critical angle (see `with_tolerance`), which is also where a negative cosine or
        // −0 must go when c = 0. The side is the sign bit of u. (NaN stays NaN.)
        let u = cos_theta_i - self.cos_crit;
        let side = (u.to_bits() >> 63) as usize ^ 1;
        let v = u.abs() * self.inv_span[side];
        // (Written so that a NaN stays NaN, and so goes to the near zone.)
        let v = if v > BELOW_ONE { BELOW_ONE } else { v };
        let bits = v.to_bits();
        // Record r = 16 o + 15 − q for octave o (v ∈ [2^−(o+1), 2^−o)), fraction bits q.
        let r = KEY.wrapping_sub(bits >> (52 - RECORD_BITS)) as usize;
        if r >= OCTAVES * RECORDS_PER_OCTAVE {
            return self.locate_near(side, v);
        }
        let rec = self.records[side * OCTAVES * RECORDS_PER_OCTAVE + r];
        let fraction = bits & FRACTION;
        let k = rec.start.wrapping_add((fraction >> rec.shift) as u32);
        let t = f64::from_bits(((fraction << rec.lift) & FRACTION) | ONE) - 1.0;
        (k as usize, t)
    }

    /// [`Self::locate`] in the near zone.
    #[cold]
    #[inline(never)]
    fn locate_near(&self, side: usize, v: f64) -> (usize, f64) {
        let near = &self.near[side];
        let g = (v * (1u64 << OCTAVES) as f64).sqrt() * near.scale;
        let i = (if g < near.last { g } else { near.last }) as u32;
        (near.start + i as usize, g - f64::from(i))
    }

    /// R_s, R_p, T_s, T_p at incidence cosine `cos_theta_i` ∈ [0, 1] (clamped), within
    /// [`Self::max_error`] of the direct solution.
    #[inline(always)]
    pub fn lookup(&self, cos_theta_i: f64) -> PowerCoefficients {
        let (k, t) = self.locate(cos_theta_i);
        self.fast_at(k, t)
    }

    #[inline(always)]
    fn fast_at(&self, k: usize, t: f64) -> PowerCoefficients {
        let [r_s, r_p, t_s, t_p] = self.fast[k].at(t);
        PowerCoefficients { r_s, r_p, t_s, t_p }
    }

    /// Every tabulated quantity at `cos_theta_i`, the per-layer absorptances written
    /// straight into the caller's slices, in the order the light meets the layers (the
    /// first min(`n_layers`, lengths) entries; the others are left untouched).
    #[inline(always)]
    pub fn lookup_into(
        &self,
        cos_theta_i: f64,
        absorptance_s: &mut [f64],
        absorptance_p: &mut [f64],
    ) -> (PowerCoefficients, CrossTerms) {
        let (k, t) = self.locate(cos_theta_i);
        let power = self.fast_at(k, t);
        let [rho_re, rho_im, tau_re, tau_im] = self.cross[k].at(t);
        let t2 = t * t;
        let n = self.n_layers;
        let layers = &self.absorb[k * n..(k + 1) * n];
        let outs = absorptance_s.iter_mut().zip(absorptance_p.iter_mut());
        for (c, (a_s, a_p)) in layers.iter().zip(outs) {
            let [c0, c1, c2, c3] = c;
            let mut v = [0.0; 2];
            for pol in 0..2 {
                v[pol] = (c3[pol] * t + c2[pol]) * t2 + (c1[pol] * t + c0[pol]);
            }
            [*a_s, *a_p] = v;
        }
        let cross = CrossTerms {
            reflection: Complex64::new(rho_re, rho_im),
            transmission: Complex64::new(tau_re, tau_im),
        };
        (power, cross)
    }

    /// Every tabulated quantity at `cos_theta_i` into `out` (its vectors are resized to the
    /// number of layers).
    #[inline]
    pub fn lookup_full(&self, cos_theta_i: f64, out: &mut FullSample) {
        let n_layers = self.n_layers;
        out.absorptance_s.resize(n_layers, 0.0);
        out.absorptance_p.resize(n_layers, 0.0);
        let (power, cross) =
            self.lookup_into(cos_theta_i, &mut out.absorptance_s, &mut out.absorptance_p);
        out.power = power;
        out.reflection_cross = cross.reflection;
        out.transmission_cross = cross.transmission;
    }

    /// Largest absolute error over all channels measured during the build (see the module
    /// documentation). Below the requested tolerance unless a cell hit the deepest
    /// refinement.
    pub fn max_error(&self) -> f64 {
        self.max_error
    }

    /// Measure the largest absolute error over all channels against the direct solution
    /// at `n_points` fresh pseudo-random angles (half uniform in cos θ_i, half spread
    /// log-uniformly in the distance from the critical cosine over 2^−16…1 of each side,
    /// which crowds them at the critical angle from both sides, or at grazing without
    /// one), drawn from `seed`. Costs `n_points` direct solutions.
    pub fn measure_error(&self, n_points: usize, seed: u64) -> f64 {
        let mut direct = Direct::new(&self.stack, self.wavelength_nm);
        let mut sample = FullSample::new(self.stack.n_layers());
        let mut rng = SplitMix(seed);
        let mut tabulated = Vec::new();
        let mut err: f64 = 0.0;
        for i in 0..n_points {
            let u = rng.next_unit();
            let side = usize::from(i % 4 == 3 || self.inv_span[0] == 0.0);
            let cos = match i % 4 {
                0 | 1 => u,
                _ => cos_at(self.cos_crit, side, (-16.0 * u).exp2()),
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

    /// Critical incidence cosine at which the table's two sides meet (0 if none).
    pub fn critical_cos(&self) -> f64 {
        self.cos_crit
    }

    /// Number of interpolation cells (memory: 256 + 64·layers bytes each, and 3 kB of
    /// records).
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
        // Estrin's scheme, as the lookups evaluate it, gives the same values.
        let quad = Quad(k.map(|c| [c, 2.0 * c, 0.0, -c]));
        for t in [0.0, 0.1, 0.77, 1.0] {
            let v = quad.at(t);
            assert!((v[0] - f(t)).abs() < 1e-14 && (v[1] - 2.0 * f(t)).abs() < 1e-14);
            assert!(v[2] == 0.0 && (v[3] + f(t)).abs() < 1e-14);
        }
    }

    #[test]
    fn octaves_and_near_zone_meet_and_cover_each_side() {
        // Si → air: c = √(1 − (1/3.5)²) (Snell).
        let cc = (1.0 - 1.0 / 3.5f64.powi(2)).sqrt();
        assert_eq!(cos_at(cc, 0, 1.0), 0.0);
        assert_eq!(cos_at(cc, 1, 1.0), 1.0);
        assert_eq!((cos_at(cc, 0, 0.0), cos_at(cc, 1, 0.0)), (cc, cc));
        assert_eq!(octave_v(0, 1.0), 1.0);
        for o in 1..OCTAVES {
            assert_eq!(octave_v(o, 1.0), octave_v(o - 1, 0.0), "octave {o}");
        }
        assert_eq!(near_v(1.0), octave_v(OCTAVES - 1, 0.0));
        assert_eq!(near_v(0.0), 0.0);
    }

    /// Si → 90 nm ITO → air at 1000 nm: total internal reflection beyond ≈ 17° with an
    /// absorbing film.
    fn si_ito_air() -> (FilmStack, AngleTable) {
        let st = FilmStack::new(
            c(3.5, 0.0),
            vec![Layer::new(c(1.9, 0.025), 90.0)],
            c(1.0, 0.0),
        )
        .unwrap();
        let table = AngleTable::build(&st, 1000.0);
        (st, table)
    }

    #[test]
    fn cells_are_found_from_the_bits_of_v() {
        // Every lookup lands on an existing cell with t ∈ [0, 1], and on the right one: a
        // wrong cell would miss the direct solution by far more than the tolerance.
        let (st, table) = si_ito_air();
        let mut rng = SplitMix(3);
        for _ in 0..20_000 {
            let cos = rng.next_unit();
            let (k, t) = table.locate(cos);
            assert!(
                k < table.n_cells() && (0.0..=1.0).contains(&t),
                "cos {cos}: {k} {t}"
            );
            let p = table.lookup(cos);
            let f = st.solve(1000.0, cos);
            assert!(
                (p.r_s - f.s.reflectance).abs() < DEFAULT_TOL_ABS,
                "cos {cos}"
            );
        }
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
        // Out of range: a cosine below 0 (or −0) is grazing incidence, above 1 normal
        // incidence, with and without a critical angle in the table.
        for table in [table, AngleTable::build(&st.reversed(), 600.0)] {
            let (grazing, normal) = (table.lookup(0.0), table.lookup(1.0));
            for (x, at) in [(-0.0, grazing), (-0.25, grazing), (1.0 + 1e-9, normal)] {
                let p = table.lookup(x);
                assert!((p.r_s - at.r_s).abs() < 1e-12, "cos {x}: {p:?} vs {at:?}");
                assert!((p.t_p - at.t_p).abs() < 1e-12, "cos {x}: {p:?} vs {at:?}");
            }
        }
    }

    #[test]
    fn near_zone_and_both_sides_of_the_critical_angle_match_the_direct_solution() {
        // Si → ITO → air: total internal reflection with an absorbing film. Probe inside the
        // near zone (|cos − c| < 2^−8 of the side) and in the deepest octaves.
        let (st, table) = si_ito_air();
        let cc = table.critical_cos();
        let mut s = FullSample::new(1);
        for d in [-1e-3, -1e-5, -1e-7, -1e-12, 0.0, 1e-12, 1e-7, 1e-5, 1e-3] {
            let cos = cc + d;
            table.lookup_full(cos, &mut s);
            let f = st.solve(1000.0, cos);
            assert!(
                (s.power.r_p - f.p.reflectance).abs() < DEFAULT_TOL_ABS,
                "c{d:+e}"
            );
            assert!(
                (s.power.t_s - f.s.transmittance).abs() < DEFAULT_TOL_ABS,
                "c{d:+e}"
            );
            let a = f.s.absorptance[0];
            assert!((s.absorptance_s[0] - a).abs() < DEFAULT_TOL_ABS, "c{d:+e}");
        }
        assert!(table.lookup(f64::NAN).r_s.is_nan(), "NaN in, NaN out");
    }

    #[test]
    fn lookup_into_fills_only_the_layers() {
        let (st, table) = si_ito_air();
        let (mut a_s, mut a_p) = ([-1.0; 3], [-1.0; 3]);
        let (p, _) = table.lookup_into(0.99, &mut a_s, &mut a_p);
        let direct = st.solve(1000.0, 0.99);
        assert!((a_s[0] - direct.s.absorptance[0]).abs() < DEFAULT_TOL_ABS);
        assert!((p.r_s + p.t_s + a_s[0] - 1.0).abs() < 1e-12);
        assert_eq!((a_s[1], a_p[2]), (-1.0, -1.0));
    }
}
