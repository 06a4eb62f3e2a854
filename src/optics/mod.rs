//! Complex refractive index, Snell's law, Fresnel coefficients, Stokes vectors and Mueller
//! matrices. Convention everywhere: N = n + ik with k ≥ 0 (absorbing), α = 4πk/λ.

pub mod materials;

/// Complex refractive index N = n + ik, k ≥ 0.
pub type Index = num_complex::Complex64;
