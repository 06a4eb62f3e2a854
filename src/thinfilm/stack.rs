//! The film stack and its direct transfer-matrix solution at one wavelength and angle.

use crate::optics::Index;
use num_complex::Complex64;
use std::f64::consts::PI;

/// Smallest incidence cosine evaluated; smaller values (grazing incidence) are evaluated
/// here, which reproduces the grazing limit (R → 1 for any stack that differs from the
/// incidence medium) to about 1e-12. Common practice, no source.
pub(crate) const COS_MIN: f64 = 1e-12;

/// One homogeneous coherent film.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Layer {
    /// Complex index N = n + ik, n > 0, k ≥ 0.
    pub index: Index,
    /// Thickness along the facet normal, nm, > 0.
    pub thickness_nm: f64,
}

impl Layer {
    pub fn new(index: Index, thickness_nm: f64) -> Layer {
        Layer {
            index,
            thickness_nm,
        }
    }
}

/// Which half-space the light comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Side {
    /// From the `above` medium, through the layers top to bottom.
    Above,
    /// From the `below` medium, through the layers bottom to top.
    Below,
}

/// Invalid stack description.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FilmError {
    #[error(
        "{medium}: refractive index {index} is not usable\n  expected: finite N = n + ik with n > 0 and k ≥ 0\n  fix: check the material data or the literal index (k is the absorbing part, never negative)"
    )]
    BadIndex { medium: String, index: Index },
    #[error(
        "layer {layer} (counted from the top, first = 1): thickness {thickness_nm} nm is not usable\n  expected: a finite thickness > 0 nm\n  fix: give the thickness in nm, or leave the layer out"
    )]
    BadThickness { layer: usize, thickness_nm: f64 },
    #[error(
        "a coating of {layers} film layers is more than the tracer handles\n  expected: at most {max} layers per coated interface\n  fix: merge thin layers of the same material or describe the coating with fewer layers"
    )]
    TooManyLayers { layers: usize, max: usize },
}

/// A coherent stack of films between two half-spaces, listed from the top (`above`) down.
#[derive(Debug, Clone, PartialEq)]
pub struct FilmStack {
    above: Index,
    layers: Vec<Layer>,
    below: Index,
}

/// Response for one polarisation.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Amplitudes {
    /// Complex reflection amplitude at the top interface (Byrnes 2016 convention).
    pub r: Complex64,
    /// Complex transmission amplitude of the full E field, exit medium at the last interface.
    pub t: Complex64,
    /// Reflected power fraction |r|².
    pub reflectance: f64,
    /// Power fraction entering the exit medium: |t|² · `power_factor`.
    pub transmittance: f64,
    /// Factor turning |t|² into T: Re(N_f cos θ_f)/(n₀ cos θ₀) for s,
    /// Re(N_f conj(cos θ_f))/(n₀ cos θ₀) for p (Byrnes 2016, eqs. 20–21). 0 under total
    /// internal reflection.
    pub power_factor: f64,
    /// Absorbed power fraction of each layer, in the order light meets them (top to bottom
    /// for incidence from above), from the Poynting flux at the layer boundaries.
    pub absorptance: Vec<f64>,
}

/// Response of a stack for s and p polarisation at one wavelength and angle.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct FilmResponse {
    pub s: Amplitudes,
    pub p: Amplitudes,
}

impl FilmResponse {
    /// Zeroed response with room for `n_layers` absorptances, to reuse with
    /// [`FilmStack::solve_into`].
    pub fn with_layers(n_layers: usize) -> FilmResponse {
        let a = Amplitudes {
            absorptance: vec![0.0; n_layers],
            ..Amplitudes::default()
        };
        FilmResponse { s: a.clone(), p: a }
    }

    /// Reflectance for unpolarised light, (R_s + R_p)/2.
    pub fn reflectance_unpolarised(&self) -> f64 {
        0.5 * (self.s.reflectance + self.p.reflectance)
    }

    /// Transmittance for unpolarised light, (T_s + T_p)/2.
    pub fn transmittance_unpolarised(&self) -> f64 {
        0.5 * (self.s.transmittance + self.p.transmittance)
    }

