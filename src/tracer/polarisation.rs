//! Stokes vectors carried by rays, rotated into each facet's plane of incidence.
//!
//! Convention: a ray with unit direction k carries a reference axis e₁ ⊥ k; with
//! e₂ = k × e₁ the field is E = E₁e₁ + E₂e₂ and the Stokes vector is
//! S₀ = |E₁|² + |E₂|², S₁ = |E₁|² − |E₂|², S₂ − iS₃ = 2E₁·conj(E₂) (the convention of
//! `optics::polarisation`: S₃ = 2 Im(conj(E_s)·E_p), time dependence e^{−iωt}).
//! At a facet the frame is rotated so that e₁ = ŝ; the interface then acts by a Jones
//! matrix diag(a_s, a_p), i.e. the Mueller matrix
//! ½[[|a_s|²+|a_p|², |a_s|²−|a_p|², 0, 0], [|a_s|²−|a_p|², |a_s|²+|a_p|², 0, 0],
//!   [0, 0, 2X, 2Y], [0, 0, −2Y, 2X]] with X + iY = a_s·conj(a_p), the same matrix as
//! `optics::Mueller::from_amplitudes`
//! (R. A. Chipman, W. S. T. Lam & G. Young, *Polarized Light and Optical Systems*,
//! CRC Press 2018; the sign of the Y terms follows from the S₃ definition above).

use crate::geometry::Vec3;

/// A Stokes vector and its reference axis e₁ (unit, ⊥ to the ray direction).
#[derive(Clone, Copy, Debug)]
pub struct Polarised {
    pub s: [f64; 4],
    pub e1: Vec3,
}

/// Rotates the Stokes vector `s` from reference axis `e1` to `s_hat` about the direction
/// `k`: with cos ψ = e₁·ŝ, sin ψ = e₂·ŝ, S₁' = cos2ψ·S₁ + sin2ψ·S₂, S₂' = −sin2ψ·S₁ + cos2ψ·S₂
/// (Chipman, Lam & Young 2018, rotation Mueller matrix).
#[inline]
pub fn rotate_into(s: [f64; 4], e1: Vec3, k: Vec3, s_hat: Vec3) -> [f64; 4] {
    let e2 = k.cross(e1);
    let (c, sn) = (e1.dot(s_hat), e2.dot(s_hat));
    // cos 2ψ and sin 2ψ from the (not necessarily unit, by round-off) pair (c, sn).
    let norm = c * c + sn * sn;
    if norm == 0.0 {
        return s;
    }
    let c2 = (c * c - sn * sn) / norm;
    let s2 = 2.0 * c * sn / norm;
    [s[0], c2 * s[1] + s2 * s[2], -s2 * s[1] + c2 * s[2], s[3]]
}

/// Power of the Stokes vector `s` (in the facet's s/p frame) after an interface with power
/// coefficients `c_s`, `c_p`: ½[(c_s + c_p)S₀ + (c_s − c_p)S₁].
#[inline]
pub fn power(s: &[f64; 4], c_s: f64, c_p: f64) -> f64 {
    0.5 * ((c_s + c_p) * s[0] + (c_s - c_p) * s[1])
}

/// Applies the interface Mueller matrix (power coefficients `c_s`, `c_p`, cross term
/// `(x, y)` = a_s·conj(a_p) scaled like the power) to `s` in the facet's s/p frame.
#[inline]
pub fn apply(s: &[f64; 4], c_s: f64, c_p: f64, (x, y): (f64, f64)) -> [f64; 4] {
    let sum = 0.5 * (c_s + c_p);
    let dif = 0.5 * (c_s - c_p);
    [
        sum * s[0] + dif * s[1],
        dif * s[0] + sum * s[1],
        x * s[2] + y * s[3],
        -y * s[2] + x * s[3],
    ]
}

/// Unit vector ŝ ⊥ plane of incidence, k × n normalised; falls back to `fallback` (the
/// ray's reference axis) at normal incidence where the plane is undefined.
#[inline]
pub fn s_axis(k: Vec3, n: Vec3, fallback: Vec3) -> Vec3 {
    let c = k.cross(n);
    let l2 = c.length_squared();
    if l2 < 1e-24 { fallback } else { c / l2.sqrt() }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rotation_by_quarter_turn_swaps_s_and_p() {
        // Linear polarisation along e1 (S1 = 1) becomes S1 = −1 in a frame turned by 90°.
        let k = Vec3::Z;
        let s = rotate_into([1.0, 1.0, 0.0, 0.0], Vec3::X, k, Vec3::Y);
        assert!((s[1] + 1.0).abs() < 1e-15 && s[2].abs() < 1e-15);
        // By 45°, S1 goes into −S2 (E_s = cos ψ, E_p = −sin ψ).
        let d = Vec3::new(1.0, 1.0, 0.0).normalize();
        let s = rotate_into([1.0, 1.0, 0.0, 0.0], Vec3::X, k, d);
        assert!(s[1].abs() < 1e-15 && (s[2] + 1.0).abs() < 1e-15);
    }

    #[test]
    fn interface_action_equals_the_optics_mueller_matrix() {
        // The tracer's specialised product must equal the general Mueller matrix built by
        // `optics` from the same Jones amplitudes (independent implementation).
        use crate::optics::{Mueller, Stokes};
        use num_complex::Complex64;
        let (a_s, a_p) = (Complex64::new(0.3, -0.4), Complex64::new(-0.2, 0.5));
        let m = Mueller::from_amplitudes(a_s, a_p, 1.0);
        let s = [1.0, 0.2, -0.5, 0.6];
        let c = a_s * a_p.conj();
        let ours = apply(&s, a_s.norm_sqr(), a_p.norm_sqr(), (c.re, c.im));
        let theirs = (m * Stokes(s)).0;
        for i in 0..4 {
            assert!(
                (ours[i] - theirs[i]).abs() < 1e-14,
                "{ours:?} vs {theirs:?}"
            );
        }
        // And the frame rotation agrees with optics' rotation for the same geometry.
        let k = Vec3::Z;
        let to = Vec3::new(0.6, 0.8, 0.0);
        let ours = rotate_into(s, Vec3::X, k, to);
        let theirs = Stokes(s)
            .in_frame([1.0, 0.0, 0.0], [0.6, 0.8, 0.0], [0.0, 0.0, 1.0])
            .0;
        for i in 0..4 {
            assert!(
                (ours[i] - theirs[i]).abs() < 1e-14,
                "{ours:?} vs {theirs:?}"
            );
        }
    }

    #[test]
    fn degree_of_polarisation_is_preserved_by_lossless_phase() {
        let s = [1.0, 0.3, 0.4, 0.5];
        let out = apply(&s, 1.0, 1.0, (0.6, 0.8)); // pure retarder, |x+iy| = 1
        let dop = |v: [f64; 4]| (v[1] * v[1] + v[2] * v[2] + v[3] * v[3]).sqrt() / v[0];
        assert!((dop(out) - dop(s)).abs() < 1e-14);
    }
}
