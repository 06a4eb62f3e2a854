//! A texture mirrored in z (z → −z): the same surface with its features pointing down.
//!
//! A scenario uses it for faces below the absorber, so that a texture file describes the
//! shape as seen from the wafer on both faces (upright pyramids then point out of the wafer
//! on the front and on the rear). Invariant: a hit on the mirrored surface is the inner
//! texture's hit for the mirrored ray, mirrored back; the normal is mirrored and negated so
//! that it still points up (+z), as the [`Texture`] contract requires. Facet ids, periods,
//! lattice and symmetry are those of the inner texture.

use std::sync::Arc;

use super::{SurfaceKind, Symmetry, Texture};
use crate::geometry::{FacetId, Hit, Vec3};

/// The inner texture mirrored in z: features pointing down.
#[derive(Clone, Debug)]
pub struct Flipped(pub Arc<dyn Texture>);

/// Mirror image of a point or direction in the plane z = 0.
#[inline]
fn mirror(v: Vec3) -> Vec3 {
    Vec3::new(v.x, v.y, -v.z)
}

impl Texture for Flipped {
    fn kind(&self) -> SurfaceKind {
        self.0.kind()
    }
    fn period_um(&self) -> [f64; 2] {
        self.0.period_um()
    }
    fn lattice_um(&self) -> [[f64; 2]; 2] {
        self.0.lattice_um()
    }
    fn z_range_um(&self) -> [f64; 2] {
        let [lo, hi] = self.0.z_range_um();
        [-hi, -lo]
    }
    fn intersect(&self, origin: Vec3, dir: Vec3, skip: Option<FacetId>) -> Option<Hit> {
        let h = self.0.intersect(mirror(origin), mirror(dir), skip)?;
        // The mirrored normal points down; negate it to point up again. p_err is a bound on
        // absolute errors per coordinate and is unchanged by the mirror.
        Some(Hit {
            t: h.t,
            point: mirror(h.point),
            p_err: h.p_err,
            normal: -mirror(h.normal),
            facet: h.facet,
        })
    }
    fn facet_tilts_deg(&self) -> Vec<f64> {
        self.0.facet_tilts_deg()
    }
    fn symmetry(&self) -> Symmetry {
        self.0.symmetry()
    }
    fn describe(&self) -> String {
        format!("{} (features pointing down)", self.0.describe())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::texture::{RegularPyramids, pyramids::RegularPyramidsSpec};

    fn pyramids() -> Arc<dyn Texture> {
        Arc::new(RegularPyramids::new(RegularPyramidsSpec::upright(10.0)).unwrap())
    }

    /// A ray from below on the flipped surface is the mirror image of a ray from above on the
    /// original: same t and facet, mirrored point, mirrored-and-negated normal.
    #[test]
    fn flipped_hit_from_below_mirrors_original_hit_from_above() {
        let inner = pyramids();
        let flipped = Flipped(inner.clone());
        let mut checked = 0;
        for k in 0..50 {
            let (x, y) = (0.37 + 0.19 * k as f64, 4.1 - 0.13 * k as f64);
            let d_above = Vec3::new(0.2 - 0.01 * k as f64, 0.1, -1.0).normalize();
            let o_above = Vec3::new(x, y, 20.0);
            let a = inner.intersect(o_above, d_above, None).unwrap();
            let b = flipped
                .intersect(mirror(o_above), mirror(d_above), None)
                .unwrap();
            assert_eq!(a.t, b.t);
            assert_eq!(a.facet, b.facet);
            assert_eq!(mirror(a.point), b.point);
            assert_eq!(Vec3::new(-a.normal.x, -a.normal.y, a.normal.z), b.normal);
            assert!(b.normal.z > 0.0, "normal must point up");
            // The hit lies on the mirrored surface: below the base plane.
            assert!(b.point.z <= 0.0);
            checked += 1;
        }
        assert_eq!(checked, 50);
    }

    #[test]
    fn range_and_description_are_mirrored() {
        let inner = pyramids();
        let [lo, hi] = inner.z_range_um();
        let flipped = Flipped(inner.clone());
        assert_eq!(flipped.z_range_um(), [-hi, -lo]);
        assert!(
            flipped.z_range_um()[0] < -7.0,
            "10 µm {{111}} pyramids are 7.07 µm tall"
        );
        assert_eq!(flipped.period_um(), inner.period_um());
        assert_eq!(flipped.symmetry(), inner.symmetry());
        assert!(flipped.describe().ends_with("(features pointing down)"));
    }
}
