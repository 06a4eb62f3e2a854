//! What the tracer needs from a coated interface at one facet event: power coefficients and
//! Mueller cross terms for s and p, and the absorptance of each film layer.
//!
//! Polarisation basis (shared with `thinfilm` and `optics`): for every wave with unit
//! direction k the basis is (ŝ, p̂ = k × ŝ, k), ŝ = normalised k_i × n perpendicular to the
//! plane of incidence; r_p, t_p are in the convention of Born & Wolf (1999) §1.5.2, in which
//! r_p = −r_s at normal incidence (the same as Byrnes' `tmm`).

use crate::geometry::greater;
use crate::thinfilm::{AngleTable, FilmStack, Layer};

/// Most film layers a coating may have on one facet (scenario validation enforces it).
pub const MAX_FILM_LAYERS: usize = 12;

pub use crate::thinfilm::Side;

/// The other side.
#[inline]
pub fn other(side: Side) -> Side {
    match side {
        Side::Above => Side::Below,
        Side::Below => Side::Above,
    }
}

/// The coated interface's response at one incidence angle, from one side.
///
/// `r_cross` = r_s·conj(r_p) and `t_cross` = f·t_s·conj(t_p) (f the power factor turning
/// |t|² into T), as (re, im); they fill the lower 2×2 block of the Mueller matrices
/// ½[[R_s+R_p, R_s−R_p, 0, 0], [R_s−R_p, R_s+R_p, 0, 0], [0, 0, 2X, 2Y], [0, 0, −2Y, 2X]]
/// (see `tracer::polarisation` for the Stokes convention).
#[derive(Clone, Copy, Debug, Default)]
pub struct FacetSample {
    pub r_s: f64,
    pub r_p: f64,
    pub t_s: f64,
    pub t_p: f64,
    pub r_cross: (f64, f64),
    pub t_cross: (f64, f64),
    /// Absorptance of film layer j (top to bottom as the coating is listed) for s and p.
    pub a_s: [f64; MAX_FILM_LAYERS],
    pub a_p: [f64; MAX_FILM_LAYERS],
}

/// A coated interface as the tracer sees it (implemented over `thinfilm` angle tables).
/// (`Any` as for [`crate::texture::Texture`].)
pub trait FacetResponse: std::any::Any + Sync {
    /// Number of film layers (0 for a bare interface); at most [`MAX_FILM_LAYERS`].
    fn n_layers(&self) -> usize;
    /// Fills `out` for light arriving from `side` at `cos_theta` (in (0, 1]) on a facet whose
    /// normal makes an angle with cosine `cos_tilt` with the z axis (for coatings whose
    /// thickness depends on the facet tilt). Film absorptance entries past `n_layers` are
    /// left untouched.
    fn sample(&self, side: Side, cos_theta: f64, cos_tilt: f64, out: &mut FacetSample);
    /// Power coefficients only (R_s, R_p, T_s, T_p): the fast path for bare interfaces.
    fn power(&self, side: Side, cos_theta: f64, cos_tilt: f64) -> [f64; 4];
}

/// A bare interface between two non-absorbing media (real indices): closed-form Fresnel
/// coefficients, the fast path for uncoated facets (no table needed).
///
/// r_s = (n₁cosθ₁ − n₂cosθ₂)/(n₁cosθ₁ + n₂cosθ₂), r_p = (n₂cosθ₁ − n₁cosθ₂)/(n₂cosθ₁ + n₁cosθ₂),
/// t_s = 1 + r_s, t_p = (n₁/n₂)(1 + r_p), and in power form T = 1 − R (lossless); beyond the
/// critical angle R_s = R_p = 1 with the phase of total internal reflection in the cross
/// term. Source: M. Born & E. Wolf, *Principles of Optics*, 7th ed. (1999), §1.5.2 and §1.5.4.
#[derive(Clone, Copy, Debug)]
pub struct BareInterface {
    pub n_above: f64,
    pub n_below: f64,
}

impl BareInterface {
    fn indices(&self, side: Side) -> (f64, f64) {
        match side {
            Side::Above => (self.n_above, self.n_below),
            Side::Below => (self.n_below, self.n_above),
        }
    }

