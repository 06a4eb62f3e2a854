//! Snell's law and the Fresnel equations at one planar interface between two homogeneous,
//! isotropic media with complex indices.
//!
//! Invariant: lossless media give R + T = 1 to round-off for s and p at every angle; beyond
//! the critical angle R = 1 and T = 0. Not here: layered stacks (`thinfilm`).
//!
//! # Conventions
//! * Media: incident index `n_i`, transmitting index `n_t`, both n + ik with k ≥ 0.
//! * Snell's law n_i sin θ_i = n_t sin θ_t with complex angles. The code works with the
//!   normal wave-vector component q = N cos θ (in units of k₀), q_t = √(n_t² − n_i² sin²θ_i),
//!   on the branch **Im q_t ≥ 0**, and Re q_t ≥ 0 when Im q_t = 0. With the e^{−iωt} time
//!   convention the transmitted wave e^{i k₀ q_t z} then decays (evanescent or absorbed) or
//!   carries energy away from the interface, never towards it. This is the choice of
//!   S. J. Byrnes, "Multilayer optical calculations", arXiv:1603.02720 (2016).
//! * Polarisation frame: ŝ normal to the plane of incidence, shared by all three waves, and
//!   p̂ = k̂ × ŝ for each wave. Boundary conditions (tangential E and H continuous) then give
//!   the amplitude coefficients of M. Born & E. Wolf, *Principles of Optics*, 7th ed. (1999),
//!   §1.5.2:
//!
//!   r_s = (n_i cos θ_i − n_t cos θ_t)/(n_i cos θ_i + n_t cos θ_t),
//!   t_s = 2 n_i cos θ_i /(n_i cos θ_i + n_t cos θ_t),
//!   r_p = (n_t cos θ_i − n_i cos θ_t)/(n_t cos θ_i + n_i cos θ_t),
//!   t_p = 2 n_i cos θ_i /(n_t cos θ_i + n_i cos θ_t).
//!
//!   Consequence of the frame: at normal incidence r_p = −r_s (the reflected p̂ is reversed
//!   relative to the incident p̂). The same form is used by Byrnes (2016).
//! * Power coefficients (Byrnes 2016): R = |r|²,
//!   T_s = |t_s|² Re(n_t cos θ_t)/Re(n_i cos θ_i),
//!   T_p = |t_p|² Re(n_t cos θ_t*)/Re(n_i cos θ_i*) (θ* complex conjugate),
//!   i.e. the normal component of the time-averaged Poynting vector.

use super::Index;
use super::polarisation::Mueller;
use num_complex::Complex64;

/// Normal wave-vector component q_t = n_t cos θ_t (units of k₀) on the forward branch.
///
/// * `n_i`, `n_t` – incident and transmitting indices, n + ik with k ≥ 0.
/// * `sin_theta_i` – sine of the (possibly complex) incidence angle.
///
/// Branch: Im q ≥ 0, and Re q ≥ 0 when Im q = 0 (see module doc).
fn forward_normal_component(n_i: Index, n_t: Index, sin_theta_i: Complex64) -> Complex64 {
    // Snell invariant β = n_i sin θ_i; q² = n_t² − β².
    let beta = n_i * sin_theta_i;
    let q = (n_t * n_t - beta * beta).sqrt();
    if q.im < 0.0 || (q.im == 0.0 && q.re < 0.0) {
        -q
    } else {
        q
    }
}

/// Complex cosine of the transmitted angle, cos θ_t = q_t / n_t, on the branch that makes
/// the transmitted wave decay or propagate away from the interface: Im(n_t cos θ_t) ≥ 0
/// (and Re(n_t cos θ_t) ≥ 0 when the imaginary part vanishes).
///
/// * `n_i`, `n_t` – complex indices n + ik, k ≥ 0; `n_t` must not be zero.
/// * `cos_theta_i` – cosine of the incidence angle (complex if the incident medium absorbs).
///
/// Beyond the critical angle of a lossless pair the result is purely imaginary (evanescent
/// wave). Source: Snell's law, Born & Wolf (1999) §1.5.1; branch after Byrnes (2016).
pub fn cos_theta_transmitted(n_i: Index, n_t: Index, cos_theta_i: Complex64) -> Complex64 {
    let sin_theta_i = sin_from_cos(cos_theta_i);
    forward_normal_component(n_i, n_t, sin_theta_i) / n_t
}

