//! Linear V-grooves along y: a triangle wave in x with facets at ±angle and no flat.
//!
//! Geometry in the cell [0, p): z = min(tan α · x, tan α · (p − x)), ridges at x = p/2 of
//! height h = (p/2)·tan α, valleys at x = 0 and p on the base plane z = 0 (wafer thickness is
//! measured from it). Facet ids: 0 the rising facet (x < p/2, normal tilted to −x), 1 the
//! falling facet (x > p/2, normal tilted to +x). The y period is nominal (= p).
//! Invariant: exact crossings against the two planes of each groove, cells walked along x.

use super::{
    MAX_CELLS_PER_QUERY, SI_111_ANGLE_DEG, Side, Symmetry, Texture, TextureError, cell_entry,
    clamp_into, facet_hit, side_at_origin, side_outside_slab, slab_interval, snapped_err,
};
use crate::geometry::crossing::{Gap, HeightPlane, Span};
use crate::geometry::grid::GridWalk;
use crate::geometry::{FacetId, Hit, Vec3, floor_i64};
use crate::texture::pyramids::{check_angle, check_length};

/// Relative padding of the slab searched for crossings.
const PAD_REL: f64 = 1e-9;

/// V-grooves along y with period `period_um` and facet angle `angle_deg`.
#[derive(Clone, Debug)]
pub struct VGrooves {
    period: f64,
    angle_deg: f64,
    height: f64,
    planes: [HeightPlane; 2],
    normals: [Vec3; 2],
    pad: f64,
    /// On-plane tolerance floor (see [`Gap::new`]), µm.
    tol: f64,
    /// Excursion depth tolerance (see [`super::cell_entry`]), µm.
    depth: f64,
}

impl VGrooves {
    /// Grooves of period `period_um` (> 0) with facets at `angle_deg` ∈ (0°, 90°) from the
    /// base plane.
    pub fn new(period_um: f64, angle_deg: f64) -> Result<Self, TextureError> {
        check_length("period_um", period_um)?;
        check_angle("angle_deg", angle_deg)?;
        let tan_a = angle_deg.to_radians().tan();
        let planes = [
            HeightPlane {
                a: tan_a,
                b: 0.0,
                w: 0.0,
            },
            HeightPlane {
                a: -tan_a,
                b: 0.0,
                w: tan_a * period_um,
            },
        ];
        let height = tan_a * (0.5 * period_um);
        Ok(VGrooves {
            period: period_um,
            angle_deg,
            height,
            planes,
            normals: planes.map(|p| p.normal()),
            pad: PAD_REL * (period_um + height),
            tol: super::on_plane_tol((1.0 + tan_a) * period_um + 2.0 * height),
            depth: super::depth_tol((1.0 + tan_a) * period_um + 2.0 * height),
        })
    }

    /// Grooves with {111} facets (54.7356°), as KOH etching of (100) Si through line openings.
    pub fn si_111(period_um: f64) -> Result<Self, TextureError> {
        Self::new(period_um, SI_111_ANGLE_DEG)
    }

    /// Ridge height above the valleys, µm.
    pub fn height_um(&self) -> f64 {
        self.height
    }

    #[inline]
    fn gaps(&self, o: Vec3, d: Vec3, i: i64, skip: Option<u32>) -> [Gap; 2] {
        let ol = Vec3::new(o.x - i as f64 * self.period, o.y, o.z);
        let mut g = self.planes.map(|p| Gap::new(&p, ol, d, self.tol));
        if i == 0
            && let Some(k) = skip
        {
            g[k as usize] = g[k as usize].on_plane();
        }
        g
    }

    #[inline]
    fn below_spans(g: &[Gap; 2]) -> [Span; 1] {
        [g[0].below(0).and(g[1].below(1))]
    }
}

impl Texture for VGrooves {
    fn period_um(&self) -> [f64; 2] {
        [self.period; 2]
    }

    fn z_range_um(&self) -> [f64; 2] {
        [0.0, self.height]
    }

