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
use crate::geometry::lanes::{F, lanes, mask, pick};

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

/// [`s_axis`] for a packet of rays, lane by lane (vectors as x, y, z lanes): the same
/// operations in the same order, so every lane equals the scalar result bit for bit.
#[inline(always)]
pub fn s_axis_lanes(k: &[F; 3], n: &[F; 3], fallback: &[F; 3]) -> [F; 3] {
    let c = cross_lanes(k, n);
    let l2 = lanes(|l| (c[0][l] * c[0][l] + c[1][l] * c[1][l]) + c[2][l] * c[2][l]);
    let tiny = mask(|l| l2[l] < 1e-24);
    let len = lanes(|l| l2[l].sqrt());
    std::array::from_fn(|i| pick(tiny, fallback[i], lanes(|l| c[i][l] / len[l])))
}

/// [`rotate_into`] for a packet of rays, lane by lane (bit for bit the scalar result).
#[inline(always)]
pub fn rotate_into_lanes(s: &[F; 4], e1: &[F; 3], k: &[F; 3], s_hat: &[F; 3]) -> [F; 4] {
    let e2 = cross_lanes(k, e1);
    let dot = |a: &[F; 3], b: &[F; 3]| {
        lanes(|l| (a[0][l] * b[0][l] + a[1][l] * b[1][l]) + a[2][l] * b[2][l])
    };
    let (c, sn) = (dot(e1, s_hat), dot(&e2, s_hat));
    let norm = lanes(|l| c[l] * c[l] + sn[l] * sn[l]);
    let c2 = lanes(|l| (c[l] * c[l] - sn[l] * sn[l]) / norm[l]);
    let s2 = lanes(|l| 2.0 * c[l] * sn[l] / norm[l]);
    let keep = mask(|l| norm[l] == 0.0);
    [
        s[0],
        pick(keep, s[1], lanes(|l| c2[l] * s[1][l] + s2[l] * s[2][l])),
        pick(keep, s[2], lanes(|l| -s2[l] * s[1][l] + c2[l] * s[2][l])),
        s[3],
    ]
}

/// [`power`] for a packet of rays, lane by lane.
#[inline(always)]
pub fn power_lanes(s: &[F; 4], c_s: &F, c_p: &F) -> F {
    lanes(|l| 0.5 * ((c_s[l] + c_p[l]) * s[0][l] + (c_s[l] - c_p[l]) * s[1][l]))
}

/// [`apply`] for a packet of rays, lane by lane (cross term as its real and imaginary
/// parts).
#[inline(always)]
pub fn apply_lanes(s: &[F; 4], c_s: &F, c_p: &F, x: &F, y: &F) -> [F; 4] {
    let sum = lanes(|l| 0.5 * (c_s[l] + c_p[l]));
    let dif = lanes(|l| 0.5 * (c_s[l] - c_p[l]));
    [
        lanes(|l| sum[l] * s[0][l] + dif[l] * s[1][l]),
        lanes(|l| dif[l] * s[0][l] + sum[l] * s[1][l]),
        lanes(|l| x[l] * s[2][l] + y[l] * s[3][l]),
        lanes(|l| -y[l] * s[2][l] + x[l] * s[3][l]),
    ]
}

/// a × b lane by lane, in the component order of [`Vec3::cross`].
#[inline(always)]
fn cross_lanes(a: &[F; 3], b: &[F; 3]) -> [F; 3] {
    [
        lanes(|l| a[1][l] * b[2][l] - b[1][l] * a[2][l]),
        lanes(|l| a[2][l] * b[0][l] - b[2][l] * a[0][l]),
        lanes(|l| a[0][l] * b[1][l] - b[0][l] * a[1][l]),
    ]
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

    #[test]
    fn lane_versions_equal_the_scalar_functions_bit_for_bit() {
        use crate::geometry::lanes::LANES;
        // The packet tracer's lane-wise Stokes algebra must be the scalar algebra exactly.
        let mut rng = crate::sampling::Stream::new(9, 9, 9);
        let mut unit = || {
            let v = Vec3::new(
                rng.uniform() - 0.5,
                rng.uniform() - 0.5,
                rng.uniform() - 0.5,
            );
            v.normalize()
        };
        for round in 0..200 {
            let k: [Vec3; LANES] = std::array::from_fn(|_| unit());
            let mut n: [Vec3; LANES] = std::array::from_fn(|_| unit());
            if round % 7 == 0 {
                n[1] = -k[1]; // normal incidence: the fallback axis
            }
            let e1: [Vec3; LANES] = std::array::from_fn(|l| k[l].cross(unit()).normalize());
            let s: [[f64; 4]; LANES] =
                std::array::from_fn(|l| [1.0, 0.1 * l as f64, -0.2, 0.3 - 0.05 * l as f64]);
            let soa = |v: &[Vec3; LANES]| -> [F; 3] {
                [
                    std::array::from_fn(|l| v[l].x),
                    std::array::from_fn(|l| v[l].y),
                    std::array::from_fn(|l| v[l].z),
                ]
            };
            let s4: [F; 4] = std::array::from_fn(|i| std::array::from_fn(|l| s[l][i]));
            let hat = s_axis_lanes(&soa(&k), &soa(&n), &soa(&e1));
            let rot = rotate_into_lanes(&s4, &soa(&e1), &soa(&k), &hat);
            let (cs, cp, x, y) = ([0.3; LANES], [0.7; LANES], [0.2; LANES], [-0.4; LANES]);
            let pw = power_lanes(&rot, &cs, &cp);
            let out = apply_lanes(&rot, &cs, &cp, &x, &y);
            for l in 0..LANES {
                let h = s_axis(k[l], n[l], e1[l]);
                assert_eq!([hat[0][l], hat[1][l], hat[2][l]], h.to_array());
                let r = rotate_into(s[l], e1[l], k[l], h);
                assert_eq!(std::array::from_fn::<f64, 4, _>(|i| rot[i][l]), r);
                assert_eq!(pw[l], power(&r, 0.3, 0.7));
                let o = apply(&r, 0.3, 0.7, (0.2, -0.4));
                assert_eq!(std::array::from_fn::<f64, 4, _>(|i| out[i][l]), o);
            }
        }
    }
}
