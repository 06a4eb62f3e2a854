//! Surface geometries as periodic unit cells behind one trait, [`Texture`].
//!
//! Frame and units: lengths in µm, z up; the medium "above" fills z > `z_range_um()[1]`, the
//! medium "below" fills z < `z_range_um()[0]`. The surface is the graph of a height function
//! (no overhangs) repeated with the cell period. Wafer thickness is measured from the
//! texture's base plane z = 0 (see each texture for where its base plane sits).
//! Invariant: `intersect` finds the first crossing of the surface along a ray, from either
//! side, exactly (analytic facets, no tessellation of analytic shapes), and never returns the
//! facet passed as `skip`.

use crate::geometry::{FacetId, Hit, Vec3};

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
    /// Unit-cell periods along x and y, µm (> 0).
    fn period_um(&self) -> [f64; 2];
    /// [z_min, z_max] µm: every surface point lies within; a ray beyond it has left.
    fn z_range_um(&self) -> [f64; 2];
    /// First intersection with t > 0 of the ray (`origin` in the unit cell, `dir` unit length),
    /// skipping facet `skip` of the origin's cell, or `None` if the ray leaves the slab
    /// `z_range_um()` without touching the surface. The hit point is wrapped into the unit cell.
    fn intersect(&self, origin: Vec3, dir: Vec3, skip: Option<FacetId>) -> Option<Hit>;
    /// Symmetry for azimuthal bin reduction.
    fn symmetry(&self) -> Symmetry;
    /// One-line human description with units, for reports.
    fn describe(&self) -> String;
}
