//! Watertight ray–triangle intersection with a conservative bound on t.
//!
//! Method: S. Woop, C. Benthin & I. Wald, "Watertight ray/triangle intersection", JCGT 2(1),
//! 65 (2013): vertices are translated to the ray origin, permuted so the ray's largest
//! direction component is z, and sheared so the ray becomes the +z axis; the 2D edge functions
//! of an edge shared by two triangles are then the same products of the same numbers with
//! opposite sign, so a ray through the edge hits at least one of them (both only on an exact
//! tie). The test is two-sided. Error bound on t (reject t within its rounding error of 0):
//! M. Pharr, W. Jakob & G. Humphreys, *Physically Based Rendering*, 4th ed. (2023), §6.8.4.
//! Invariant: for vertices given by identical f64 values, the transformed coordinates are
//! identical in every triangle that shares them (the transform is per ray, not per triangle).

use super::{Vec3, gamma};

/// Per-ray set-up of the watertight test: axis permutation and shear.
#[derive(Clone, Copy, Debug)]
pub struct RayShear {
    origin: Vec3,
    kx: usize,
    ky: usize,
    kz: usize,
    sx: f64,
    sy: f64,
    sz: f64,
}

/// A vertex in the ray's sheared frame (z not yet scaled).
#[derive(Clone, Copy, Debug)]
pub struct ShearedVertex {
    x: f64,
    y: f64,
    z: f64,
}

/// A triangle hit: parameter and barycentric weights of the three vertices.
#[derive(Clone, Copy, Debug)]
pub struct TriangleHit {
    /// Ray parameter, > its rounding-error bound.
    pub t: f64,
    /// Barycentric weights (b0, b1, b2), summing to 1.
    pub b: [f64; 3],
}

impl RayShear {
    /// Set-up for the ray `origin + t·dir` (`dir` non-zero).
    pub fn new(origin: Vec3, dir: Vec3) -> RayShear {
        let a = dir.abs();
        let kz = if a.x > a.y {
            if a.x > a.z { 0 } else { 2 }
        } else if a.y > a.z {
            1
        } else {
            2
        };
        let mut kx = (kz + 1) % 3;
        let mut ky = (kx + 1) % 3;
        if dir[kz] < 0.0 {
            std::mem::swap(&mut kx, &mut ky);
        }
        let sz = 1.0 / dir[kz];
        RayShear {
            origin,
            kx,
            ky,
            kz,
            sx: -dir[kx] * sz,
            sy: -dir[ky] * sz,
            sz,
        }
    }

    /// Vertex `p` in the ray's sheared frame.
    #[inline]
    pub fn vertex(&self, p: Vec3) -> ShearedVertex {
        let q = p - self.origin;
        let (x, y, z) = (q[self.kx], q[self.ky], q[self.kz]);
        ShearedVertex {
            x: x + self.sx * z,
            y: y + self.sy * z,
            z,
        }
    }

    /// Two-sided watertight test of the triangle (v0, v1, v2); hits with t ≤ its error bound
    /// or t ≥ `t_max` are rejected.
    #[inline]
    pub fn hit(
        &self,
        v0: ShearedVertex,
        v1: ShearedVertex,
        v2: ShearedVertex,
        t_max: f64,
    ) -> Option<TriangleHit> {
        // Edge functions (2D cross products); shared edges give exactly negated values.
        let e0 = v1.x * v2.y - v1.y * v2.x;
        let e1 = v2.x * v0.y - v2.y * v0.x;
        let e2 = v0.x * v1.y - v0.y * v1.x;
        if (e0 < 0.0 || e1 < 0.0 || e2 < 0.0) && (e0 > 0.0 || e1 > 0.0 || e2 > 0.0) {
            return None;
        }
        let det = e0 + e1 + e2;
        if det == 0.0 {
            return None;
        }
        let (z0, z1, z2) = (v0.z * self.sz, v1.z * self.sz, v2.z * self.sz);
        let t_scaled = e0 * z0 + e1 * z1 + e2 * z2;
        if det < 0.0 && (t_scaled >= 0.0 || t_scaled < t_max * det) {
            return None;
        }
        if det > 0.0 && (t_scaled <= 0.0 || t_scaled > t_max * det) {
            return None;
        }
        let inv_det = 1.0 / det;
        let t = t_scaled * inv_det;
        // Conservative bound on the rounding error of t (Pharr, Jakob & Humphreys 2023, §6.8.4).
        let max_zt = z0.abs().max(z1.abs()).max(z2.abs());
        let delta_z = gamma(3) * max_zt;
        let max_xt = v0.x.abs().max(v1.x.abs()).max(v2.x.abs());
        let max_yt = v0.y.abs().max(v1.y.abs()).max(v2.y.abs());
        let delta_x = gamma(5) * (max_xt + max_zt);
        let delta_y = gamma(5) * (max_yt + max_zt);
        let delta_e = 2.0 * (gamma(2) * max_xt * max_yt + delta_y * max_xt + delta_x * max_yt);
        let max_e = e0.abs().max(e1.abs()).max(e2.abs());
        let delta_t =
            3.0 * (gamma(3) * max_e * max_zt + delta_e * max_zt + delta_z * max_e) * inv_det.abs();
        if t <= delta_t {
            return None;
        }
        Some(TriangleHit {
            t,
            b: [e0 * inv_det, e1 * inv_det, e2 * inv_det],
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ray_through_shared_edge_hits_at_least_one_triangle() {
        // Square split along its diagonal; rays aimed exactly at diagonal points.
        let (a, b, c, d) = (
            Vec3::new(0.0, 0.0, 0.1),
            Vec3::new(1.0, 0.0, 0.3),
            Vec3::new(1.0, 1.0, 0.2),
            Vec3::new(0.0, 1.0, 0.0),
        );
        for k in 1..1000 {
            let s = k as f64 / 1000.0;
            let target = a + s * (c - a);
            let dir = Vec3::new(0.1 * (k as f64).sin(), 0.2, -1.0).normalize();
            let o = target - 3.0 * dir;
            let r = RayShear::new(o, dir);
            let (va, vb, vc, vd) = (r.vertex(a), r.vertex(b), r.vertex(c), r.vertex(d));
            let h1 = r.hit(va, vb, vc, f64::INFINITY);
            let h2 = r.hit(va, vc, vd, f64::INFINITY);
            assert!(h1.is_some() || h2.is_some(), "leak at s = {s}");
            let t = h1.or(h2).unwrap().t;
            assert!((t - 3.0).abs() < 1e-12);
        }
    }

    #[test]
    fn hit_at_origin_is_rejected() {
        let (a, b, c) = (Vec3::ZERO, Vec3::X, Vec3::Y);
        let o = Vec3::new(0.25, 0.25, 0.0);
        let r = RayShear::new(o, Vec3::new(0.0, 0.0, 1.0));
        assert!(
            r.hit(r.vertex(a), r.vertex(b), r.vertex(c), f64::INFINITY)
                .is_none()
        );
    }
}
