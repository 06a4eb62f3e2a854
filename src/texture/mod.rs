//! Surface geometries as periodic unit cells behind one trait, [`Texture`].
//!
//! Frame and units: lengths in µm, z up; the medium "above" fills z > `z_range_um()[1]`, the
//! medium "below" fills z < `z_range_um()[0]`. The surface is the graph of a height function
//! (no overhangs) repeated with the cell period. Wafer thickness is measured from the
//! texture's base plane z = 0 (see each texture for where its base plane sits).
//! Invariant: `intersect` finds the first crossing of the surface along a ray, from either
//! side, exactly (analytic facets, no tessellation of analytic shapes), and never returns the
//! facet passed as `skip`.
//!
//! Textures: [`Planar`], [`RegularPyramids`] (upright or inverted, on a square lattice with
//! optional flat gaps and rotation), [`VGrooves`], [`RandomPyramids`] (union of random upright
//! pyramids on a periodic tile), [`HeightMap`] (triangulated grayscale image), and the ideal
//! references [`IdealSpecular`] and [`IdealLambertian`] (contract in [`ideal`]). Files:
//! [`from_file`] reads our TOML texture schema (see [`mod@file`]).
//!
//! How crossings are found (every texture): a 2D walk over the lattice cells the ray's xy
//! projection crosses ([`crate::geometry::grid`]), and within each cell the first change of
//! side computed from one root per facet plane ([`crate::geometry::crossing`]). The side the
//! ray starts on is, in order: above/below the slab `z_range_um()` if the origin lies outside
//! it; the side `dir` points to relative to `skip` if given; the side of the surface the
//! origin lies on; for an origin on the surface within rounding, the side `dir` points to
//! relative to the facet owning that position.
//!
//! Robustness rules (tests: `tests/robustness.rs`): a hit point is snapped onto the surface
//! and its `p_err` bounds its distance to it; a change of side counts only if the ray then
//! gets deeper than a tolerance of ~10⁻¹⁵ of the feature size on the far side
//! (`cell_entry`), so reported sides alternate along a ray and a ray through an edge,
//! valley, tip or cell corner lands exactly once (net); the facet named for a crossing always
//! faces the ray the right way (`crossed_facet`).
//!
//! For the tracer: continue a ray from a hit with [`Texture::intersect_after`], which by
//! default starts it at `offset_origin(hit.point, hit.p_err, hit.normal, dir)`
//! ([`crate::geometry::robust::offset_origin`]) with `Some(hit.facet)` as `skip`.
//!
//! Limits: a ray that would cross more than [`MAX_CELLS_PER_QUERY`] cells inside the slab
//! (|dir.z| ≲ 10⁻⁵ over a textured surface) returns `None` although it is still inside the
//! slab; the tracer can tell (its side and direction do not lead out of the slab) and should
//! count it as lost.

pub mod file;
pub mod flipped;
pub mod grooves;
pub mod heightmap;
pub mod ideal;
pub mod planar;
pub mod pyramids;
pub mod random;

pub use file::{Problem, RawEntry, RawTexture, TextureError, from_file, from_table, from_toml_str};
pub use flipped::Flipped;
pub use grooves::VGrooves;
pub use heightmap::HeightMap;
pub use ideal::{IdealLambertian, IdealSpecular, lambertian_direction};
pub use planar::Planar;
pub use pyramids::{RegularPyramids, RegularPyramidsSpec};
pub use random::{Pyramid, RandomPyramids, RandomPyramidsSpec, SizeDistribution, SizeOf};

use crate::geometry::crossing::{Entry, Span, first_in_union, first_outside_union};
use crate::geometry::robust::offset_origin;
use crate::geometry::{FacetId, Hit, Vec3, gamma, greater, lesser};

/// Most lattice cells one `intersect` call visits inside the slab before giving up (`None`).
pub const MAX_CELLS_PER_QUERY: usize = 1 << 16;

/// Facet angle of {111} planes on a (100) silicon surface, atan(√2) = 54.7356°, degrees.
/// The angle between the (100) and (111) planes of a cubic crystal (common practice, no
/// source needed beyond the geometry of the cube: cos θ = 1/√3).
pub const SI_111_ANGLE_DEG: f64 = 54.735_610_317_245_35;

/// How the tracer treats the surface.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SurfaceKind {
    /// Real facets: intersect them and apply the coated interface's response at the local angle.
    Geometric,
    /// Ideal specular plane (z = 0), the reference for planar thin-film results.
    IdealSpecular,
    /// Ideal Lambertian randomiser at z = 0 (definition in `texture::ideal`).
    IdealLambertian,
}

