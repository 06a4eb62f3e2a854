//! Stokes vectors and Mueller matrices for rays that meet facets at arbitrary orientations.
//!
//! # Convention
//! A Stokes vector is written in a frame (x̂, ŷ) transverse to the propagation direction k̂,
//! with (x̂, ŷ, k̂) right-handed. At an interface x̂ = ŝ (normal to the plane of incidence)
//! and ŷ = p̂ = k̂ × ŝ, the frame of [`crate::optics::fresnel`]. For field amplitudes
//! (E_x, E_y) = (E_s, E_p) with time dependence e^{−iωt}:
//!
//! * S0 = |E_s|² + |E_p|² (intensity or ray weight),
//! * S1 = |E_s|² − |E_p|² (s-like minus p-like),
//! * S2 = 2 Re(E_s E_p*) (linear at +45° from ŝ towards p̂, minus −45°),
//! * S3 = 2 Im(E_s* E_p).
//!
//! S3 > 0 means the field vector turns from x̂ towards ŷ in time, i.e. counter-clockwise for
//! an observer looking into the beam (towards the source). Whether that is called "left" or
//! "right" differs between books; only this geometric statement is used here.
//!
//! Frame rotation: the rotation matrix of R. A. Chipman, W. S. T. Lam & G. Young,
//! *Polarized Light and Optical Systems*, CRC Press (2018), Mueller-calculus chapter, with
//! rows `[1,0,0,0]`, `[0,cos2ψ,sin2ψ,0]`, `[0,−sin2ψ,cos2ψ,0]`, `[0,0,0,1]`; ψ is the angle of the
//! new x̂ from the old x̂, positive towards the old ŷ.
//!
//! Invariant: a Mueller matrix built from amplitudes ([`Mueller::from_amplitudes`]) maps a
//! fully polarised Stokes vector to a fully polarised one (non-depolarising).

use num_complex::Complex64;
use std::ops::Mul;

/// Stokes vector [S0, S1, S2, S3] in an (ŝ, p̂) frame (see module doc). S0 is the power
/// (ray weight); |(S1, S2, S3)| ≤ S0 for physical light.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct Stokes(pub [f64; 4]);

impl Stokes {
    /// Unpolarised light of power `intensity`.
    pub fn unpolarised(intensity: f64) -> Stokes {
        Stokes([intensity, 0.0, 0.0, 0.0])
    }

    /// Light fully polarised along ŝ.
    pub fn s_polarised(intensity: f64) -> Stokes {
        Stokes([intensity, intensity, 0.0, 0.0])
    }

    /// Light fully polarised along p̂.
    pub fn p_polarised(intensity: f64) -> Stokes {
        Stokes([intensity, -intensity, 0.0, 0.0])
    }

    /// Fully polarised light from complex field amplitudes along ŝ and p̂ (e^{−iωt}).
    pub fn from_jones(e_s: Complex64, e_p: Complex64) -> Stokes {
        let (is, ip) = (e_s.norm_sqr(), e_p.norm_sqr());
        let cross = e_s * e_p.conj(); // E_s E_p*
        // S3 = 2 Im(E_s* E_p) = −2 Im(E_s E_p*).
        Stokes([is + ip, is - ip, 2.0 * cross.re, -2.0 * cross.im])
    }

    /// Power S0.
    pub fn intensity(&self) -> f64 {
        self.0[0]
    }

    /// Degree of polarisation √(S1² + S2² + S3²)/S0, in [0, 1]; 0 for zero power.
    pub fn degree_of_polarisation(&self) -> f64 {
        let [s0, s1, s2, s3] = self.0;
        if s0 <= 0.0 {
            return 0.0;
        }
        (s1 * s1 + s2 * s2 + s3 * s3).sqrt() / s0
    }

    /// The same light written in a frame whose x̂ is turned by `angle_rad` from the current
    /// x̂ towards the current ŷ (about k̂): `Mueller::rotation(angle_rad) * self`.
    pub fn rotated(&self, angle_rad: f64) -> Stokes {
        Mueller::rotation(angle_rad) * *self
    }