    fn intersect(&self, o: Vec3, d: Vec3, skip: Option<FacetId>) -> Option<Hit> {
        let (z_lo, z_hi) = (-self.pad, self.height + self.pad);
        let (t_start, t_end) = slab_interval(o.z, d.z, z_lo, z_hi)?;
        let skip = skip.map(|f| f.0).filter(|&k| k <= 1);
        let side = side_outside_slab(o.z, z_lo, z_hi)
            .or_else(|| Side::leaving(Gap::new(&self.planes[skip? as usize], Vec3::ZERO, d, 0.0).e))
            .or_else(|| {
                let i = floor_i64(o.x / self.period);
                let x = o.x - i as f64 * self.period;
                let (z0, z1) = (self.planes[0].z_at(x, 0.0), self.planes[1].z_at(x, 0.0));
                let plane = if z0 <= z1 {
                    self.planes[0]
                } else {
                    self.planes[1]
                };
                let ol = Vec3::new(x, 0.0, o.z);
                super::side_from_surface(ol, d, z0.min(z1), plane.z_err(x, 0.0), self.tol, &plane)
            })
            .unwrap_or_else(|| {
                let i = floor_i64(o.x / self.period);
                side_at_origin(&Self::below_spans(&self.gaps(o, d, i, skip)))
            });
        // Walk along x only: the y component is dropped from the walk direction.
        let dx_only = Vec3::new(d.x, 0.0, d.z);
        let mut first = true;
        for cell in GridWalk::new(o, dx_only, self.period, t_start, t_end, MAX_CELLS_PER_QUERY) {
            let g = self.gaps(o, d, cell.i, skip);
            let entry = cell_entry(&Self::below_spans(&g), side, cell.t0, cell.t1, self.depth);
            let first_cell = std::mem::replace(&mut first, false);
            let Some(entry) = entry else { continue };
            // Hit point snapped onto the surface min(rising, falling).
            let t = entry.t;
            let probe = |dt: f64| {
                let q = o + (t + dt) * d;
                let i = floor_i64(q.x / self.period);
                let qx = q.x - i as f64 * self.period;
                let (q0, q1) = (self.planes[0].z_at(qx, 0.0), self.planes[1].z_at(qx, 0.0));
                (i, if q0 <= q1 { 0 } else { 1 })
            };
            let ok = |i: i64, k: u32| {
                !(i == 0 && skip == Some(k)) && super::faces(side, d, self.normals[k as usize])
            };
            let delta = super::PROBE_REL * self.period;
            let (ci, facet) = super::crossed_facet(&entry, first_cell, cell.i, delta, probe, ok);
            let p = o + t * d;
            let (x, _) = clamp_into(p.x - ci as f64 * self.period, self.period);
            let fy = (p.y / self.period).floor() * self.period;
            let (y, _) = clamp_into(p.y - fy, self.period);
            let (z0, z1) = (self.planes[0].z_at(x, y), self.planes[1].z_at(x, y));
            let active = if z0 <= z1 { 0 } else { 1 };
            let point = Vec3::new(x, y, z0.min(z1));
            let p_err = snapped_err(x, y, self.planes[active].z_err(x, y));
            return Some(facet_hit(
                t,
                point,
                p_err,
                self.normals[facet as usize],
                facet,
            ));
        }
        None
    }

    fn facet_tilts_deg(&self) -> Vec<f64> {
        vec![self.angle_deg]
    }

    fn symmetry(&self) -> Symmetry {
        Symmetry::Mirror
    }

    fn describe(&self) -> String {
        format!(
            "V-grooves along y: period {} µm, facet angle {:.4}°, depth {:.4} µm",
            self.period, self.angle_deg, self.height
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn vertical_ray_hits_facet_at_groove_angle() {
        let g = VGrooves::new(4.0, 45.0).unwrap();
        let h = g
            .intersect(Vec3::new(1.0, 0.3, 10.0), Vec3::NEG_Z, None)
            .unwrap();
        assert_eq!(h.facet, FacetId(0));
        assert!((h.point.z - 1.0).abs() < 1e-12);
        assert!((h.normal.z - 45f64.to_radians().cos()).abs() < 1e-12);
        let h = g
            .intersect(Vec3::new(7.0, 0.3, 10.0), Vec3::NEG_Z, None)
            .unwrap();
        assert_eq!(h.facet, FacetId(1));
        assert!((h.point.x - 3.0).abs() < 1e-12 && (h.point.z - 1.0).abs() < 1e-12);
    }
}
