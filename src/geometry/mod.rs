//! Vectors, rays, facet hits and the rounding-error bookkeeping that keeps facet events robust.
//!
//! Frame: z points up, out of the upper (incidence) medium's half of the texture; lengths in µm.
//! Invariant: a [`Hit`] normal is unit length and points up (towards +z, into the medium above
//! the surface); the side a ray is on follows from the sign of `dir · normal`.
//! Not here: which texture produced the hit (`texture`), what happens at it (`tracer`).

pub mod crossing;
pub mod grid;
pub mod lanes;
pub mod robust;
pub mod triangle;

pub use glam::DVec3 as Vec3;

/// Identifies one planar facet of a texture's unit cell (texture-specific numbering).
///
/// Ids are valid in the frame of the unit cell the hit point was wrapped into, so the tracer
/// can pass the id of the facet just left as `skip` to the next intersection query.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct FacetId(pub u32);

/// A surface hit returned by a texture.
#[derive(Clone, Copy, Debug)]
pub struct Hit {
    /// Ray parameter at the hit (µm along a unit direction).
    pub t: f64,
    /// Hit point wrapped into the unit cell `[0, px) × [0, py)` (µm).
    pub point: Vec3,
    /// Bound on the absolute rounding error of each coordinate of `point` as a point of the
    /// facet (µm): the box `point ± p_err` contains a point of the facet's plane, so
    /// [`robust::offset_origin`] moves a new origin off the facet. (For grazing rays the
    /// exact crossing may lie further along the facet than this box.)
    pub p_err: Vec3,
    /// Unit geometric normal of the facet, pointing up (+z side).
    pub normal: Vec3,
    /// The facet, valid in the wrapped frame of `point`.
    pub facet: FacetId,
}

/// γₙ = n·u/(1 − n·u) with u = 2⁻⁵³, the bound on accumulated relative rounding error of n
/// floating-point operations. Source: N. J. Higham, *Accuracy and Stability of Numerical
/// Algorithms*, 2nd ed., SIAM (2002), Lemma 3.1.
#[inline]
pub const fn gamma(n: u32) -> f64 {
    let nu = n as f64 * (f64::EPSILON * 0.5);
    nu / (1.0 - nu)
}

/// The lesser of `a` and `b` in one instruction (`minsd`); `f64::min`, which also orders
/// NaN, takes about seven. For hot paths whose operands are never NaN (if `a` is NaN, `b`
/// is returned).
#[inline(always)]
pub fn lesser(a: f64, b: f64) -> f64 {
    if a < b { a } else { b }
}

/// The greater of `a` and `b` in one instruction (`maxsd`), as [`lesser`].
#[inline(always)]
pub fn greater(a: f64, b: f64) -> f64 {
    if a > b { a } else { b }
}

/// ⌊x⌋ as an integer, without a libm call (exact for |x| < 2⁶³; NaN gives 0).
#[inline(always)]
pub fn floor_i64(x: f64) -> i64 {
    let i = x as i64;
    i - i64::from((i as f64) > x)
}

/// Builds an orthonormal basis (t1, t2, n) around a unit vector `n` without branches on
/// near-parallel axes. Source: T. Duff et al., "Building an orthonormal basis, revisited",
/// JCGT 6(1), 1 (2017).
#[inline]
pub fn orthonormal_basis(n: Vec3) -> (Vec3, Vec3) {
    let sign = 1.0f64.copysign(n.z);
    let a = -1.0 / (sign + n.z);
    let b = n.x * n.y * a;
    (
        Vec3::new(1.0 + sign * n.x * n.x * a, sign * b, -sign * n.x),
        Vec3::new(b, sign + n.y * n.y * a, -n.y),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn floor_matches_std() {
        for x in [
            -3.5,
            -3.0,
            -0.0,
            0.0,
            -1e-300,
            1e-300,
            2.999_999_999_999_999_6,
            7.0,
            -7.000_000_000_000_001,
        ] {
            assert_eq!(floor_i64(x), x.floor() as i64, "{x}");
        }
    }

    #[test]
    fn basis_is_orthonormal_for_many_normals() {
        for i in 0..200 {
            let th = i as f64 * 0.0157;
            let ph = i as f64 * 0.731;
            for s in [1.0, -1.0] {
                let n = Vec3::new(th.sin() * ph.cos(), th.sin() * ph.sin(), s * th.cos());
                let (t1, t2) = orthonormal_basis(n);
                assert!((t1.length() - 1.0).abs() < 1e-12);
                assert!((t2.length() - 1.0).abs() < 1e-12);
                assert!(t1.dot(t2).abs() < 1e-12 && t1.dot(n).abs() < 1e-12);
                assert!((t1.cross(t2) - n).length() < 1e-12);
            }
        }
    }
}
