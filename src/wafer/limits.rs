//! Reference absorptances of a wafer of thickness W and absorption coefficient α:
//! single pass, double pass, the Tiedje–Yablonovitch Lambertian limit, and the exact
//! absorptance of the same ideal Lambertian model; path-length enhancement.
//!
//! Model shared by the Lambertian references (the "ideal Lambertian wafer"): no reflection
//! for light arriving from outside (all of it enters); inside, light is a Lambertian
//! (isotropic) radiance; an ideal rear mirror (R = 1, specular or Lambertian: both keep a
//! Lambertian radiance Lambertian); at each internal arrival at the front, a fraction 1/n²
//! escapes (the étendue ratio of the escape cone for an ideal randomising front into air)
//! and the rest is sent back as a Lambertian radiance. With s the survival of one round
//! trip (down and up), A = (1 − s) / (1 − (1 − 1/n²) s).
//!
//! * Tiedje–Yablonovitch: s = e^{−4αW} (mean path 2W per pass of a Lambertian radiance).
//!   E. Yablonovitch, "Statistical ray optics", J. Opt. Soc. Am. 72, 899 (1982);
//!   T. Tiedje, E. Yablonovitch, G. D. Cody & B. G. Brooks, "Limiting efficiency of silicon
//!   solar cells", IEEE Trans. Electron Devices 31, 711 (1984) (citations from memory).
//! * Exact: s = 2E₃(2αW), the Lambertian average of e^{−2αW/μ} (A&S 5.1.4 with weight 2μ dμ).
//!   It absorbs slightly less than TY because ⟨e^{−x/μ}⟩ ≥ e^{−x⟨1/μ⟩} (Jensen's inequality).
//! * Weak absorption: A → 4n² αW for both: path-length enhancement 4n².
//!
//! Single pass: A = 1 − e^{−αW} (no reflection anywhere, one normal pass). Double pass
//! ("planar with ideal mirror and perfect antireflection"): A = 1 − e^{−2αW}.

use super::special::expint_en;

/// Absorption coefficient α = 4πk/λ in cm⁻¹ for extinction coefficient k ≥ 0 and vacuum
/// wavelength in nm.
pub fn alpha_per_cm(k: f64, wavelength_nm: f64) -> f64 {
    4.0 * std::f64::consts::PI * k / (wavelength_nm * 1e-7)
}

/// αW (dimensionless) from α in cm⁻¹ and W in µm.
#[inline]
fn alpha_w(alpha_per_cm: f64, thickness_um: f64) -> f64 {
    alpha_per_cm * thickness_um * 1e-4
}

/// 1 − e^{−αW}.
pub fn single_pass(alpha_per_cm: f64, thickness_um: f64) -> f64 {
    -(-alpha_w(alpha_per_cm, thickness_um)).exp_m1()
}

/// 1 − e^{−2αW}.
pub fn double_pass(alpha_per_cm: f64, thickness_um: f64) -> f64 {
    -(-2.0 * alpha_w(alpha_per_cm, thickness_um)).exp_m1()
}

/// A = (1 − s)/(1 − (1 − 1/n²) s) written without cancellation: with q = 1 − s,
/// A = q / (1/n² + (1 − 1/n²) q).
fn lambertian_from_loss(one_minus_s: f64, n: f64) -> f64 {
    let e = 1.0 / (n * n);
    one_minus_s / (e + (1.0 - e) * one_minus_s)
}

/// Tiedje–Yablonovitch Lambertian absorptance (1 − e^{−4αW}) / (1 − (1 − 1/n²) e^{−4αW}).
pub fn tiedje_yablonovitch(alpha_per_cm: f64, thickness_um: f64, n: f64) -> f64 {
    lambertian_from_loss(-(-4.0 * alpha_w(alpha_per_cm, thickness_um)).exp_m1(), n)
}