/// sin θ from cos θ, principal root (sin θ ≥ 0 for real angles in [0, π/2]).
fn sin_from_cos(cos_theta: Complex64) -> Complex64 {
    (Complex64::new(1.0, 0.0) - cos_theta * cos_theta).sqrt()
}

/// Amplitude and power response of one bare interface at one angle.
///
/// Build it with [`Fresnel::new`] (real incidence angle) or [`Fresnel::from_complex_cosine`];
/// all fields are then fixed. Amplitudes follow the convention of the module doc
/// (Born & Wolf 1999, §1.5.2; p̂ = k̂ × ŝ for every wave).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Fresnel {
    /// Index of the incident medium.
    pub n_i: Index,
    /// Index of the transmitting medium.
    pub n_t: Index,
    /// Cosine of the incidence angle.
    pub cos_theta_i: Complex64,
    /// Cosine of the transmitted angle on the forward branch (see [`cos_theta_transmitted`]).
    pub cos_theta_t: Complex64,
    /// Reflection amplitude coefficient, s polarisation.
    pub r_s: Complex64,
    /// Reflection amplitude coefficient, p polarisation (r_p = −r_s at normal incidence).
    pub r_p: Complex64,
    /// Transmission amplitude coefficient, s polarisation.
    pub t_s: Complex64,
    /// Transmission amplitude coefficient, p polarisation.
    pub t_p: Complex64,
}

impl Fresnel {
    /// Interface response for a real incidence angle.
    ///
    /// * `n_i`, `n_t` – indices n + ik (k ≥ 0) of incident and transmitting media, non-zero.
    /// * `cos_theta_i` – cosine of the incidence angle from the normal, in [0, 1]; values
    ///   outside are clamped (a debug build asserts they are within 1e-9).
    ///
    /// If the incident medium absorbs, the "real angle" is that of the real part of the
    /// wave vector only approximately; callers that model weakly absorbing thick layers use
    /// the real part of the index there (see DESIGN §4).
    pub fn new(n_i: Index, n_t: Index, cos_theta_i: f64) -> Fresnel {
        debug_assert!(
            (-1e-9..=1.0 + 1e-9).contains(&cos_theta_i),
            "cos_theta_i = {cos_theta_i} outside [0, 1]"
        );
        let c = cos_theta_i.clamp(0.0, 1.0);
        let sin = (1.0 - c * c).max(0.0).sqrt();
        Self::build(n_i, n_t, Complex64::new(c, 0.0), Complex64::new(sin, 0.0))
    }

    /// Interface response for a complex incidence cosine (an inhomogeneous wave in an
    /// absorbing incident medium, as met inside a thin-film stack).
    pub fn from_complex_cosine(n_i: Index, n_t: Index, cos_theta_i: Complex64) -> Fresnel {
        Self::build(n_i, n_t, cos_theta_i, sin_from_cos(cos_theta_i))
    }

    fn build(n_i: Index, n_t: Index, cos_theta_i: Complex64, sin_theta_i: Complex64) -> Fresnel {
        let one = Complex64::new(1.0, 0.0);
        let zero = Complex64::new(0.0, 0.0);
        // Identical media: no interface (avoids 0/0 at grazing incidence).
        if n_i == n_t {
            return Fresnel {
                n_i,
                n_t,
                cos_theta_i,
                cos_theta_t: cos_theta_i,
                r_s: zero,
                r_p: zero,
                t_s: one,
                t_p: one,
            };
        }
        // Normal components q = N cos θ; the coefficients below are Born & Wolf (1999)
        // §1.5.2 formulae multiplied through by n_i n_t to avoid dividing by N.
        let q_i = n_i * cos_theta_i;
        let q_t = forward_normal_component(n_i, n_t, sin_theta_i);
        let cos_theta_t = q_t / n_t;
        let ni2 = n_i * n_i;
        let nt2 = n_t * n_t;
        let den_s = q_i + q_t;
        let den_p = nt2 * q_i + ni2 * q_t;
        let r_s = (q_i - q_t) / den_s;
        let t_s = 2.0 * q_i / den_s;
        let r_p = (nt2 * q_i - ni2 * q_t) / den_p;
        let t_p = 2.0 * n_i * n_t * q_i / den_p;
        Fresnel {
            n_i,
            n_t,
            cos_theta_i,
            cos_theta_t,
            r_s,
            r_p,
            t_s,
            t_p,
        }
    }