    /// Absorptance of layer `layer` (0 = first met) for unpolarised light.
    /// Panics if `layer` is out of range (a bug in the caller, not user input).
    pub fn absorptance_unpolarised(&self, layer: usize) -> f64 {
        0.5 * (self.s.absorptance[layer] + self.p.absorptance[layer])
    }

    /// Total absorptance of the films for unpolarised light.
    pub fn absorptance_total_unpolarised(&self) -> f64 {
        0.5 * (self.s.absorptance.iter().sum::<f64>() + self.p.absorptance.iter().sum::<f64>())
    }

    /// Reflection cross term r_s · conj(r_p), which fills the lower-right block of the
    /// reflection Mueller matrix.
    pub fn reflection_cross(&self) -> Complex64 {
        self.s.r * self.p.r.conj()
    }

    /// Transmission cross term τ = t_s · conj(t_p) · √(f_s f_p), with f the
    /// [`Amplitudes::power_factor`]s. For a non-absorbing exit medium f_s = f_p, so τ is
    /// t_s conj(t_p) times the factor that turns |t|² into T; the geometric mean keeps
    /// |τ|² = T_s T_p (a non-depolarising Mueller matrix) when the exit medium absorbs.
    pub fn transmission_cross(&self) -> Complex64 {
        self.s.t * self.p.t.conj() * (self.s.power_factor * self.p.power_factor).sqrt()
    }

    /// Mueller matrix of reflection, ½[[R_s+R_p, R_s−R_p, 0, 0], [R_s−R_p, R_s+R_p, 0, 0],
    /// [0, 0, 2Re ρ, 2Im ρ], [0, 0, −2Im ρ, 2Re ρ]] with ρ = r_s conj(r_p).
    ///
    /// Stokes vector S = (|E_s|²+|E_p|², |E_s|²−|E_p|², 2Re(E_s conj E_p),
    /// 2Im(conj(E_s) E_p)) in each beam's own (s, p, k) frame; a normal-incidence mirror
    /// gives diag(R, R, −R, −R). Source: R. M. A. Azzam & N. M. Bashara, *Ellipsometry and
    /// Polarized Light*, North-Holland 1977, §2.6 (form of the matrix; signs from memory,
    /// checked here against the definition of S).
    pub fn mueller_reflection(&self) -> [[f64; 4]; 4] {
        mueller(
            self.s.reflectance,
            self.p.reflectance,
            self.reflection_cross(),
        )
    }

    /// Mueller matrix of transmission, as [`Self::mueller_reflection`] with T and
    /// [`Self::transmission_cross`].
    pub fn mueller_transmission(&self) -> [[f64; 4]; 4] {
        mueller(
            self.s.transmittance,
            self.p.transmittance,
            self.transmission_cross(),
        )
    }
}

/// Non-depolarising Mueller matrix of a diattenuating retarder with power coefficients
/// `a_s`, `a_p` and cross term `x` (see [`FilmResponse::mueller_reflection`]).
pub(crate) fn mueller(a_s: f64, a_p: f64, x: Complex64) -> [[f64; 4]; 4] {
    let (sum, diff) = (0.5 * (a_s + a_p), 0.5 * (a_s - a_p));
    [
        [sum, diff, 0.0, 0.0],
        [diff, sum, 0.0, 0.0],
        [0.0, 0.0, x.re, x.im],
        [0.0, 0.0, -x.im, x.re],
    ]
}

fn check_index(medium: &str, index: Index) -> Result<(), FilmError> {
    let ok = index.re.is_finite() && index.im.is_finite() && index.re > 0.0 && index.im >= 0.0;
    if ok {
        Ok(())
    } else {
        Err(FilmError::BadIndex {
            medium: medium.to_owned(),
            index,
        })
    }
}