/// Exact absorptance of the ideal Lambertian wafer (module doc): round-trip survival
/// 2E₃(2αW) instead of e^{−4αW}.
pub fn lambertian_exact(alpha_per_cm: f64, thickness_um: f64, n: f64) -> f64 {
    let x = 2.0 * alpha_w(alpha_per_cm, thickness_um);
    // 1 − 2E₃(x) = x·(2E₂(x)) − … is cancellation-free via A&S 5.1.14: 2E₃ = e^{−x} − x E₂,
    // so 1 − 2E₃(x) = (1 − e^{−x}) + x E₂(x).
    let loss = if x == 0.0 {
        0.0
    } else {
        -(-x).exp_m1() + x * expint_en(2, x)
    };
    lambertian_from_loss(loss, n)
}

/// Weak-absorption path-length enhancement of the Lambertian limit, 4n².
pub fn lambertian_enhancement(n: f64) -> f64 {
    4.0 * n * n
}

/// Path-length enhancement Z: the number of wafer thicknesses W that a straight normal pass
/// must have to absorb the same fraction of the light that entered the wafer,
/// `Z = −ln(1 − A/(1 − R_front)) / (αW)`, with A the wafer's absorptance and R_front the
/// light reflected without entering it. Single pass gives Z = 1, double pass Z = 2, the ideal
/// Lambertian wafer Z → 4n² as αW → 0 (and Z = 4n²/(1 + 4n²αW) to first order).
/// `None` when αW = 0, R_front ≥ 1, or A/(1 − R_front) ≥ 1.
pub fn path_length_enhancement(
    absorptance: f64,
    reflectance_front: f64,
    alpha_per_cm: f64,
    thickness_um: f64,
) -> Option<f64> {
    let aw = alpha_w(alpha_per_cm, thickness_um);
    let entered = 1.0 - reflectance_front;
    if !(aw > 0.0 && entered > 0.0) {
        return None;
    }
    let f = absorptance / entered;
    if !(0.0..1.0).contains(&f) {
        return None;
    }
    Some(-(-f).ln_1p() / aw)
}

/// Reference absorptances at one wavelength.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct LimitPoint {
    pub wavelength_nm: f64,
    pub n: f64,
    pub k: f64,
    pub alpha_per_cm: f64,
    pub single_pass: f64,
    pub double_pass: f64,
    pub tiedje_yablonovitch: f64,
    pub lambertian_exact: f64,
}

/// Reference absorptances for a wafer of `thickness_um` at each wavelength, given the
/// material's n and k there.
pub fn limit_point(wavelength_nm: f64, n: f64, k: f64, thickness_um: f64) -> LimitPoint {
    let a = alpha_per_cm(k, wavelength_nm);
    LimitPoint {
        wavelength_nm,
        n,
        k,
        alpha_per_cm: a,
        single_pass: single_pass(a, thickness_um),
        double_pass: double_pass(a, thickness_um),
        tiedje_yablonovitch: tiedje_yablonovitch(a, thickness_um, n),
        lambertian_exact: lambertian_exact(a, thickness_um, n),
    }
}

/// Silicon's band-gap wavelength used for the "maximum current" band: 1107 nm ≈ hc/1.12 eV
/// (band gap of crystalline silicon at 300 K; M. A. Green, *Solar Cells*, Prentice-Hall
/// (1982), from memory). Green's 2008 k extends past it (phonon-assisted absorption), so
/// Lambertian currents over a band reaching 1200 nm may exceed the A = 1 current up to 1107 nm.
pub const SILICON_GAP_WAVELENGTH_NM: f64 = 1107.0;