    /// (r_s, r_p) as complex numbers (re, im) at `cos_i` from `side`.
    #[inline]
    fn amplitudes(&self, side: Side, cos_i: f64) -> ((f64, f64), (f64, f64), f64) {
        let (n1, n2) = self.indices(side);
        let sin2_t = (n1 / n2).powi(2) * (1.0 - cos_i * cos_i);
        if sin2_t <= 1.0 {
            let cos_t = (1.0 - sin2_t).sqrt();
            let rs = (n1 * cos_i - n2 * cos_t) / (n1 * cos_i + n2 * cos_t);
            let rp = (n2 * cos_i - n1 * cos_t) / (n2 * cos_i + n1 * cos_t);
            ((rs, 0.0), (rp, 0.0), cos_t)
        } else {
            // n₂cosθ₂ = i·n₂·√(sin²θ₂ − 1): |r| = 1, only phases remain.
            let q = n2 * (sin2_t - 1.0).sqrt();
            let a = n1 * cos_i;
            let d = a * a + q * q;
            let rs = ((a * a - q * q) / d, -2.0 * a * q / d);
            // r_p = (n₂²cosθ₁ − n₁·(n₂cosθ₂))/(n₂²cosθ₁ + n₁·(n₂cosθ₂)) with n₂cosθ₂ = iq.
            let b = n2 * n2 * cos_i;
            let c = n1 * q;
            let dp = b * b + c * c;
            let rp = ((b * b - c * c) / dp, -2.0 * b * c / dp);
            (rs, rp, 0.0)
        }
    }
}

impl FacetResponse for BareInterface {
    fn n_layers(&self) -> usize {
        0
    }

    #[inline]
    fn sample(&self, side: Side, cos_theta: f64, _cos_tilt: f64, out: &mut FacetSample) {
        let (n1, n2) = self.indices(side);
        let (rs, rp, cos_t) = self.amplitudes(side, cos_theta);
        out.r_s = rs.0 * rs.0 + rs.1 * rs.1;
        out.r_p = rp.0 * rp.0 + rp.1 * rp.1;
        out.r_cross = (rs.0 * rp.0 + rs.1 * rp.1, rs.1 * rp.0 - rs.0 * rp.1);
        if cos_t > 0.0 {
            out.t_s = 1.0 - out.r_s;
            out.t_p = 1.0 - out.r_p;
            // t_s = 1 + r_s, t_p = (n₁/n₂)(1 + r_p) (real); f = n₂cosθ₂/(n₁cosθ₁).
            let f = n2 * cos_t / (n1 * cos_theta);
            let ts = 1.0 + rs.0;
            let tp = n1 / n2 * (1.0 + rp.0);
            out.t_cross = (f * ts * tp, 0.0);
        } else {
            out.t_s = 0.0;
            out.t_p = 0.0;
            out.t_cross = (0.0, 0.0);
        }
    }

    #[inline]
    fn power(&self, side: Side, cos_theta: f64, _cos_tilt: f64) -> [f64; 4] {
        let (n1, n2) = self.indices(side);
        fresnel_power(n1, n2, cos_theta)
    }
}

/// (R_s, R_p, T_s, T_p) from index `n1` into `n2` (real) at `cos_theta` (the formulas of
/// [`BareInterface`]); computed without branches, so that it vectorises over rays.
#[inline(always)]
pub fn fresnel_power(n1: f64, n2: f64, cos_theta: f64) -> [f64; 4] {
    let sin2_t = (n1 / n2).powi(2) * (1.0 - cos_theta * cos_theta);
    let cos_t = greater(1.0 - sin2_t, 0.0).sqrt();
    let (a, b) = (n1 * cos_theta, n2 * cos_t);
    let (c, d) = (n2 * cos_theta, n1 * cos_t);
    // r_s = (a − b)/(a + b), r_p = (c − d)/(c + d), over one division.
    let (ab, cd) = (a + b, c + d);
    let inv = 1.0 / (ab * cd);
    let rs = (a - b) * cd * inv;
    let rp = (c - d) * ab * inv;
    let (rs2, rp2) = (rs * rs, rp * rp);
    if sin2_t >= 1.0 {
        [1.0, 1.0, 0.0, 0.0] // total internal reflection
    } else {
        [rs2, rp2, 1.0 - rs2, 1.0 - rp2]
    }
}

/// Cosine of the {111} facet tilt on (100) silicon, atan(√2) = 54.7356° (1/√3): callers
/// tabulate directional coatings at this tilt and at 0° (flat); other tilts use the nearer.
pub const COS_111_TILT: f64 = 0.577_350_269_189_625_8;

/// How film thickness varies over a textured surface.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum CoatingGeometry {
    /// The given thickness along every facet normal. Default: the thickness engineers quote
    /// for a textured wafer is the one measured on the facets (e.g. by cross-section SEM),
    /// and plasma and atomic-layer deposition coat pyramids nearly conformally (common
    /// practice, no source).
    #[default]
    Conformal,
    /// Line-of-sight deposition: the given planar-equivalent thickness × cos(facet tilt).
    Directional,
}

/// A coated interface at one wavelength, from angle tables (one pair per facet tilt level
/// for directional coatings).
#[derive(Debug)]
pub struct CoatedInterface {
    n_layers: usize,
    /// (cos tilt, table from above, table from below), sorted by cos tilt.
    levels: Vec<(f64, AngleTable, AngleTable)>,
}

