//! The planar surface z = 0 (polished or planarised wafer face).
//!
//! Invariant: one facet, id 0, normal +z; the hit point is wrapped into a nominal
//! [`PLANAR_CELL_UM`] square cell (any period describes a plane). Base plane: z = 0.

use super::{
    Side, SurfaceKind, Symmetry, Texture, cell_entry, clamp_into, facet_hit, side_at_origin,
    side_outside_slab, slab_interval,
};
use crate::geometry::crossing::{Gap, HeightPlane};
use crate::geometry::{FacetId, Hit, Vec3, gamma};

/// Side of the nominal unit cell of a plane, µm.
pub const PLANAR_CELL_UM: f64 = 1.0;

/// Padding of the slab [0, 0] in which planar crossings are searched, µm.
const PAD_UM: f64 = 1e-9;

/// The flat surface z = 0.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Planar;

impl Planar {
    /// The plane z = 0.
    pub fn new() -> Planar {
        Planar
    }
}

/// On-plane tolerance of the plane (see [`Gap::new`]), µm.
fn gap_tol() -> f64 {
    super::on_plane_tol(PLANAR_CELL_UM)
}

/// Crossing of the plane z = 0, shared by [`Planar`] and the ideal surfaces.
pub(crate) fn intersect_plane(origin: Vec3, dir: Vec3, skip: Option<FacetId>) -> Option<Hit> {
    let (z_lo, z_hi) = (-PAD_UM, PAD_UM);
    let (t0, t1) = slab_interval(origin.z, dir.z, z_lo, z_hi)?;
    let mut gap = Gap::new(&HeightPlane::GROUND, origin, dir, gap_tol());
    if skip == Some(FacetId(0)) {
        gap = gap.on_plane();
    }
    let below = [gap.below(0)];
    let side = side_outside_slab(origin.z, z_lo, z_hi)
        .or_else(|| {
            if skip.is_some() {
                Side::leaving(gap.e)
            } else {
                None
            }
        })
        .unwrap_or_else(|| side_at_origin(&below));
    let entry = cell_entry(&below, side, t0, t1, super::depth_tol(PLANAR_CELL_UM))?;
    let t = entry.t;
    let p = origin + t * dir;
    // Wrap into the nominal cell: one subtraction of a multiple of the period.
    let fx = (p.x / PLANAR_CELL_UM).floor() * PLANAR_CELL_UM;
    let fy = (p.y / PLANAR_CELL_UM).floor() * PLANAR_CELL_UM;
    let (x, ex) = clamp_into(p.x - fx, PLANAR_CELL_UM);
    let (y, ey) = clamp_into(p.y - fy, PLANAR_CELL_UM);
    let err_xy = gamma(4) * (origin.abs() + (t * dir).abs());
    let p_err = Vec3::new(err_xy.x + ex, err_xy.y + ey, gamma(1) * PAD_UM);
    Some(facet_hit(t, Vec3::new(x, y, 0.0), p_err, Vec3::Z, 0))
}

impl Texture for Planar {
    fn kind(&self) -> SurfaceKind {
        SurfaceKind::Geometric
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
        "planar surface (z = 0)".to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn crossing_from_both_sides_and_no_rehit() {
        let d = Vec3::new(0.3, -0.4, -0.866).normalize();
        let h = Planar.intersect(Vec3::new(0.5, 0.5, 2.0), d, None).unwrap();
        assert!((h.t * d.z + 2.0).abs() < 1e-12, "t = {}", h.t);
        assert!(h.point.x >= 0.0 && h.point.x < 1.0 && h.point.y >= 0.0 && h.point.y < 1.0);
        let up = Vec3::new(0.1, 0.0, 1.0).normalize();
        assert!(Planar.intersect(h.point, up, Some(h.facet)).is_none());
        assert!(
            Planar.intersect(h.point, up, None).is_none(),
            "on-plane origin: no re-hit"
        );
        let from_below = Planar
            .intersect(Vec3::new(0.2, 0.2, -3.0), up, None)
            .unwrap();
        assert!((from_below.point.z).abs() == 0.0 && from_below.t > 2.9);
    }
}
