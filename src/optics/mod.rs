//! Complex refractive index, Snell's law, Fresnel coefficients, Stokes vectors and Mueller
//! matrices; [`materials`] gives n, k versus wavelength.
//!
//! Conventions used everywhere in this module (and by everything that calls it):
//!
//! * Index N = n + ik with k ≥ 0 for absorbing media; absorption coefficient α = 4πk/λ.
//!   Time dependence e^{−iωt}, so a plane wave e^{i(N k₀ ẑ·r − ωt)} decays along ẑ when k > 0.
//! * Angles are radians inside; callers pass cosines of the incidence angle measured from the
//!   facet normal.
//! * Polarisation frame of every wave at an interface: ŝ is normal to the plane of incidence
//!   (the same vector for incident, reflected and transmitted waves) and p̂ = k̂ × ŝ, so
//!   (ŝ, p̂, k̂) is right-handed for each wave. With this frame the p amplitude coefficients
//!   take the form of M. Born & E. Wolf, *Principles of Optics*, 7th ed., Cambridge Univ.
//!   Press (1999), §1.5.2: r_p = −r_s at normal incidence. See [`fresnel`].
//! * Stokes vectors are written in that (ŝ, p̂) frame: S1 = I_s − I_p. See [`polarisation`].
//!
//! Invariant: for lossless media R + T = 1 to round-off at every angle, including total
//! internal reflection (R = 1, T = 0). Not here: thin-film stacks (`thinfilm`), ray
//! directions in the wafer frame (`tracer`).

pub mod fresnel;
pub mod materials;
pub mod polarisation;

pub use fresnel::{Fresnel, cos_theta_transmitted, reflectance_unpolarised};
pub use polarisation::{Mueller, Stokes};

/// Complex refractive index N = n + ik, k ≥ 0.
pub type Index = num_complex::Complex64;

/// Absorption coefficient α = 4πk/λ in cm⁻¹ for an extinction coefficient `k` (≥ 0) at the
/// vacuum wavelength `wavelength_nm` (> 0).
///
/// Source: definition of the intensity attenuation coefficient, Born & Wolf (1999), optics of metals
/// (common practice; α = 4πk/λ follows from |e^{i N k₀ z}|² = e^{−2 k k₀ z}).
pub fn absorption_coefficient_per_cm(k: f64, wavelength_nm: f64) -> f64 {
    // λ in cm = λ_nm × 1e-7.
    4.0 * std::f64::consts::PI * k / (wavelength_nm * 1e-7)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn alpha_of_k_one_at_one_micron() {
        // k = 1 at λ = 1 µm = 1e-4 cm: α = 4π × 1e4 cm⁻¹.
        let a = absorption_coefficient_per_cm(1.0, 1000.0);
        assert!((a - 4.0 * std::f64::consts::PI * 1e4).abs() < 1e-8);
    }
}