impl CoatedInterface {
    /// Tables for `stack` at `wavelength_nm`. For `Directional` coatings one pair of tables
    /// is built per distinct facet tilt in `cos_tilts` (rounded to 1e-4), each with the film
    /// thicknesses scaled by the tilt's cosine; hits use the nearest level.
    pub fn new(
        stack: &FilmStack,
        wavelength_nm: f64,
        geometry: CoatingGeometry,
        cos_tilts: &[f64],
    ) -> Result<CoatedInterface, crate::thinfilm::FilmError> {
        let n_layers = stack.n_layers();
        if n_layers > MAX_FILM_LAYERS {
            return Err(crate::thinfilm::FilmError::TooManyLayers {
                layers: n_layers,
                max: MAX_FILM_LAYERS,
            });
        }
        let mut tilts: Vec<f64> = match geometry {
            CoatingGeometry::Conformal => vec![1.0],
            CoatingGeometry::Directional if n_layers == 0 => vec![1.0],
            CoatingGeometry::Directional => cos_tilts
                .iter()
                .map(|c| (c.clamp(0.0, 1.0) * 1e4).round() / 1e4)
                .collect(),
        };
        tilts.sort_by(f64::total_cmp);
        tilts.dedup();
        if tilts.is_empty() {
            tilts.push(1.0);
        }
        let mut levels = Vec::with_capacity(tilts.len());
        for c in tilts {
            let scaled = if geometry == CoatingGeometry::Directional && n_layers > 0 {
                let layers = stack
                    .layers()
                    .iter()
                    .map(|l| Layer::new(l.index, l.thickness_nm * c))
                    .collect();
                FilmStack::new(stack.above(), layers, stack.below())?
            } else {
                stack.clone()
            };
            let above = AngleTable::build(&scaled, wavelength_nm);
            let below = AngleTable::build(&scaled.reversed(), wavelength_nm);
            levels.push((c, above, below));
        }
        Ok(CoatedInterface { n_layers, levels })
    }

    /// Largest interpolation error of any table (see `AngleTable::max_error`).
    pub fn max_table_error(&self) -> f64 {
        self.levels
            .iter()
            .map(|(_, a, b)| a.max_error().max(b.max_error()))
            .fold(0.0, f64::max)
    }

    #[inline]
    fn table(&self, side: Side, cos_tilt: f64) -> &AngleTable {
        let level = if self.levels.len() == 1 {
            &self.levels[0]
        } else {
            let i = self.levels.partition_point(|l| l.0 < cos_tilt);
            let below = i.saturating_sub(1);
            let i = i.min(self.levels.len() - 1);
            if (self.levels[i].0 - cos_tilt).abs() < (self.levels[below].0 - cos_tilt).abs() {
                &self.levels[i]
            } else {
                &self.levels[below]
            }
        };
        match side {
            Side::Above => &level.1,
            Side::Below => &level.2,
        }
    }
}

impl FacetResponse for CoatedInterface {
    fn n_layers(&self) -> usize {
        self.n_layers
    }

    #[inline(always)]
    fn sample(&self, side: Side, cos_theta: f64, cos_tilt: f64, out: &mut FacetSample) {
        let n = self.n_layers;
        let (a_s, a_p) = (&mut out.a_s[..n], &mut out.a_p[..n]);
        let (power, cross) = self.table(side, cos_tilt).lookup_into(cos_theta, a_s, a_p);
        // Tables list layers in the order light meets them; tallies go top to bottom.
        if side == Side::Below {
            a_s.reverse();
            a_p.reverse();
        }
        out.r_s = power.r_s;
        out.r_p = power.r_p;
        out.t_s = power.t_s;
        out.t_p = power.t_p;
        out.r_cross = (cross.reflection.re, cross.reflection.im);
        out.t_cross = (cross.transmission.re, cross.transmission.im);
    }