    /// True when no power crosses the interface although the transmitting medium is lossless
    /// (total internal reflection: the transmitted wave is evanescent).
    pub fn is_total_internal_reflection(&self) -> bool {
        self.n_t.im == 0.0 && (self.n_t * self.cos_theta_t).re == 0.0
    }

    /// Power reflectance for s polarisation, |r_s|².
    pub fn reflectance_s(&self) -> f64 {
        self.r_s.norm_sqr()
    }

    /// Power reflectance for p polarisation, |r_p|².
    pub fn reflectance_p(&self) -> f64 {
        self.r_p.norm_sqr()
    }

    /// Power reflectance for unpolarised light, (R_s + R_p)/2.
    pub fn reflectance_unpolarised(&self) -> f64 {
        0.5 * (self.reflectance_s() + self.reflectance_p())
    }

    /// Ratio of normal power flux per |amplitude|², transmitted over incident, for s:
    /// Re(n_t cos θ_t)/Re(n_i cos θ_i) (Byrnes 2016). Zero when no power is incident
    /// (exactly grazing incidence) or none can leave (evanescent transmitted wave).
    pub fn power_factor_s(&self) -> f64 {
        let num = (self.n_t * self.cos_theta_t).re;
        let den = (self.n_i * self.cos_theta_i).re;
        flux_ratio(num, den)
    }

    /// Same as [`Fresnel::power_factor_s`] for p: Re(n_t cos θ_t*)/Re(n_i cos θ_i*)
    /// (Byrnes 2016). Equals the s factor when both media are lossless.
    pub fn power_factor_p(&self) -> f64 {
        let num = (self.n_t * self.cos_theta_t.conj()).re;
        let den = (self.n_i * self.cos_theta_i.conj()).re;
        flux_ratio(num, den)
    }

    /// Power transmittance for s polarisation, |t_s|² × [`Fresnel::power_factor_s`].
    pub fn transmittance_s(&self) -> f64 {
        self.t_s.norm_sqr() * self.power_factor_s()
    }

    /// Power transmittance for p polarisation, |t_p|² × [`Fresnel::power_factor_p`].
    pub fn transmittance_p(&self) -> f64 {
        self.t_p.norm_sqr() * self.power_factor_p()
    }

    /// Power transmittance for unpolarised light, (T_s + T_p)/2.
    pub fn transmittance_unpolarised(&self) -> f64 {
        0.5 * (self.transmittance_s() + self.transmittance_p())
    }

    /// Mueller matrix of reflection, in the (ŝ, p̂) Stokes frames of incident and reflected
    /// waves: [`Mueller::from_amplitudes`]`(r_s, r_p, 1)`.
    pub fn mueller_reflection(&self) -> Mueller {
        Mueller::from_amplitudes(self.r_s, self.r_p, 1.0)
    }

    /// Mueller matrix of transmission, in the (ŝ, p̂) Stokes frames of incident and
    /// transmitted waves, normalised to power flux along the normal:
    /// `from_amplitudes(t_s √f_s, t_p √f_p, 1)` with f_s, f_p the power factors.
    ///
    /// M₀₀ ± M₀₁ give exactly T_s and T_p. When both media are lossless f_s = f_p and the
    /// matrix is exact; when the transmitting medium absorbs, the s–p interference terms
    /// (M₂₂, M₂₃, …) use the geometric mean √(f_s f_p), an approximation: the cross term of
    /// the Poynting flux in an absorbing medium is not a property of the interface alone
    /// (common practice, no source).
    pub fn mueller_transmission(&self) -> Mueller {
        let a_s = self.t_s * self.power_factor_s().sqrt();
        let a_p = self.t_p * self.power_factor_p().sqrt();
        Mueller::from_amplitudes(a_s, a_p, 1.0)
    }
}