impl FilmStack {
    /// A stack of `layers` (top to bottom) between the half-spaces `above` and `below`.
    ///
    /// Errors: an index that is not finite, has n ≤ 0 or k < 0; a thickness that is not
    /// finite and > 0.
    pub fn new(above: Index, layers: Vec<Layer>, below: Index) -> Result<FilmStack, FilmError> {
        check_index("incidence medium (above)", above)?;
        check_index("exit medium (below)", below)?;
        for (i, layer) in layers.iter().enumerate() {
            check_index(&format!("layer {}", i + 1), layer.index)?;
            if !(layer.thickness_nm.is_finite() && layer.thickness_nm > 0.0) {
                return Err(FilmError::BadThickness {
                    layer: i + 1,
                    thickness_nm: layer.thickness_nm,
                });
            }
        }
        Ok(FilmStack {
            above,
            layers,
            below,
        })
    }

    /// A bare interface between two half-spaces.
    ///
    /// Errors as [`FilmStack::new`].
    pub fn bare(above: Index, below: Index) -> Result<FilmStack, FilmError> {
        FilmStack::new(above, Vec::new(), below)
    }

    /// The same stack seen from below: half-spaces swapped, layers in reverse order.
    pub fn reversed(&self) -> FilmStack {
        let mut layers = self.layers.clone();
        layers.reverse();
        FilmStack {
            above: self.below,
            layers,
            below: self.above,
        }
    }

    /// The stack as met by light coming from `side` (itself, or [`Self::reversed`]).
    pub fn facing(&self, side: Side) -> FilmStack {
        match side {
            Side::Above => self.clone(),
            Side::Below => self.reversed(),
        }
    }

    pub fn above(&self) -> Index {
        self.above
    }

    pub fn below(&self) -> Index {
        self.below
    }

    pub fn layers(&self) -> &[Layer] {
        &self.layers
    }

    pub fn n_layers(&self) -> usize {
        self.layers.len()
    }

    /// Incidence cosine at which the exit medium turns evanescent, when Re(N_below) is below
    /// the (real) incidence index: cos θ_c = √(n₀² − n_f²)/n₀. `None` otherwise.
    pub fn critical_cos(&self) -> Option<f64> {
        let (n0, nf) = (self.above.re, self.below.re);
        (nf < n0).then(|| ((n0 - nf) * (n0 + nf)).sqrt() / n0)
    }

    /// Response for light from above at one wavelength and angle.
    ///
    /// * `wavelength_nm` – vacuum wavelength, nm, finite and > 0.
    /// * `cos_theta_i` – cosine of the incidence angle in the incidence medium, (0, 1].
    ///   Values below 1e-12 (grazing) are evaluated at 1e-12, above 1 at 1.
    ///
    /// Never NaN or infinite for a valid stack, including beyond the critical angle and for
    /// layers far thicker than their decay length.
    pub fn solve(&self, wavelength_nm: f64, cos_theta_i: f64) -> FilmResponse {
        let mut out = FilmResponse::with_layers(self.layers.len());
        self.solve_into(wavelength_nm, cos_theta_i, &mut out);
        out
    }

    /// [`Self::solve`] into a reused response (its absorptance vectors are resized).
    pub fn solve_into(&self, wavelength_nm: f64, cos_theta_i: f64, out: &mut FilmResponse) {
        debug_assert!(wavelength_nm.is_finite() && wavelength_nm > 0.0);
        self.solve_with(wavelength_nm, cos_theta_i, &mut Work::default(), out);
    }

    /// [`Self::solve_into`] with reused scratch space (the angle tables' inner loop).
    pub(crate) fn solve_with(
        &self,
        wavelength_nm: f64,
        cos_theta_i: f64,
        work: &mut Work,
        out: &mut FilmResponse,
    ) {
        work.m.resize(self.layers.len() + 2, Medium::default());
        self.prepare(wavelength_nm, cos_theta_i, work);
        work.polarisation(Pol::S, &mut out.s);
        work.polarisation(Pol::P, &mut out.p);
    }

