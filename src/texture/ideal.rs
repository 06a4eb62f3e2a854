//! Ideal reference surfaces: a specular plane and a Lambertian randomiser, both at z = 0.
//!
//! Geometrically both are the plane z = 0 (facet id 0, normal +z, nominal 1 µm cell); what
//! differs is how the tracer treats them, reported by [`Texture::kind`].
//!
//! # Contract of the ideal Lambertian randomiser (for the tracer)
//!
//! This is the textbook reference surface against which light trapping is judged (the
//! randomising surface of E. Yablonovitch, J. Opt. Soc. Am. 72, 899 (1982), and the
//! Lambertian reference of M. A. Green, Prog. Photovolt. 10, 235 (2002)); it is not a
//! statement about a real texture.
//!
//! 1. A ray meeting the surface, from either side, at polar angle θ from the z axis sees the
//!    coated *planar* interface: the split into reflection R(θ) and transmission T(θ) (and
//!    parasitic absorption A(θ) in the films) is that of the film stack of the scenario at
//!    that angle, from that side, for the ray's polarisation, exactly as for
//!    [`super::IdealSpecular`].
//! 2. The tracer then re-draws the direction. Reflected light leaves into the hemisphere it
//!    came from, transmitted light into the other hemisphere, each with a cosine (Lambertian)
//!    distribution about the surface normal: pdf cos θ′/π per steradian, drawn with
//!    [`lambertian_direction`] (`up = true` for the upper hemisphere, z > 0).
//! 3. The outgoing ray is unpolarised (Stokes vector (I, 0, 0, 0) with the intensity I the
//!    event leaves), as a perfect randomiser destroys the polarisation.
//! 4. Total internal reflection keeps its planar meaning: light that cannot leave at θ
//!    (R(θ) = 1) is reflected, then redistributed cosine-wise on its own side. Escape from a
//!    Lambertian wafer of index n therefore occurs for a fraction ≈ 1/n² of the internal
//!    radiance per pass, the basis of the 4n² limit (Yablonovitch 1982).
//!
//! [`super::IdealSpecular`] is the same plane with mirror reflection and Snell refraction (the
//! planar reference for thin-film results).

use super::planar::{PLANAR_CELL_UM, intersect_plane};
use super::{SurfaceKind, Symmetry, Texture};
use crate::geometry::{FacetId, Hit, Vec3};
use crate::sampling::Stream;

/// Cosine-weighted direction (pdf cos θ/π) in the upper (`up`, z > 0) or lower hemisphere,
/// for rays leaving an ideal Lambertian surface (contract in the module doc).
#[inline]
pub fn lambertian_direction(stream: &mut Stream, up: bool) -> Vec3 {
    let v = stream.cosine_hemisphere();
    if up { v } else { Vec3::new(v.x, v.y, -v.z) }
}

/// Ideal specular plane at z = 0 ([`SurfaceKind::IdealSpecular`]).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct IdealSpecular;

/// Ideal Lambertian randomiser at z = 0 ([`SurfaceKind::IdealLambertian`]; contract in the
/// module doc).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct IdealLambertian;

macro_rules! ideal_plane {
    ($t:ty, $kind:expr, $text:expr) => {
        impl Texture for $t {
            fn kind(&self) -> SurfaceKind {
                $kind
            }
            fn period_um(&self) -> [f64; 2] {
                [PLANAR_CELL_UM; 2]
            }
            fn z_range_um(&self) -> [f64; 2] {
                [0.0, 0.0]
            }
            fn intersect(&self, origin: Vec3, dir: Vec3, skip: Option<FacetId>) -> Option<Hit> {
                intersect_plane(origin, dir, skip)
            }
            fn symmetry(&self) -> Symmetry {
                Symmetry::Isotropic
            }
            fn describe(&self) -> String {
                $text.to_string()
            }
        }
    };
}

ideal_plane!(
    IdealSpecular,
    SurfaceKind::IdealSpecular,
    "ideal specular plane (z = 0)"
);
ideal_plane!(
    IdealLambertian,
    SurfaceKind::IdealLambertian,
    "ideal Lambertian randomiser (z = 0; cosine-distributed reflection and transmission)"
);

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lambertian_directions_fill_the_requested_hemisphere() {
        let mut s = Stream::new(3, 0, 0);
        let n = 100_000;
        let (mut up_ok, mut mean_cos2) = (true, 0.0);
        for _ in 0..n {
            let u = lambertian_direction(&mut s, true);
            let d = lambertian_direction(&mut s, false);
            up_ok &= u.z >= 0.0 && d.z <= 0.0 && (u.length() - 1.0).abs() < 1e-12;
            mean_cos2 += u.z * u.z;
        }
        assert!(up_ok);
        // ⟨cos²θ⟩ = ∫cos³θ sinθ dθ dφ / π = 1/2 for pdf cos θ/π; σ(cos²) = √(1/3 − 1/4) ≈ 0.289.
        let m = mean_cos2 / n as f64;
        assert!(
            (m - 0.5).abs() < 4.0 * 0.289 / (n as f64).sqrt(),
            "⟨cos²θ⟩ = {m}"
        );
    }

    #[test]
    fn kinds_are_reported() {
        assert_eq!(IdealLambertian.kind(), SurfaceKind::IdealLambertian);
        assert_eq!(IdealSpecular.kind(), SurfaceKind::IdealSpecular);
        assert!(
            IdealLambertian
                .intersect(Vec3::new(0.5, 0.5, 1.0), Vec3::NEG_Z, None)
                .is_some()
        );
    }
}