/// Symmetry of the texture about the z axis, used to reduce azimuthal bins.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Symmetry {
    /// Rotationally symmetric in distribution (planar, ideal surfaces): azimuth is irrelevant.
    Isotropic,
    /// Fourfold with mirror lines (square lattices of pyramids aligned with the axes): C4v.
    Square,
    /// Mirror about the x-z and y-z planes (V-grooves along y).
    Mirror,
    /// No symmetry assumed.
    None,
}

/// A periodic textured surface. (`Any` lets the tracer pick a loop compiled for the
/// concrete type of the common textures, see `tracer::Surface::follow`.)
pub trait Texture: std::any::Any + Send + Sync + std::fmt::Debug {
    /// How the tracer treats this surface.
    fn kind(&self) -> SurfaceKind {
        SurfaceKind::Geometric
    }
    /// Unit-cell periods along x and y, µm (> 0): the lengths of the two lattice vectors.
    fn period_um(&self) -> [f64; 2];
    /// Lattice vectors (x, y components, µm) spanning the unit cell
    /// {u·a + v·b : u, v ∈ [0, 1)}; `intersect` wraps hit points into it. Default: the
    /// axis-aligned cell [0, px) × [0, py). A rotated lattice (see
    /// [`RegularPyramids`]) has a rotated cell; sample lateral positions as u·a + v·b.
    fn lattice_um(&self) -> [[f64; 2]; 2] {
        let [px, py] = self.period_um();
        [[px, 0.0], [0.0, py]]
    }
    /// [z_min, z_max] µm: every surface point lies within; a ray beyond it has left.
    fn z_range_um(&self) -> [f64; 2];
    /// First intersection with t > 0 of the ray (`origin` in or next to the unit cell, `dir`
    /// unit length), or `None` if the ray leaves the slab `z_range_um()` without touching the
    /// surface. `skip` is the facet the ray is leaving (as returned in the previous [`Hit`],
    /// i.e. a facet of the unit cell itself); it is never returned and fixes the side the ray
    /// starts on. The hit point is wrapped into the unit cell and its facet id is valid there.
    /// A crossing counts only if t exceeds its rounding-error bound. No allocation.
    fn intersect(&self, origin: Vec3, dir: Vec3, skip: Option<FacetId>) -> Option<Hit>;
    /// First crossing of a ray leaving the surface at `from` (a hit this texture returned)
    /// along `dir`, reflected or refracted there; t is measured from `from.point`. Default:
    /// [`Self::intersect`] from just off the facet, on `dir`'s side
    /// ([`crate::geometry::robust::offset_origin`]), with the facet as `skip`. A texture
    /// whose fast path treats the facet left as exactly at t = 0 may start from the hit
    /// point itself.
    fn intersect_after(&self, from: &Hit, dir: Vec3) -> Option<Hit> {
        let origin = offset_origin(from.point, from.p_err, from.normal, dir);
        self.intersect(origin, dir, Some(from.facet))
    }
    /// Tilts of the surface's facets from the base plane, degrees (0 for flat parts), each
    /// listed once: coatings deposited by line of sight are thinner on tilted facets
    /// (see [`coating_tilt_levels`]). Default: flat only.
    fn facet_tilts_deg(&self) -> Vec<f64> {
        vec![0.0]
    }
    /// Symmetry for azimuthal bin reduction.
    fn symmetry(&self) -> Symmetry;
    /// One-line human description with units, for reports.
    fn describe(&self) -> String;
}

/// Finest step of the facet-tilt levels at which directional coatings are tabulated, degrees.
pub const TILT_STEP_DEG: f64 = 0.25;
/// Most tilt levels (pairs of angle tables) per coated interface and wavelength.
pub const MAX_TILT_LEVELS: usize = 32;