/// Photocurrents of the reference absorptances of one wafer under one spectrum.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct LimitSummary {
    pub thickness_um: f64,
    /// First and last wavelength of the grid, nm: the integration band.
    pub band_nm: (f64, f64),
    pub tiedje_yablonovitch_ma_cm2: f64,
    pub lambertian_exact_ma_cm2: f64,
    pub single_pass_ma_cm2: f64,
    pub double_pass_ma_cm2: f64,
    /// A = 1 over the whole band.
    pub max_band_ma_cm2: f64,
    /// A = 1 from the band start to min(band end, [`SILICON_GAP_WAVELENGTH_NM`]).
    pub max_to_gap_ma_cm2: f64,
    pub points: Vec<LimitPoint>,
}

/// Reference absorptances on `grid_nm` (n, k of the wafer material there) and their
/// photocurrents under `spectrum` at its native resolution (absorptance interpolated
/// linearly onto the spectrum's wavelengths inside the grid's range, as
/// [`crate::spectrum::Spectrum::photocurrent_ma_cm2`] does).
pub fn limit_summary(
    spectrum: &crate::spectrum::Spectrum,
    grid_nm: &[f64],
    n: &[f64],
    k: &[f64],
    thickness_um: f64,
) -> Result<LimitSummary, crate::spectrum::SpectrumError> {
    let points: Vec<LimitPoint> = grid_nm
        .iter()
        .zip(n.iter().zip(k))
        .map(|(wl, (n, k))| limit_point(*wl, *n, *k, thickness_um))
        .collect();
    let curve = |f: fn(&LimitPoint) -> f64| -> Vec<f64> { points.iter().map(f).collect() };
    let j = |f: fn(&LimitPoint) -> f64| spectrum.photocurrent_ma_cm2(grid_nm, &curve(f));
    let band = (grid_nm[0], grid_nm[grid_nm.len() - 1]);
    Ok(LimitSummary {
        thickness_um,
        band_nm: band,
        tiedje_yablonovitch_ma_cm2: j(|p| p.tiedje_yablonovitch)?,
        lambertian_exact_ma_cm2: j(|p| p.lambertian_exact)?,
        single_pass_ma_cm2: j(|p| p.single_pass)?,
        double_pass_ma_cm2: j(|p| p.double_pass)?,
        max_band_ma_cm2: spectrum.max_photocurrent_ma_cm2(band),
        max_to_gap_ma_cm2: spectrum
            .max_photocurrent_ma_cm2((band.0, band.1.min(SILICON_GAP_WAVELENGTH_NM))),
        points,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn limits_order_and_weak_absorption() {
        let n = 3.6;
        for alpha in [1e-3, 1.0, 30.0, 100.0] {
            let w = 160.0;
            let (s, d) = (single_pass(alpha, w), double_pass(alpha, w));
            let (ty, ex) = (
                tiedje_yablonovitch(alpha, w, n),
                lambertian_exact(alpha, w, n),
            );
            assert!(s < d && d < ex && ex < ty, "α = {alpha}: {s} {d} {ex} {ty}");
        }
        // Z of the exact Lambertian absorptance tends to 4n² (R_front = 0).
        let alpha = 1e-6;
        let z =
            path_length_enhancement(lambertian_exact(alpha, 160.0, n), 0.0, alpha, 160.0).unwrap();
        assert!(
            (z / lambertian_enhancement(n) - 1.0).abs() < 1e-4,
            "Z = {z}"
        );
        let z1 = path_length_enhancement(single_pass(5.0, 160.0), 0.0, 5.0, 160.0).unwrap();
        assert!((z1 - 1.0).abs() < 1e-12);
    }

    #[test]
    fn exact_lambertian_uses_two_e3() {
        // Direct form (1 − s)/(1 − (1 − 1/n²)s) with s = 2E₃(2αW) at a moderate αW.
        let (alpha, w, n) = (50.0, 100.0, 3.5);
        let s = 2.0 * expint_en(3, 2.0 * alpha * w * 1e-4);
        let direct = (1.0 - s) / (1.0 - (1.0 - 1.0 / (n * n)) * s);
        assert!((lambertian_exact(alpha, w, n) - direct).abs() < 1e-14);
    }
}