    /// The same light written in a new frame whose x̂ axis is `new_x`, given the current x̂
    /// `old_x` and the propagation direction `k`. All three are unit vectors; `old_x` and
    /// `new_x` must be perpendicular to `k`. The angle is atan2((old_x × new_x)·k, old_x·new_x).
    pub fn in_frame(&self, old_x: [f64; 3], new_x: [f64; 3], k: [f64; 3]) -> Stokes {
        self.rotated(frame_rotation_angle(old_x, new_x, k))
    }

    /// Multiply every component by `factor` (e.g. an attenuation along a path).
    pub fn scaled(&self, factor: f64) -> Stokes {
        Stokes(self.0.map(|s| s * factor))
    }
}

/// Signed angle from `old_x` to `new_x` about `k` (right-hand rule), radians in (−π, π].
/// Inputs as for [`Stokes::in_frame`].
pub fn frame_rotation_angle(old_x: [f64; 3], new_x: [f64; 3], k: [f64; 3]) -> f64 {
    let [a0, a1, a2] = old_x;
    let [b0, b1, b2] = new_x;
    let cross = [a1 * b2 - a2 * b1, a2 * b0 - a0 * b2, a0 * b1 - a1 * b0];
    let sin = cross[0] * k[0] + cross[1] * k[1] + cross[2] * k[2];
    let cos = a0 * b0 + a1 * b1 + a2 * b2;
    sin.atan2(cos)
}

/// 4×4 Mueller matrix acting on [`Stokes`] vectors: `m * s`, and composed right to left:
/// `m2 * m1` applies `m1` first.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Mueller(pub [[f64; 4]; 4]);

impl Mueller {
    /// The identity (no change).
    pub fn identity() -> Mueller {
        let mut m = [[0.0; 4]; 4];
        for (i, row) in m.iter_mut().enumerate() {
            row[i] = 1.0;
        }
        Mueller(m)
    }

    /// Frame rotation by `angle_rad` (new x̂ turned from old x̂ towards old ŷ): rows
    /// `[1,0,0,0]`, `[0,cos2ψ,sin2ψ,0]`, `[0,−sin2ψ,cos2ψ,0]`, `[0,0,0,1]`.
    /// Source: Chipman, Lam & Young (2018) (rotation of Mueller matrices); an element
    /// M turned by θ about k̂ is `rotation(−θ) * M * rotation(θ)`.
    pub fn rotation(angle_rad: f64) -> Mueller {
        let (s, c) = (2.0 * angle_rad).sin_cos();
        Mueller([
            [1.0, 0.0, 0.0, 0.0],
            [0.0, c, s, 0.0],
            [0.0, -s, c, 0.0],
            [0.0, 0.0, 0.0, 1.0],
        ])
    }

    /// Mueller matrix of a non-depolarising element whose Jones matrix is diag(a_s, a_p)
    /// in (ŝ, p̂) frames, scaled by `power_factor` (e.g. the flux ratio of transmission):
    ///
    /// M = f/2 · [[|a_s|²+|a_p|², |a_s|²−|a_p|², 0, 0],
    ///            [|a_s|²−|a_p|², |a_s|²+|a_p|², 0, 0],
    ///            [0, 0, 2Re(a_s a_p*), 2Im(a_s a_p*)],
    ///            [0, 0, −2Im(a_s a_p*), 2Re(a_s a_p*)]].
    ///
    /// Sources: R. M. A. Azzam & N. M. Bashara, *Ellipsometry and Polarized Light*,
    /// North-Holland (1977) (Jones to Mueller conversion); Chipman, Lam & Young (2018).
    /// The signs of the Im terms follow from S3 = 2 Im(E_s* E_p) (module doc) and are checked
    /// against direct Jones propagation in the tests.
    pub fn from_amplitudes(a_s: Complex64, a_p: Complex64, power_factor: f64) -> Mueller {
        let (rs2, rp2) = (a_s.norm_sqr(), a_p.norm_sqr());
        let cross = a_s * a_p.conj();
        let h = 0.5 * power_factor;
        let (sum, diff) = (h * (rs2 + rp2), h * (rs2 - rp2));
        let (re, im) = (2.0 * h * cross.re, 2.0 * h * cross.im);
        Mueller([
            [sum, diff, 0.0, 0.0],
            [diff, sum, 0.0, 0.0],
            [0.0, 0.0, re, im],
            [0.0, 0.0, -im, re],
        ])
    }