/// Cosines of the tilt levels at which a directional coating on a texture with facet tilts
/// `tilts_deg` is tabulated: the tilts rounded to a step of [`TILT_STEP_DEG`], the step
/// doubled until at most [`MAX_TILT_LEVELS`] levels remain. A facet uses the nearest level,
/// so its film thickness d·cos θ is off by at most d·sin θ·(step/2) — 0.3 % of d at 54.7°
/// with the finest step. Sorted, each level once; `[1.0]` for an empty list.
pub fn coating_tilt_levels(tilts_deg: &[f64]) -> Vec<f64> {
    let mut step = TILT_STEP_DEG;
    loop {
        let mut levels: Vec<i64> = tilts_deg
            .iter()
            .filter(|t| t.is_finite())
            .map(|t| (t.clamp(0.0, 90.0) / step).round() as i64)
            .collect();
        levels.sort_unstable();
        levels.dedup();
        if levels.len() <= MAX_TILT_LEVELS {
            if levels.is_empty() {
                return vec![1.0];
            }
            let mut cos: Vec<f64> = levels
                .iter()
                .map(|&k| (k as f64 * step).to_radians().cos())
                .collect();
            cos.sort_by(f64::total_cmp);
            return cos;
        }
        step *= 2.0;
    }
}

/// Which side of the surface a ray is on.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Side {
    /// In the medium above (z larger than the surface).
    Above,
    /// In the medium below (inside the textured layer).
    Below,
}

impl Side {
    /// The side a ray moving with gap slope `e` (dG/dt relative to a plane it leaves) ends up on;
    /// `None` when it moves along the plane.
    #[inline]
    pub(crate) fn leaving(e: f64) -> Option<Side> {
        if e > 0.0 {
            Some(Side::Above)
        } else if e < 0.0 {
            Some(Side::Below)
        } else {
            None
        }
    }
}

/// Parameter interval [t0, t1], t0 ≥ 0, where the ray's z lies in [z_lo, z_hi]; `None` if empty.
#[inline(always)]
pub(crate) fn slab_interval(oz: f64, dz: f64, z_lo: f64, z_hi: f64) -> Option<(f64, f64)> {
    if dz == 0.0 {
        return (z_lo <= oz && oz <= z_hi).then_some((0.0, f64::INFINITY));
    }
    let inv = 1.0 / dz;
    let (ta, tb) = ((z_lo - oz) * inv, (z_hi - oz) * inv);
    let (t0, t1) = (greater(lesser(ta, tb), 0.0), greater(ta, tb));
    (t0 <= t1).then_some((t0, t1))
}

/// Side of the origin from its position relative to the padded slab, or `None` when inside it.
#[inline]
pub(crate) fn side_outside_slab(oz: f64, z_lo: f64, z_hi: f64) -> Option<Side> {
    if oz > z_hi {
        Some(Side::Above)
    } else if oz < z_lo {
        Some(Side::Below)
    } else {
        None
    }
}

/// First change of side within [lo, hi] for a cell whose below-surface set is the union of
/// `below`: entering it from above, or leaving it from below.
///
/// A change of side counts only if the ray then gets deeper than `depth_tol` (µm) on the far
/// side. Shallower excursions arise where two cells' rounded planes disagree at their common
/// wall, where an origin offset along one facet's normal grazes the neighbouring facet at a
/// valley, where a ray leaves its first cell through a vertex, or where a ray skims an edge
/// within rounding. One that comes back within the cell is skipped both ways, so the sides
/// reported along a ray always alternate; one still shallow at the cell's end is left to the
/// next cell, which sees the ray afresh (a real crossing near a wall is then reported there,
/// at most `depth_tol` from the surface). Depth bound: see [`excursion_depth`].
#[inline(always)]
pub(crate) fn cell_entry(
    below: &[Span],
    side: Side,
    lo: f64,
    hi: f64,
    depth_tol: f64,
) -> Option<Entry> {
    let mut from = lo;
    for _ in 0..16 {
        let e = match side {
            Side::Above => first_in_union(below, from, hi),
            Side::Below => first_outside_union(below, from, hi),
        };
        let e = e?;
        // Fast acceptance: a crossing inside the cell into a span that alone keeps the ray on
        // the far side deep enough (entries at the cell's wall always get the full check).
        if !e.inside_at_lo && excursion_depth(&e, e.span_end.min(hi), e.span_end_rate) > depth_tol {
            return Some(e);
        }
        let back = match side {
            Side::Above => first_outside_union(below, e.t, hi),
            Side::Below => first_in_union(below, e.t, hi),
        };
        let (until, rate_back) = back.map_or((hi, f64::INFINITY), |b| (b.t, b.rate));
        if excursion_depth(&e, until, rate_back) > depth_tol {
            return Some(e);
        }
        from = back?.t;
    }
    None // the ray runs along the surface within rounding: no crossing here
}