    /// Normal wave-vector components and phase factors of every medium.
    fn prepare(&self, wavelength_nm: f64, cos_theta_i: f64, w: &mut Work) {
        let cos_i = if cos_theta_i >= COS_MIN {
            cos_theta_i.min(1.0)
        } else {
            COS_MIN
        };
        let n0 = self.above.re;
        let q0 = n0 * cos_i;
        let q0_sq = q0 * q0;
        let n0_sq = n0 * n0;
        let k0 = 2.0 * PI / wavelength_nm;
        w.q0 = q0;
        let last = self.layers.len() + 1;
        for m in 0..=last {
            let index = if m == 0 {
                Complex64::new(n0, 0.0)
            } else if m == last {
                self.below
            } else {
                self.layers[m - 1].index
            };
            let n_sq = index * index;
            // q = N cos θ = √(N² − n₀² sin² θ₀) = √((N² − n₀²) + q₀²): written this way a
            // medium equal to the incidence medium gets q = q₀ exactly, even at grazing.
            let q = if m == 0 {
                Complex64::new(q0, 0.0)
            } else {
                forward_sqrt(Complex64::new(n_sq.re - n0_sq, n_sq.im) + q0_sq)
            };
            let med = &mut w.m[m];
            med.index = index;
            med.n_sq = n_sq;
            med.q = q;
            // p flux weight conj(N)·cos θ = conj(N) q / N (Byrnes 2016, eq. 21, conjugated).
            med.y_p = index.conj() * q / index;
            if m > 0 && m < last {
                // Phase δ = k₀ d q with Im δ ≥ 0: exp(iδ) and exp(2iδ) are bounded by 1.
                let delta = k0 * self.layers[m - 1].thickness_nm * q;
                let i_delta = Complex64::new(-delta.im, delta.re);
                med.e1 = i_delta.exp();
                // Squaring costs one rounding (relative 2⁻⁵²) and saves a complex exp.
                med.e2 = med.e1 * med.e1;
            }
        }
    }
}

/// Square root on the forward branch: Im ≥ 0 (decaying), and Re ≥ 0 (outgoing) when the
/// argument is real. The `+ 0.0` turns a −0.0 imaginary part (lossless medium) into +0.0,
/// so that an evanescent wave gets +i|q| and decays.
#[inline]
fn forward_sqrt(z: Complex64) -> Complex64 {
    Complex64::new(z.re, z.im + 0.0).sqrt()
}

#[derive(Clone, Copy, PartialEq, Eq)]
enum Pol {
    S,
    P,
}

/// Quantities of one medium (and of the interface below it) for one wavelength and angle.
#[derive(Clone, Copy, Default)]
struct Medium {
    index: Complex64,
    n_sq: Complex64,
    /// N cos θ of the forward wave.
    q: Complex64,
    /// p flux weight conj(N) cos θ.
    y_p: Complex64,
    /// exp(iδ) and exp(2iδ) across the layer (layers only).
    e1: Complex64,
    e2: Complex64,
    /// Fresnel amplitudes of the interface from this medium to the next.
    r: Complex64,
    t: Complex64,
    /// Effective reflection amplitude of everything below, seen from this medium at its
    /// bottom interface.
    gamma: Complex64,
}

/// Scratch space of one solution; index 0 = incidence medium, 1..=L layers, L+1 exit.
/// Reusable between calls (see [`FilmStack::solve_with`]).
#[derive(Default)]
pub(crate) struct Work {
    q0: f64,
    m: Vec<Medium>,
}

impl Work {
    /// Fresnel amplitudes at the interface from medium `i` to `i + 1` (Byrnes 2016,
    /// eqs. 13–14, written with q = N cos θ).
    fn fresnel(&self, pol: Pol, i: usize) -> (Complex64, Complex64) {
        let (mi, mf) = (&self.m[i], &self.m[i + 1]);
        let (num, den, t_num) = match pol {
            Pol::S => (mi.q - mf.q, mi.q + mf.q, 2.0 * mi.q),
            Pol::P => {
                let (a, b) = (mf.n_sq * mi.q, mi.n_sq * mf.q);
                (a - b, a + b, 2.0 * mi.index * mf.index * mi.q)
            }
        };
        if den == Complex64::new(0.0, 0.0) {
            // Both media at exactly grazing refraction: they are optically identical here.
            (Complex64::new(0.0, 0.0), Complex64::new(1.0, 0.0))
        } else {
            (num / den, t_num / den)
        }
    }