/// Flux ratio num/den, zero when nothing is incident or nothing leaves; never negative.
fn flux_ratio(num: f64, den: f64) -> f64 {
    if den <= 0.0 || num <= 0.0 {
        0.0
    } else {
        num / den
    }
}

/// Reflectance of a bare interface for unpolarised light (mean of s and p).
///
/// * `cos_theta_i` – cosine of the incidence angle from the facet normal, in [0, 1].
/// * `n_i`, `n_t` – complex indices `n + ik`, k ≥ 0, of incident and transmitting media.
///
/// Returns a fraction in [0, 1]; exactly 1 under total internal reflection.
/// Source: Fresnel equations; M. Born & E. Wolf, *Principles of Optics*, 7th ed.,
/// Cambridge Univ. Press (1999), §1.5.2.
pub fn reflectance_unpolarised(cos_theta_i: f64, n_i: Index, n_t: Index) -> f64 {
    Fresnel::new(n_i, n_t, cos_theta_i).reflectance_unpolarised()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(re: f64, im: f64) -> Complex64 {
        Complex64::new(re, im)
    }

    #[test]
    fn normal_incidence_p_is_minus_s() {
        let f = Fresnel::new(c(1.0, 0.0), c(1.5, 0.0), 1.0);
        assert!((f.r_s - c(-0.2, 0.0)).norm() < 1e-15);
        assert!((f.r_p + f.r_s).norm() < 1e-15);
        assert!((f.t_s - f.t_p).norm() < 1e-15);
    }

    #[test]
    fn identical_media_transmit_everything_even_at_grazing() {
        let n = c(1.5, 0.01);
        let f = Fresnel::new(n, n, 0.0);
        assert_eq!(f.reflectance_unpolarised(), 0.0);
        assert!(f.r_s.is_finite() && f.t_p.is_finite());
    }

    #[test]
    fn grazing_incidence_reflects_everything() {
        let f = Fresnel::new(c(1.0, 0.0), c(1.5, 0.0), 0.0);
        assert!((f.reflectance_s() - 1.0).abs() < 1e-15);
        assert!((f.reflectance_p() - 1.0).abs() < 1e-15);
        assert_eq!(f.transmittance_s(), 0.0);
    }

    #[test]
    fn evanescent_branch_decays_into_the_second_medium() {
        // Glass to air at 60°, beyond the critical angle 41.8°.
        let f = Fresnel::new(c(1.5, 0.0), c(1.0, 0.0), 60f64.to_radians().cos());
        let q_t = f.n_t * f.cos_theta_t;
        assert!(q_t.re.abs() < 1e-15 && q_t.im > 0.0, "q_t = {q_t}");
        assert!(f.is_total_internal_reflection());
        assert!((f.reflectance_s() - 1.0).abs() < 1e-14);
        assert!((f.reflectance_p() - 1.0).abs() < 1e-14);
        assert_eq!(f.transmittance_unpolarised(), 0.0);
    }

    #[test]
    fn absorbing_medium_wave_decays_and_carries_power_inward() {
        let f = Fresnel::new(c(1.0, 0.0), c(0.05, 4.0), 0.3);
        let q_t = f.n_t * f.cos_theta_t;
        assert!(q_t.im > 0.0 && q_t.re > 0.0, "q_t = {q_t}");
    }

    #[test]
    fn complex_cosine_entry_agrees_with_real_entry() {
        let a = Fresnel::new(c(1.3, 0.0), c(3.9, 0.02), 0.7);
        let b = Fresnel::from_complex_cosine(c(1.3, 0.0), c(3.9, 0.02), c(0.7, 0.0));
        assert!((a.r_p - b.r_p).norm() < 1e-15 && (a.t_s - b.t_s).norm() < 1e-15);
    }
}