/// Quick decision for a cell, equivalent to [`cell_entry`] where it answers:
/// `Some(Some((t, tag)))` a crossing strictly inside the cell after which the ray goes clearly
/// deeper than the tolerance, `Some(None)` clearly no crossing, `None` undecided (the ray is
/// on the far side at the cell's entry, or the excursion may be shallow: use `cell_entry`).
#[inline(always)]
pub(crate) fn quick_entry(
    below: &[Span],
    side: Side,
    lo: f64,
    hi: f64,
    depth_tol: f64,
) -> Option<Option<(f64, u32)>> {
    let deep = 4.0 * depth_tol;
    match side {
        Side::Above => {
            // Outside every span at lo; the earliest start in (lo, hi].
            let mut best: Option<&Span> = None;
            for s in below {
                if s.start <= lo && lo < s.end {
                    return None;
                }
                if s.start > lo
                    && s.start < s.end
                    && s.start <= hi
                    && best.is_none_or(|b| s.start < b.start)
                {
                    best = Some(s);
                }
            }
            let Some(s) = best else { return Some(None) };
            let depth = s.start_rate.min(s.end_rate) * (s.end.min(hi) - s.start);
            (depth > deep).then_some(Some((s.start, s.start_tag)))
        }
        Side::Below => {
            // Inside a span at lo; push t through the spans containing it.
            let mut t = lo;
            let (mut tag, mut rate) = (u32::MAX, 0.0);
            for _ in 0..below.len() {
                let mut moved = false;
                for s in below {
                    if s.start < t && t < s.end {
                        (t, tag, rate, moved) = (s.end, s.end_tag, s.end_rate, true);
                    }
                }
                if !moved {
                    break;
                }
            }
            if tag == u32::MAX {
                return None;
            }
            if t > hi {
                return Some(None);
            }
            // Outside from t until the next start after it.
            let (mut back, mut back_rate) = (hi, f64::INFINITY);
            for s in below {
                if s.start > t && s.start < s.end && s.start < back {
                    (back, back_rate) = (s.start, s.start_rate);
                }
            }
            let depth = rate.min(back_rate) * (back - t);
            (depth > deep).then_some(Some((t, tag)))
        }
    }
}

/// Upper bound on how deep the ray gets on the far side between crossing `e` and time
/// `until`, where it comes back through a plane with |dG/dt| = `rate_back` (∞ if it does not
/// come back), µm. On the far side since `e.since` through a plane with rate `e.rate`, the
/// ray at time t is within e.rate·(t − e.since) of that plane and within
/// rate_back·(until − t) of the other.
#[inline(always)]
pub(crate) fn excursion_depth(e: &Entry, until: f64, rate_back: f64) -> f64 {
    let from_entry = if e.since.is_finite() {
        e.rate * (until - e.since)
    } else {
        f64::INFINITY
    };
    from_entry.min(rate_back * (until - e.t))
}

/// Names the facet of a crossing and the cell it is reported in.
///
/// A crossing found inside a cell carries the plane it crossed, which faces the ray the right
/// way by construction. A ray found already on the far side at a cell's wall (or at its
/// origin) crossed within rounding of that point; candidates are then, in order: the facet
/// under the ray just before (`probe(−δ)`, the one it was approaching, located at the point),
/// the set's bounding plane (`entry.tag`, right-facing by construction but possibly not at the
/// point), the facet just after (`probe(+δ)`). The first that faces the ray the right way and
/// is not the facet being left (`ok`) is taken.
#[inline(always)]
pub(crate) fn crossed_facet<C: Copy>(
    entry: &Entry,
    first_cell: bool,
    here: C,
    delta: f64,
    probe: impl Fn(f64) -> (C, u32),
    ok: impl Fn(C, u32) -> bool,
) -> (C, u32) {
    if !entry.inside_at_lo
        && let Some(k) = entry.tag
    {
        return (here, k);
    }
    let back = (!first_cell).then(|| probe(-delta));
    let tagged = entry.tag.map(|k| (here, k));
    let ahead = probe(delta);
    [back, tagged, Some(ahead)]
        .into_iter()
        .flatten()
        .find(|&(c, k)| ok(c, k))
        .or(tagged)
        .unwrap_or(ahead)
}

/// True when a facet with up normal `n` is met from `side` by a ray along `d` (d·n < 0 from
/// above, > 0 from below).
#[inline]
pub(crate) fn faces(side: Side, d: Vec3, n: Vec3) -> bool {
    match side {
        Side::Above => d.dot(n) < 0.0,
        Side::Below => d.dot(n) > 0.0,
    }
}

