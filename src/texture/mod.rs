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
//! [`from_file`] reads our TOML texture schema (see [`file`]).
//!
//! How crossings are found (all analytic textures): a 2D walk over the lattice cells the ray's
//! xy projection crosses ([`crate::geometry::grid`]), and within each cell the first change of
//! side computed from one root per facet plane ([`crate::geometry::crossing`]). The side the
//! ray starts on is, in order: above/below the slab `z_range_um()` if the origin lies outside
//! it; the side `dir` points to relative to `skip` if given; otherwise the side the origin lies
//! on (an origin on the surface within rounding error counts as leaving it along `dir`).
//! Limits: a ray that would cross more than [`MAX_CELLS_PER_QUERY`] cells inside the slab
//! (|dir.z| ≲ 10⁻⁵ over a textured surface) returns `None` although it is still inside the
//! slab; the tracer can tell (its origin side and direction do not lead out of the slab) and
//! should count it as lost.

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
pub use pyramids::RegularPyramids;
pub use random::{RandomPyramids, RandomPyramidsSpec, SizeDistribution};

use crate::geometry::crossing::{Entry, Span, first_in_union, first_outside_union};
use crate::geometry::{FacetId, Hit, Vec3, gamma};

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

/// A periodic textured surface.
pub trait Texture: Send + Sync + std::fmt::Debug {
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
    /// Symmetry for azimuthal bin reduction.
    fn symmetry(&self) -> Symmetry;
    /// One-line human description with units, for reports.
    fn describe(&self) -> String;
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
#[inline]
pub(crate) fn slab_interval(oz: f64, dz: f64, z_lo: f64, z_hi: f64) -> Option<(f64, f64)> {
    if dz == 0.0 {
        return (z_lo <= oz && oz <= z_hi).then_some((0.0, f64::INFINITY));
    }
    let ta = (z_lo - oz) / dz;
    let tb = (z_hi - oz) / dz;
    let (t0, t1) = (ta.min(tb).max(0.0), ta.max(tb));
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
#[inline]
pub(crate) fn cell_entry(below: &[Span], side: Side, lo: f64, hi: f64) -> Option<Entry> {
    match side {
        Side::Above => first_in_union(below, lo, hi),
        Side::Below => first_outside_union(below, lo, hi),
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

/// Clamps a local coordinate into [0, period) and returns it with the amount moved.
#[inline]
pub(crate) fn clamp_into(x: f64, period: f64) -> (f64, f64) {
    let c = x.clamp(0.0, period.next_down());
    (c, (c - x).abs())
}

/// Rounding-error bound of each coordinate of o + t·d (one product and one sum per coordinate,
/// plus one subtraction of a cell offset), µm.
#[inline]
pub(crate) fn ray_point_err(o: Vec3, d: Vec3, t: f64) -> Vec3 {
    gamma(4) * (o.abs() + (t * d).abs())
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