    /// Flux weight y of medium `m`: the normal Poynting flux of forward amplitude a and
    /// backward amplitude b (same plane) is Re(y conj(a + b)(a − b)) (Byrnes 2016, eq. 21;
    /// for p written with the real part of the conjugate).
    fn flux_weight(&self, pol: Pol, m: usize) -> Complex64 {
        match pol {
            Pol::S => self.m[m].q,
            Pol::P => self.m[m].y_p,
        }
    }

    fn polarisation(&mut self, pol: Pol, out: &mut Amplitudes) {
        let last = self.m.len() - 1; // exit medium
        let n_layers = last - 1;
        for i in 0..last {
            let (r, t) = self.fresnel(pol, i);
            self.m[i].r = r;
            self.m[i].t = t;
        }

        // Bottom up: Γ_i = (r_i + Γ_{i+1} e^{2iδ_{i+1}}) / (1 + r_i Γ_{i+1} e^{2iδ_{i+1}}),
        // the Airy sum of multiple reflections in layer i+1 (Born & Wolf 1999 §1.6.4).
        self.m[last - 1].gamma = self.m[last - 1].r;
        for i in (0..last - 1).rev() {
            let g = self.m[i + 1].gamma * self.m[i + 1].e2;
            let r_i = self.m[i].r;
            self.m[i].gamma = (r_i + g) / (1.0 + r_i * g);
        }
        let r = self.m[0].gamma;

        // Top down: forward amplitude at the top of layer m,
        // a_m = a_{m−1} e^{iδ_{m−1}} t_{m−1} / (1 + r_{m−1} Γ_m e^{2iδ_m});
        // backward amplitude there b_m = a_m Γ_m e^{2iδ_m}. Each layer absorbs the flux
        // entering it minus the flux entering the next (Byrnes 2016, §4).
        out.absorptance.resize(n_layers, 0.0);
        let reflectance = r.norm_sqr();
        let mut entering = 1.0 - reflectance; // flux into layer 1 (real incidence medium)
        let mut a = Complex64::new(1.0, 0.0);
        for m in 1..=last {
            let above = &self.m[m - 1];
            let carried = if m == 1 { a } else { a * above.e1 };
            if m == last {
                a = carried * above.t;
                break;
            }
            let bounce = self.m[m].gamma * self.m[m].e2;
            a = carried * above.t / (1.0 + above.r * bounce);
            if m > 1 {
                let b = a * bounce;
                let flux = (self.flux_weight(pol, m) * (a + b).conj() * (a - b)).re / self.q0;
                out.absorptance[m - 2] = entering - flux;
                entering = flux;
            }
        }
        let t = a;
        let power_factor = (self.flux_weight(pol, last).re / self.q0).max(0.0);
        let transmittance = t.norm_sqr() * power_factor;
        if n_layers > 0 {
            out.absorptance[n_layers - 1] = entering - transmittance;
        }
        out.r = r;
        out.t = t;
        out.reflectance = reflectance;
        out.transmittance = transmittance;
        out.power_factor = power_factor;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(re: f64, im: f64) -> Index {
        Complex64::new(re, im)
    }

    #[test]
    fn bare_interface_matches_fresnel_at_normal_incidence() {
        // Born & Wolf (1999) §1.5.2: R = ((n1 − n2)/(n1 + n2))², T = 4 n1 n2 /(n1 + n2)².
        let st = FilmStack::bare(c(1.0, 0.0), c(1.5, 0.0)).unwrap();
        let f = st.solve(500.0, 1.0);
        assert!((f.s.reflectance - 0.04).abs() < 1e-15);
        assert!((f.p.reflectance - 0.04).abs() < 1e-15);
        assert!((f.s.transmittance - 0.96).abs() < 1e-15);
        assert!(
            (f.s.r + f.p.r).norm() < 1e-15,
            "r_p = −r_s at normal incidence"
        );
    }

    #[test]
    fn brewster_angle_cancels_p_reflection() {
        // tan θ_B = n2/n1 (Born & Wolf 1999 §1.5.3).
        let th = 1.5f64.atan();
        let st = FilmStack::bare(c(1.0, 0.0), c(1.5, 0.0)).unwrap();
        let f = st.solve(500.0, th.cos());
        assert!(f.p.reflectance < 1e-28, "{}", f.p.reflectance);
        assert!(f.s.reflectance > 0.1);
    }

    #[test]
    fn total_internal_reflection_is_total_and_finite() {
        let st = FilmStack::bare(c(3.5, 0.0), c(1.0, 0.0)).unwrap();
        for cos in [0.3, 0.5, 0.9, 0.95] {
            let f = st.solve(800.0, cos);
            assert!((f.s.reflectance - 1.0).abs() < 1e-14);
            assert!((f.p.reflectance - 1.0).abs() < 1e-14);
            assert_eq!(f.s.transmittance, 0.0);
        }
    }

    #[test]
    fn thick_evanescent_and_opaque_layers_stay_finite() {
        let layers = vec![Layer::new(c(1.0, 0.0), 1e7), Layer::new(c(0.05, 7.0), 1e6)];
        let st = FilmStack::new(c(3.5, 0.0), layers, c(3.5, 0.0)).unwrap();
        for cos in [COS_MIN, 0.1, 0.5, 1.0] {
            let f = st.solve(1000.0, cos);
            for a in [&f.s, &f.p] {
                assert!(a.r.re.is_finite() && a.r.im.is_finite() && a.t.norm().is_finite());
                let sum = a.reflectance + a.transmittance + a.absorptance.iter().sum::<f64>();
                assert!((sum - 1.0).abs() < 1e-12, "sum {sum}");
            }
        }
    }

    #[test]
    fn grazing_incidence_reflects_everything() {
        let st = FilmStack::bare(c(1.0, 0.0), c(3.9, 0.02)).unwrap();
        let f = st.solve(600.0, 0.0);
        assert!((f.s.reflectance - 1.0).abs() < 1e-10);
        assert!((f.p.reflectance - 1.0).abs() < 1e-10);
    }

    #[test]
    fn identical_media_reflect_nothing_even_at_grazing() {
        let st = FilmStack::bare(c(1.5, 0.0), c(1.5, 0.0)).unwrap();
        for cos in [0.0, 1e-6, 0.3, 1.0] {
            let f = st.solve(600.0, cos);
            assert_eq!(f.s.reflectance, 0.0);
            assert!((f.p.transmittance - 1.0).abs() < 1e-15);
        }
    }

    #[test]
    fn invalid_inputs_are_rejected() {
        assert!(FilmStack::bare(c(1.0, 0.0), c(3.5, -0.1)).is_err());
        assert!(FilmStack::bare(c(0.0, 0.0), c(3.5, 0.0)).is_err());
        assert!(FilmStack::bare(c(f64::NAN, 0.0), c(3.5, 0.0)).is_err());
        let e = FilmStack::new(c(1.0, 0.0), vec![Layer::new(c(2.0, 0.0), 0.0)], c(3.5, 0.0));
        assert!(matches!(e, Err(FilmError::BadThickness { layer: 1, .. })));
        let e = FilmStack::new(
            c(1.0, 0.0),
            vec![Layer::new(c(2.0, 0.0), f64::INFINITY)],
            c(3.5, 0.0),
        );
        assert!(e.is_err());
    }

    #[test]
    fn reversed_twice_is_identity() {
        let layers = vec![
            Layer::new(c(2.0, 0.01), 70.0),
            Layer::new(c(1.45, 0.0), 10.0),
        ];
        let st = FilmStack::new(c(1.0, 0.0), layers, c(3.6, 0.01)).unwrap();
        assert_eq!(st.reversed().reversed(), st);
        assert_eq!(st.reversed().layers()[0].thickness_nm, 10.0);
        assert_eq!(st.facing(Side::Below), st.reversed());
    }

    #[test]
    fn mueller_mirror_flips_handedness() {
        let st = FilmStack::bare(c(1.0, 0.0), c(0.05, 7.0)).unwrap();
        let m = st.solve(1000.0, 1.0).mueller_reflection();
        assert!((m[2][2] + m[0][0]).abs() < 1e-12 && (m[3][3] + m[0][0]).abs() < 1e-12);
    }
}