/// Side of an origin inside the slab from the surface under it: by the sign of o_z − z_surf
/// when that exceeds the rounding bound `z_err` plus the tolerance floor `tol`; otherwise the
/// origin is on the surface and the ray is on the side `d` points to relative to the facet
/// owning the origin's position (plane `owner`). `None` if the ray runs along that facet.
#[inline]
pub(crate) fn side_from_surface(
    o: Vec3,
    d: Vec3,
    z_surf: f64,
    z_err: f64,
    tol: f64,
    owner: &crate::geometry::crossing::HeightPlane,
) -> Option<Side> {
    let g = o.z - z_surf;
    if g.abs() > z_err + tol + gamma(2) * o.z.abs() {
        Some(if g > 0.0 { Side::Above } else { Side::Below })
    } else {
        Side::leaving(d.z - (owner.a * d.x + owner.b * d.y))
    }
}

/// Side at t = 0⁺ of an origin in a cell whose below-surface set is the union of `below`.
#[inline]
pub(crate) fn side_at_origin(below: &[Span]) -> Side {
    if first_in_union(below, 0.0, 0.0).is_some() {
        Side::Below
    } else {
        Side::Above
    }
}

/// Probe distance δ of [`crossed_facet`], relative to the texture's feature size: far beyond
/// the rounding of a crossing point and far below any facet size.
pub(crate) const PROBE_REL: f64 = 1e-12;

/// Floor of the on-plane tolerance of [`Gap::new`](crate::geometry::crossing::Gap::new) for a
/// texture whose plane terms (|a·x|, |b·y|, |w|, |z| in the frames it uses) sum to at most
/// `scale` µm: covers the rounding of moving a point between frames (lattice rotation, tile
/// shifts), which the per-gap bound computed in one frame does not see.
#[inline]
pub(crate) fn on_plane_tol(scale: f64) -> f64 {
    gamma(4) * scale
}

/// Depth below which an excursion to the far side does not count ([`cell_entry`]): above the
/// disagreement of neighbouring cells' rounded planes at their wall and above how far an
/// origin offset from a hit of this texture ([`crate::geometry::robust::offset_origin`],
/// error box γ₃-sized in the same terms) can reach into a neighbouring facet.
#[inline]
pub(crate) fn depth_tol(scale: f64) -> f64 {
    gamma(16) * scale
}

/// Clamps a local coordinate into [0, period) and returns it with the amount moved.
#[inline]
pub(crate) fn clamp_into(x: f64, period: f64) -> (f64, f64) {
    let c = x.clamp(0.0, period.next_down());
    (c, (c - x).abs())
}

/// Error box of a hit point snapped onto the surface: its height was evaluated from the facet
/// planes at the (rounded) x, y with error bound `z_err`, so the point lies on the surface
/// within `z_err` vertically; x and y carry only their own representation error.
#[inline]
pub(crate) fn snapped_err(x: f64, y: f64, z_err: f64) -> Vec3 {
    Vec3::new(gamma(1) * x.abs(), gamma(1) * y.abs(), z_err)
}

/// A [`Hit`] in the local frame of the unit cell, before any rotation back to the lab frame.
#[inline]
pub(crate) fn facet_hit(t: f64, point: Vec3, p_err: Vec3, normal: Vec3, facet: u32) -> Hit {
    Hit {
        t,
        point,
        p_err,
        normal,
        facet: FacetId(facet),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn coating_tilt_levels_round_deduplicate_and_stay_few() {
        assert_eq!(coating_tilt_levels(&[]), vec![1.0]);
        let l = coating_tilt_levels(&[SI_111_ANGLE_DEG, 0.0, SI_111_ANGLE_DEG + 0.01]);
        assert_eq!(l.len(), 2);
        assert_eq!(l[1], 1.0);
        // 54.7356° rounds to 54.75° (step 0.25°): cos within sin θ·0.125° of the exact one.
        let exact = SI_111_ANGLE_DEG.to_radians().cos();
        assert!(
            (l[0] - exact).abs() <= SI_111_ANGLE_DEG.to_radians().sin() * 0.125f64.to_radians()
        );
        // A continuous spread is binned into at most MAX_TILT_LEVELS levels.
        let spread: Vec<f64> = (0..10_000).map(|i| 40.0 + 30.0 * i as f64 / 1e4).collect();
        let l = coating_tilt_levels(&spread);
        assert!(
            l.len() <= MAX_TILT_LEVELS && l.len() > MAX_TILT_LEVELS / 4,
            "{}",
            l.len()
        );
        assert!(l.windows(2).all(|w| w[0] < w[1]));
    }
}