    #[inline]
    fn power(&self, side: Side, cos_theta: f64, cos_tilt: f64) -> [f64; 4] {
        let p = self.table(side, cos_tilt).lookup(cos_theta);
        [p.r_s, p.r_p, p.t_s, p.t_p]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_coating_with_too_many_layers_is_an_error_not_a_panic() {
        let layers = (0..=MAX_FILM_LAYERS)
            .map(|_| Layer::new(num_complex::Complex64::new(1.5, 0.0), 10.0))
            .collect();
        let one = num_complex::Complex64::new(1.0, 0.0);
        let stack = FilmStack::new(one, layers, num_complex::Complex64::new(3.9, 0.0)).unwrap();
        let e = CoatedInterface::new(&stack, 600.0, CoatingGeometry::Conformal, &[]).unwrap_err();
        assert!(e.to_string().contains("at most 12 layers"), "{e}");
    }

    #[test]
    fn cos_111_tilt_matches_the_silicon_facet_angle() {
        let c = crate::texture::SI_111_ANGLE_DEG.to_radians().cos();
        assert!(
            (COS_111_TILT - c).abs() < 1e-6 && (COS_111_TILT - 3f64.sqrt().recip()).abs() < 1e-15
        );
    }

    #[test]
    fn normal_incidence_reflectance_is_textbook() {
        // R = ((n1 − n2)/(n1 + n2))², Born & Wolf (1999) §1.5.3.
        let b = BareInterface {
            n_above: 1.0,
            n_below: 3.9,
        };
        let [rs, rp, ts, tp] = b.power(Side::Above, 1.0, 1.0);
        let r = ((1.0f64 - 3.9) / 4.9).powi(2);
        assert!((rs - r).abs() < 1e-15 && (rp - r).abs() < 1e-15);
        assert!((ts + rs - 1.0).abs() < 1e-15 && (tp + rp - 1.0).abs() < 1e-15);
    }

    #[test]
    fn brewster_and_total_internal_reflection() {
        let b = BareInterface {
            n_above: 1.0,
            n_below: 1.5,
        };
        let cos_b = 1.5f64.atan().cos();
        assert!(b.power(Side::Above, cos_b, 1.0)[1] < 1e-28);
        // From glass beyond the critical angle (41.8°): R = 1, and |r_s r_p*| = 1.
        let mut s = FacetSample::default();
        b.sample(Side::Below, 45f64.to_radians().cos(), 1.0, &mut s);
        assert!((s.r_s - 1.0).abs() < 1e-14 && (s.r_p - 1.0).abs() < 1e-14);
        assert!(((s.r_cross.0.powi(2) + s.r_cross.1.powi(2)).sqrt() - 1.0).abs() < 1e-14);
        assert_eq!(s.t_s + s.t_p, 0.0);
    }

    #[test]
    fn coated_sample_lists_film_absorptance_top_to_bottom_from_either_side() {
        // Two absorbing films of different k on silicon; from below the light meets them
        // bottom first, and the sample must still list them top to bottom. Reference: the
        // direct transfer-matrix solution (checked against `tmm` in tests/reference_tmm.rs).
        use num_complex::Complex64;
        let layers = vec![
            Layer::new(Complex64::new(1.9, 0.05), 80.0),
            Layer::new(Complex64::new(2.05, 0.002), 60.0),
        ];
        let stack =
            FilmStack::new(Complex64::new(1.0, 0.0), layers, Complex64::new(3.5, 0.0)).unwrap();
        let coated = CoatedInterface::new(&stack, 600.0, CoatingGeometry::Conformal, &[]).unwrap();
        let mut s = FacetSample::default();
        for (side, direct) in [
            (Side::Above, stack.solve(600.0, 0.97)),
            (Side::Below, stack.reversed().solve(600.0, 0.97)),
        ] {
            coated.sample(side, 0.97, 1.0, &mut s);
            let order: Vec<usize> = match side {
                Side::Above => vec![0, 1],
                Side::Below => vec![1, 0],
            };
            for (top_down, light_order) in order.into_iter().enumerate() {
                let (a_s, a_p) = (
                    direct.s.absorptance[light_order],
                    direct.p.absorptance[light_order],
                );
                assert!(
                    (s.a_s[top_down] - a_s).abs() < 1e-5,
                    "{side:?} layer {top_down}"
                );
                assert!(
                    (s.a_p[top_down] - a_p).abs() < 1e-5,
                    "{side:?} layer {top_down}"
                );
            }
            assert!((s.r_s - direct.s.reflectance).abs() < 1e-5);
            assert!((s.t_p - direct.p.transmittance).abs() < 1e-5);
            let rho = direct.reflection_cross();
            assert!((s.r_cross.0 - rho.re).abs() < 1e-5 && (s.r_cross.1 - rho.im).abs() < 1e-5);
        }
        // The two films absorb differently, so a swapped order would fail above.
        let d = stack.solve(600.0, 0.97);
        assert!((d.s.absorptance[0] - d.s.absorptance[1]).abs() > 1e-3);
    }

    #[test]
    fn transmission_cross_term_is_geometric_mean_for_real_coefficients() {
        // For real t_s, t_p the Mueller transmission block has |τ| = √(T_s T_p).
        let b = BareInterface {
            n_above: 1.0,
            n_below: 3.5,
        };
        let mut s = FacetSample::default();
        b.sample(Side::Above, 0.5, 1.0, &mut s);
        assert!((s.t_cross.0 - (s.t_s * s.t_p).sqrt()).abs() < 1e-14);
        b.sample(Side::Below, 0.95, 1.0, &mut s);
        assert!((s.t_cross.0 - (s.t_s * s.t_p).sqrt()).abs() < 1e-14);
    }
}