    /// Every element multiplied by `factor`.
    pub fn scaled(&self, factor: f64) -> Mueller {
        Mueller(self.0.map(|row| row.map(|m| m * factor)))
    }

    /// Power transferred for unpolarised input, M₀₀.
    pub fn unpolarised_transfer(&self) -> f64 {
        self.0[0][0]
    }
}

impl Mul for Mueller {
    type Output = Mueller;
    fn mul(self, rhs: Mueller) -> Mueller {
        let (a, b) = (&self.0, &rhs.0);
        let mut m = [[0.0; 4]; 4];
        for (i, row) in m.iter_mut().enumerate() {
            for (j, out) in row.iter_mut().enumerate() {
                *out = (0..4).map(|k| a[i][k] * b[k][j]).sum();
            }
        }
        Mueller(m)
    }
}

impl Mul<Stokes> for Mueller {
    type Output = Stokes;
    fn mul(self, rhs: Stokes) -> Stokes {
        let mut s = [0.0; 4];
        for (i, out) in s.iter_mut().enumerate() {
            *out = (0..4).map(|k| self.0[i][k] * rhs.0[k]).sum();
        }
        Stokes(s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: Stokes, b: Stokes, tol: f64) -> bool {
        a.0.iter()
            .zip(b.0.iter())
            .all(|(x, y)| (x - y).abs() <= tol)
    }

    #[test]
    fn mueller_from_amplitudes_matches_jones_propagation() {
        let a_s = Complex64::new(-0.3, 0.4);
        let a_p = Complex64::new(0.7, -0.2);
        let m = Mueller::from_amplitudes(a_s, a_p, 1.0);
        let inputs = [
            (Complex64::new(1.0, 0.0), Complex64::new(0.0, 1.0)),
            (Complex64::new(0.6, -0.2), Complex64::new(0.3, 0.5)),
            (Complex64::new(0.0, 0.0), Complex64::new(1.0, 0.0)),
        ];
        for (e_s, e_p) in inputs {
            let via_mueller = m * Stokes::from_jones(e_s, e_p);
            let via_jones = Stokes::from_jones(a_s * e_s, a_p * e_p);
            assert!(
                close(via_mueller, via_jones, 1e-14),
                "{via_mueller:?} vs {via_jones:?}"
            );
        }
    }

    #[test]
    fn rotation_turns_linear_polarisation_angle() {
        // Linear at 30° from x̂; seen from a frame turned by 30°, it lies along the new x̂.
        let phi = 30f64.to_radians();
        let light = Stokes::from_jones(
            Complex64::new(phi.cos(), 0.0),
            Complex64::new(phi.sin(), 0.0),
        );
        let seen = light.rotated(phi);
        assert!(close(seen, Stokes::s_polarised(1.0), 1e-14), "{seen:?}");
    }

    #[test]
    fn rotation_matches_jones_frame_change() {
        let (e_s, e_p) = (Complex64::new(0.6, -0.2), Complex64::new(0.3, 0.5));
        let psi = 0.7_f64;
        let (s, c) = psi.sin_cos();
        let (x2, y2) = (c * e_s + s * e_p, -s * e_s + c * e_p);
        let direct = Stokes::from_jones(x2, y2);
        let rotated = Stokes::from_jones(e_s, e_p).rotated(psi);
        assert!(close(direct, rotated, 1e-14));
    }

    #[test]
    fn frame_angle_is_right_handed_about_k() {
        let psi = frame_rotation_angle([1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]);
        assert!((psi - std::f64::consts::FRAC_PI_2).abs() < 1e-15);
    }

    #[test]
    fn rotations_compose_and_invert() {
        let m = Mueller::rotation(0.3) * Mueller::rotation(-0.3);
        let id = Mueller::identity();
        for i in 0..4 {
            for j in 0..4 {
                assert!((m.0[i][j] - id.0[i][j]).abs() < 1e-15);
            }
        }
    }
}
