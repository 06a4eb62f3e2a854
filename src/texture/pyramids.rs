//! Regular square pyramids on a square lattice: upright (alkaline-etched or lithographic
//! upright pyramids) or inverted (lithographic pits), with optional flat gaps and rotation.
//!
//! Geometry, in the lattice frame (x, y along the lattice vectors, cell [0, p)², pyramid
//! centred at (p/2, p/2), half base a = b/2, facet angle α from the base plane):
//! * upright: z = max(0, h − tan α · max(|x − p/2|, |y − p/2|)), apex h = a·tan α; the base
//!   plane z = 0 holds the pyramid feet and the flat gaps;
//! * inverted: z = min(0, tan α · max(|x − p/2|, |y − p/2|) − h); the base plane z = 0 is
//!   the top surface (rims and flat gaps), pit bottoms at −h.
//!
//! Wafer thickness is measured from the base plane z = 0 in both cases (upright pyramids add
//! volume on top of it, inverted pits are cut into it).
//! Facet ids (valid in the unit cell): 0 the facet on the +x side of the centre, 1 on −x,
//! 2 on +y, 3 on −y, 4 the flat base plane (gaps; shared by all cells).
//! Invariant: crossings are exact against the five planes (see [`crate::geometry::crossing`]);
//! the cell a ray is in comes from a 2D walk over the lattice. Limits: period ≥ base.

use super::{
    MAX_CELLS_PER_QUERY, SI_111_ANGLE_DEG, Side, Symmetry, Texture, TextureError, cell_entry,
    clamp_into, crossed_facet, facet_hit, side_at_origin, side_outside_slab, slab_interval,
    snapped_err,
};
use crate::geometry::crossing::{Entry, Gap, HeightPlane, Span, SquareFaces};
use crate::geometry::grid::GridWalk;
use crate::geometry::lanes::{F, LANES, M, and, and_not, any, lanes, mask, or, pick};
use crate::geometry::robust::offset_origin;
use crate::geometry::{FacetId, Hit, Vec3, floor_i64, gamma, greater, lesser};
use crate::texture::{PROBE_REL, on_plane_tol};

/// Id of the flat base plane.
pub const FLAT_FACET: u32 = 4;

/// Relative padding of the slab searched for crossings (a ray leaving it is surely off the
/// surface), relative to the feature size.
const PAD_REL: f64 = 1e-9;

/// Margin of the closed-form fast path relative to the feature size (period + height): a
/// crossing is decided there only if every root, cell wall and excursion depth involved is
/// farther than this from deciding differently; otherwise the robust walk decides. Kept
/// below `PAD_REL`, so a ray leaving a facet at the slab's edge still clears the margin.
const FAST_MARGIN_REL: f64 = 1e-10;

/// Parameters of a regular pyramid texture (file keys of the same names).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RegularPyramidsSpec {
    /// Base side of one pyramid, µm (> 0).
    pub base_um: f64,
    /// Facet angle from the base plane, degrees, in (0, 90). {111} on (100) Si: 54.7356°.
    pub base_angle_deg: f64,
    /// Lattice period, µm (≥ base_um; the difference is a flat gap at z = 0).
    pub period_um: f64,
    /// Rotation of the lattice about z, degrees (counter-clockwise from the x axis).
    pub rotation_deg: f64,
    /// Inverted pits instead of upright pyramids.
    pub inverted: bool,
}

impl RegularPyramidsSpec {
    /// Upright {111} pyramids of base `base_um`, touching (period = base), unrotated.
    pub fn upright(base_um: f64) -> Self {
        RegularPyramidsSpec {
            base_um,
            base_angle_deg: SI_111_ANGLE_DEG,
            period_um: base_um,
            rotation_deg: 0.0,
            inverted: false,
        }
    }

    /// Inverted {111} pyramids of base `base_um` on period `period_um`, unrotated.
    pub fn inverted(base_um: f64, period_um: f64) -> Self {
        RegularPyramidsSpec {
            period_um,
            inverted: true,
            ..Self::upright(base_um)
        }
    }
}

/// Regular upright or inverted pyramids (see the module doc for the geometry).
#[derive(Clone, Debug)]
pub struct RegularPyramids {
    spec: RegularPyramidsSpec,
    period: f64,
    height: f64,
    centre: f64,
    planes: [HeightPlane; 5],
    /// Up normals in the lab frame.
    normals: [Vec3; 5],
    /// Up normals in the lattice frame.
    lattice_normals: [Vec3; 5],
    rotated: bool,
    cos_r: f64,
    sin_r: f64,
    pad: f64,
    /// On-plane tolerance floor (see [`Gap::new`]), µm.
    tol: f64,
    /// Excursion depth tolerance (see [`super::cell_entry`]), µm.
    depth: f64,
    /// Facet slope tan α.
    tan: f64,
    /// Margin of the closed-form fast path ([`RegularPyramids::fast_crossing`]), µm.
    margin: f64,
    /// Largest coordinate below the period (the last point of the unit cell), µm.
    period_below: f64,
    /// 1 / period, 1/µm.
    inv_period: f64,
    /// Upright pyramids touching their neighbours (no flat ground between them).
    touching: bool,
}

/// Checks a facet angle in degrees: finite and strictly between 0° and 90°.
pub(crate) fn check_angle(name: &str, angle_deg: f64) -> Result<(), TextureError> {
    if angle_deg.is_finite() && angle_deg > 0.0 && angle_deg < 90.0 {
        Ok(())
    } else {
        Err(TextureError::parameter(
            format!("{name} = {angle_deg}° is out of range"),
            "a facet angle strictly between 0° and 90° (54.7356° for {111} facets on (100) Si)",
            format!("set {name} between 0 and 90"),
        ))
    }
}

/// Checks a length in µm: finite and > 0.
pub(crate) fn check_length(name: &str, value_um: f64) -> Result<(), TextureError> {
    if value_um.is_finite() && value_um > 0.0 {
        Ok(())
    } else {
        Err(TextureError::parameter(
            format!("{name} = {value_um} µm is not a positive length"),
            "a finite length > 0 in µm",
            format!("set {name} to a positive number of micrometres"),
        ))
    }
}

impl RegularPyramids {
    /// Builds the texture; errors name the offending parameter and its valid range.
    pub fn new(spec: RegularPyramidsSpec) -> Result<Self, TextureError> {
        check_length("base_um", spec.base_um)?;
        check_length("period_um", spec.period_um)?;
        check_angle("base_angle_deg", spec.base_angle_deg)?;
        if spec.period_um < spec.base_um {
            return Err(TextureError::parameter(
                format!(
                    "period_um = {} µm is smaller than base_um = {} µm",
                    spec.period_um, spec.base_um
                ),
                "period_um ≥ base_um (pyramids may touch but not overlap)",
                "increase period_um or reduce base_um",
            ));
        }
        if !spec.rotation_deg.is_finite() {
            return Err(TextureError::parameter(
                format!("rotation_deg = {} is not a finite angle", spec.rotation_deg),
                "a rotation in degrees",
                "set rotation_deg to a number, e.g. 0 or 45",
            ));
        }
        let tan_a = spec.base_angle_deg.to_radians().tan();
        let half_base = 0.5 * spec.base_um;
        let centre = 0.5 * spec.period_um;
        let height = tan_a * half_base;
        let g = HeightPlane::GROUND;
        let planes = if spec.inverted {
            [
                HeightPlane {
                    a: tan_a,
                    b: 0.0,
                    w: -height - tan_a * centre,
                },
                HeightPlane {
                    a: -tan_a,
                    b: 0.0,
                    w: -height + tan_a * centre,
                },
                HeightPlane {
                    a: 0.0,
                    b: tan_a,
                    w: -height - tan_a * centre,
                },
                HeightPlane {
                    a: 0.0,
                    b: -tan_a,
                    w: -height + tan_a * centre,
                },
                g,
            ]
        } else {
            [
                HeightPlane {
                    a: -tan_a,
                    b: 0.0,
                    w: height + tan_a * centre,
                },
                HeightPlane {
                    a: tan_a,
                    b: 0.0,
                    w: height - tan_a * centre,
                },
                HeightPlane {
                    a: 0.0,
                    b: -tan_a,
                    w: height + tan_a * centre,
                },
                HeightPlane {
                    a: 0.0,
                    b: tan_a,
                    w: height - tan_a * centre,
                },
                g,
            ]
        };
        let rot = spec.rotation_deg.to_radians();
        let rotated = spec.rotation_deg.rem_euclid(360.0) != 0.0;
        let (sin_r, cos_r) = if rotated { rot.sin_cos() } else { (0.0, 1.0) };
        let to_lab = |v: Vec3| Vec3::new(cos_r * v.x - sin_r * v.y, sin_r * v.x + cos_r * v.y, v.z);
        let normals = planes.map(|p| to_lab(p.normal()));
        Ok(RegularPyramids {
            spec,
            period: spec.period_um,
            height,
            centre,
            planes,
            normals,
            lattice_normals: planes.map(|p| p.normal()),
            rotated,
            cos_r,
            sin_r,
            pad: PAD_REL * (spec.period_um + height),
            tol: on_plane_tol((1.0 + tan_a) * spec.period_um + 2.0 * height),
            depth: super::depth_tol((1.0 + tan_a) * spec.period_um + 2.0 * height),
            tan: tan_a,
            margin: FAST_MARGIN_REL * (spec.period_um + height),
            period_below: spec.period_um.next_down(),
            inv_period: 1.0 / spec.period_um,
            touching: !spec.inverted && spec.base_um == spec.period_um,
        })
    }

    /// The parameters this texture was built from.
    pub fn spec(&self) -> RegularPyramidsSpec {
        self.spec
    }

    /// Pyramid height (upright) or pit depth (inverted), µm.
    pub fn height_um(&self) -> f64 {
        self.height
    }

    /// Surface height at lattice-frame cell coordinates (x, y) ∈ [0, p)², µm.
    pub fn height_at(&self, x: f64, y: f64) -> f64 {
        let m = (x - self.centre).abs().max((y - self.centre).abs());
        let tan_a = self.planes[1].a.abs();
        if self.spec.inverted {
            (tan_a * m - self.height).min(0.0)
        } else {
            (self.height - tan_a * m).max(0.0)
        }
    }

    /// Lab-frame vector → lattice frame.
    #[inline]
    pub fn to_lattice(&self, v: Vec3) -> Vec3 {
        if self.rotated {
            Vec3::new(
                self.cos_r * v.x + self.sin_r * v.y,
                -self.sin_r * v.x + self.cos_r * v.y,
                v.z,
            )
        } else {
            v
        }
    }

    /// Surface height at cell coordinates (x, y) from the five planes, and the plane giving it
    /// (upright: max(0, min faces); inverted: min(0, max faces)).
    #[inline]
    fn surface(&self, x: f64, y: f64) -> (f64, usize) {
        let inv = self.spec.inverted;
        let mut face = (
            if inv {
                f64::NEG_INFINITY
            } else {
                f64::INFINITY
            },
            0,
        );
        for (k, p) in self.planes[..4].iter().enumerate() {
            let z = p.z_at(x, y);
            if (inv && z > face.0) || (!inv && z < face.0) {
                face = (z, k);
            }
        }
        let on_face = if inv { face.0 < 0.0 } else { face.0 > 0.0 };
        if on_face {
            face
        } else {
            (0.0, FLAT_FACET as usize)
        }
    }

    /// The below-surface set of one cell as a union of spans of t.
    #[inline(always)]
    fn below_spans(&self, g: &[Gap; 5]) -> [Span; 2] {
        let ground = g[4].below(FLAT_FACET);
        if self.spec.inverted {
            // z < min(0, max pit planes): below ground but not inside the pit cone
            // (the cone is the set above all four pit planes).
            let cone = g[0]
                .above(0)
                .and(g[1].above(1))
                .and(g[2].above(2))
                .and(g[3].above(3));
            if cone.is_empty() {
                return [ground, Span::EMPTY];
            }
            let cut_first = cone.start < ground.end;
            let first = Span {
                start: ground.start,
                end: ground.end.min(cone.start),
                start_tag: ground.start_tag,
                end_tag: if cut_first {
                    cone.start_tag
                } else {
                    ground.end_tag
                },
                start_rate: ground.start_rate,
                end_rate: if cut_first {
                    cone.start_rate
                } else {
                    ground.end_rate
                },
            };
            let cut_second = cone.end > ground.start;
            let second = Span {
                start: ground.start.max(cone.end),
                end: ground.end,
                start_tag: if cut_second {
                    cone.end_tag
                } else {
                    ground.start_tag
                },
                end_tag: ground.end_tag,
                start_rate: if cut_second {
                    cone.end_rate
                } else {
                    ground.start_rate
                },
                end_rate: ground.end_rate,
            };
            [first, second]
        } else {
            // z < max(0, min faces): below ground or inside the pyramid cone.
            let cone = g[0]
                .below(0)
                .and(g[1].below(1))
                .and(g[2].below(2))
                .and(g[3].below(3));
            [ground, cone]
        }
    }

    /// The hit of a crossing at ray parameter `t` on `facet` of lattice cell (i, j): the point
    /// wrapped into the unit cell and snapped onto the surface, in the lab frame.
    #[inline(always)]
    fn hit_at(&self, o: Vec3, d: Vec3, t: f64, i: i64, j: i64, facet: u32) -> Hit {
        let (cx, cy) = (i as f64 * self.period, j as f64 * self.period);
        let p = o + t * d;
        let (x, _) = clamp_into(p.x - cx, self.period);
        let (y, _) = clamp_into(p.y - cy, self.period);
        let (z, active) = self.surface(x, y);
        let err = snapped_err(x, y, self.planes[active].z_err(x, y));
        self.lab_hit(t, x, y, z, err, facet)
    }

    /// The hit at cell point (x, y, z) with error box `err`, rotated into the lab frame.
    #[inline(always)]
    fn lab_hit(&self, t: f64, x: f64, y: f64, z: f64, err: Vec3, facet: u32) -> Hit {
        let (point, p_err) = if self.rotated {
            let point = self.lattice_to_lab(Vec3::new(x, y, z));
            let rot_err = gamma(3) * (x.abs() + y.abs());
            (point, Vec3::new(rot_err, rot_err, err.z))
        } else {
            (Vec3::new(x, y, z), err)
        };
        facet_hit(t, point, p_err, self.normals[facet as usize], facet)
    }

    /// [`Self::hit_at`] for a crossing decided by the fast path: the point is snapped onto
    /// the crossed facet's plane (the surface there: the crossing is clear of every other
    /// plane's root).
    #[inline(always)]
    fn fast_hit_at(&self, o: Vec3, d: Vec3, t: f64, i: i64, j: i64, facet: u32) -> Hit {
        let p = o + t * d;
        let inside = |v: f64| {
            if v < 0.0 {
                0.0
            } else if v >= self.period {
                self.period_below
            } else {
                v
            }
        };
        let x = inside(p.x - i as f64 * self.period);
        let y = inside(p.y - j as f64 * self.period);
        let plane = &self.planes[facet as usize];
        let z = plane.z_at(x, y);
        let err = snapped_err(x, y, plane.z_err(x, y));
        self.lab_hit(t, x, y, z, err, facet)
    }

    /// Upright pyramids: the three commonest queries answered from one pyramid's cone (the
    /// set below its four face planes), by convexity, with neither cell walk nor span lists.
    /// Every cone lies below the ground plane outside its own base (height ≤ tan α·period/2),
    /// so the set below the surface is the ground half-space united with all the cones, and
    /// a point of a cone above the ground lies over its own base:
    /// * a ray leaving a face downward (into the pyramid) stays inside the cone until the
    ///   first face plane it leaves; it crosses the surface there if that is above the
    ///   ground, and otherwise never again (below the ground it is below the surface for
    ///   good);
    /// * a ray from above the slab enters the surface where it enters the cone of the cell it
    ///   starts over, if that entry is above the ground (it cannot have left that cell's
    ///   square before: the square is convex);
    /// * on touching pyramids, a ray leaving a face upward cannot meet its own (convex)
    ///   pyramid again nor the ground, so it leaves the slab if it rises out of it before
    ///   the cell's edge, and otherwise enters the neighbour's cone if that entry is above
    ///   the ground; the same holds for a ray from above that clearly misses the cone of
    ///   the cell it starts over (oblique incidence).
    ///
    /// Same answers and margins as [`Self::fast_crossing`] (every decision clear by
    /// `self.margin`); `None` for anything else, which the cell walk then decides.
    #[inline(always)]
    fn convex_crossing(
        &self,
        o: Vec3,
        d: Vec3,
        skip: Option<u32>,
        z_lo: f64,
        z_hi: f64,
    ) -> Option<Option<(f64, i64, i64, u32)>> {
        if self.spec.inverted {
            return None;
        }
        let (tan, m) = (self.tan, self.margin);
        let (sx, sy) = (tan * d.x, tan * d.y);
        let e = [d.z + sx, d.z - sx, d.z + sy, d.z - sy];
        if d.z == 0.0 || e.contains(&0.0) {
            return None;
        }
        let iz = 1.0 / d.z;
        let ray = ConeRay {
            o,
            d,
            e,
            ie: e.map(|v| 1.0 / v),
            rg: -o.z * iz,
            m,
        };
        let rg = ray.rg;
        match skip {
            None if o.z > z_hi && d.z < 0.0 => {
                let (i, j) = (
                    floor_i64(o.x * self.inv_period),
                    floor_i64(o.y * self.inv_period),
                );
                let r = ray.roots(self, i, j);
                let (s, _, end, _) = ray.cone(&r);
                if self.touching && exceeds(s, end + m) {
                    // Clearly past the pyramid below it: over the cells, as off a face.
                    return self.off_touching(&ray, z_hi, iz, i, j);
                }
                let (s, ts) = ray.entry(&r, 0.0)?;
                Some(Some((s, i, j, ts)))
            }
            Some(k) if k < FLAT_FACET && z_lo <= o.z && o.z <= z_hi && e[k as usize] < 0.0 => {
                // Into the pyramid: inside every other face plane already, above the ground.
                let mut r = ray.roots(self, 0, 0);
                r[k as usize] = 0.0;
                let (mut x, mut tag) = (f64::INFINITY, u32::MAX);
                let mut unclear = false;
                for (j, &rj) in r.iter().enumerate() {
                    if j as u32 == k {
                        continue;
                    }
                    if e[j] < 0.0 {
                        unclear |= !exceeds(-m, rj);
                    } else {
                        unclear |= !exceeds(rj, m);
                        if rj < x {
                            (x, tag) = (rj, j as u32);
                        }
                    }
                }
                if unclear {
                    return None;
                }
                if d.z < 0.0 {
                    if !exceeds(rg, m) {
                        return None;
                    }
                    if x > rg + m {
                        return Some(None); // below the ground first, and for good
                    }
                } else if !exceeds(-m, rg) {
                    return None;
                }
                (x.is_finite() && ray.clear(&r, x, tag)).then_some(Some((x, 0, 0, tag)))
            }
            Some(k) if k < FLAT_FACET && self.touching && z_lo <= o.z && o.z <= z_hi => {
                self.off_touching(&ray, z_hi, iz, 0, 0)
            }
            _ => None,
        }
    }

    /// [`Self::convex_crossing`] for a ray over touching pyramids that cannot meet the one
    /// of its cell (i0, j0): leaving a face of it outward (e_k > 0; its own cone is behind
    /// it), or from above the slab, clearly missing that cone. From cell to cell (no ground
    /// is exposed between touching pyramids), while it passes clearly over the edges and
    /// clearly misses the cones; a few cells at most. `iz` = 1/d.z.
    #[inline(always)]
    fn off_touching(
        &self,
        ray: &ConeRay,
        z_hi: f64,
        iz: f64,
        i0: i64,
        j0: i64,
    ) -> Option<Option<(f64, i64, i64, u32)>> {
        let (o, d, m, p) = (ray.o, ray.d, ray.m, self.period);
        let t_top = if d.z > 0.0 {
            (z_hi - o.z) * iz
        } else {
            f64::INFINITY
        };
        let to_edge = |c: i64, x: f64, dx: f64| {
            if dx > 0.0 {
                ((c + 1) as f64 * p - x) / dx
            } else if dx < 0.0 {
                (c as f64 * p - x) / dx
            } else {
                f64::INFINITY
            }
        };
        let (mut i, mut j) = (i0, j0);
        for _ in 0..4 {
            let (tx, ty) = (to_edge(i, o.x, d.x), to_edge(j, o.y, d.y));
            let edge = lesser(tx, ty);
            if t_top < edge - m {
                return Some(None); // out of the slab first
            }
            if !exceeds(edge, m) || (tx - ty).abs() <= m || !exceeds(o.z + d.z * edge, m) {
                return None; // at a corner, or low at the edge (a valley)
            }
            if tx < ty {
                i += if d.x > 0.0 { 1 } else { -1 };
            } else {
                j += if d.y > 0.0 { 1 } else { -1 };
            }
            let r = ray.roots(self, i, j);
            let (s, _, end, _) = ray.cone(&r);
            if s < end - m {
                let (s, ts) = ray.entry(&r, edge)?;
                return Some(Some((s, i, j, ts)));
            }
            if !exceeds(s, end + m) {
                return None; // grazing the cone
            }
        }
        None
    }

    /// Closed-form crossing for the common case, in the lattice frame: `Some(Some((t, i, j,
    /// facet)))` a crossing, `Some(None)` none before the ray leaves the slab, `None`
    /// undecided (the robust walk of [`Texture::intersect`] then decides).
    ///
    /// Same geometry as the robust walk (the below-surface set of each cell as at most two
    /// spans of t bounded by plane roots), without its rounding analysis: an answer is given
    /// only when every decision has a margin of `self.margin` (10⁻¹⁰ of the feature size) —
    /// the ray is clearly on its side at each cell's entry, the crossing is clearly inside the
    /// cell and away from every other plane's root (edges, valleys, feet), and the ray then
    /// goes clearly deeper than the margin. Rounding errors are ~10⁻¹⁵ of the feature size,
    /// so where it answers, the robust walk gives the same crossing; it declines for rays
    /// starting inside the slab without a facet to leave, rays along a plane, and anything
    /// within the margin of an edge or wall (a fraction ~10⁻⁹ of facet events in practice).
    #[inline(always)]
    #[allow(clippy::too_many_arguments)]
    fn fast_crossing(
        &self,
        o: Vec3,
        d: Vec3,
        skip: Option<u32>,
        t_start: f64,
        t_end: f64,
        z_lo: f64,
        z_hi: f64,
    ) -> Option<Option<(f64, i64, i64, u32)>> {
        let inv = self.spec.inverted;
        let tan = self.tan;
        let (sx, sy) = if inv {
            (-tan * d.x, -tan * d.y)
        } else {
            (tan * d.x, tan * d.y)
        };
        let e = [d.z + sx, d.z - sx, d.z + sy, d.z - sy, d.z];
        if e.contains(&0.0) {
            return None;
        }
        let above = if o.z > z_hi {
            true
        } else if o.z < z_lo {
            false
        } else {
            e[skip? as usize] > 0.0
        };
        let ie = e.map(|v| 1.0 / v);
        let m = self.margin;
        let skip_face = skip.filter(|&k| k < FLAT_FACET);
        let cg = if skip == Some(FLAT_FACET) { 0.0 } else { o.z };
        let rg = -cg * ie[4];
        // Below ground: (−∞, rg) moving up, [rg, ∞) moving down.
        let ground = if d.z > 0.0 {
            Lean::new(f64::NEG_INFINITY, rg, FLAT_FACET, FLAT_FACET)
        } else {
            Lean::new(rg, f64::INFINITY, FLAT_FACET, FLAT_FACET)
        };
        let p = self.period;
        let mut walk = GridWalk::new(o, d, p, t_start, t_end, MAX_CELLS_PER_QUERY);
        for cell in walk.by_ref() {
            let dx = (o.x - cell.i as f64 * p) - self.centre;
            let dy = (o.y - cell.j as f64 * p) - self.centre;
            let (u, v) = (tan * dx, tan * dy);
            let (q, u, v) = if inv {
                (o.z + self.height, -u, -v)
            } else {
                (o.z - self.height, u, v)
            };
            let mut c = [q + u, q - u, q + v, q - v];
            // The plane the ray leaves, its root pinned at t = 0 (the flat one in every cell).
            let mut pinned = if cg == 0.0 { FLAT_FACET } else { u32::MAX };
            if let Some(k) = skip_face
                && cell.i == 0
                && cell.j == 0
            {
                c[k as usize] = 0.0;
                pinned = k;
            }
            let r = [
                -c[0] * ie[0],
                -c[1] * ie[1],
                -c[2] * ie[2],
                -c[3] * ie[3],
                rg,
            ];
            // The cone: below all four faces (upright) or above all four (inverted pit).
            let mut cone = Lean::new(f64::NEG_INFINITY, f64::INFINITY, u32::MAX, u32::MAX);
            for k in 0..4 {
                if (e[k] < 0.0) != inv {
                    if r[k] > cone.s {
                        (cone.s, cone.ts) = (r[k], k as u32);
                    }
                } else if r[k] < cone.e {
                    (cone.e, cone.te) = (r[k], k as u32);
                }
            }
            if cone.e > cone.s && cone.e - cone.s <= m {
                return None; // grazing an edge or tip
            }
            let spans = if inv {
                if cone.s >= cone.e {
                    [ground, Lean::EMPTY]
                } else {
                    [
                        Lean::new(ground.s, lesser(ground.e, cone.s), FLAT_FACET, {
                            if cone.s < ground.e {
                                cone.ts
                            } else {
                                FLAT_FACET
                            }
                        }),
                        Lean::new(
                            greater(ground.s, cone.e),
                            ground.e,
                            if cone.e > ground.s {
                                cone.te
                            } else {
                                FLAT_FACET
                            },
                            FLAT_FACET,
                        ),
                    ]
                }
            } else {
                [ground, cone]
            };
            let (c0, c1) = (cell.t0, cell.t1);
            let crossing = if above {
                lean_entry(&spans, c0, c1, m, &e, pinned)?
            } else {
                lean_exit(&spans, c0, c1, m, &e, pinned)?
            };
            let Some((t, tag)) = crossing else { continue };
            // Away from every other plane's root: not at an edge, valley, foot or rim.
            for (k, &rk) in r.iter().enumerate() {
                if k as u32 != tag && (rk - t).abs() <= m {
                    return None;
                }
            }
            return Some(Some((t, cell.i, cell.j, tag)));
        }
        if walk.exhausted() {
            return None;
        }
        Some(None)
    }

    /// The robust walk (see the module docs of [`crate::texture`]): decides every case the
    /// fast path leaves open, in the lattice frame.
    #[allow(clippy::too_many_arguments)]
    fn robust_crossing(
        &self,
        o: Vec3,
        d: Vec3,
        skip: Option<u32>,
        t_start: f64,
        t_end: f64,
        z_lo: f64,
        z_hi: f64,
    ) -> Option<Hit> {
        let tan_a = self.planes[1].a.abs();
        let faces = SquareFaces::new(tan_a, d, self.spec.inverted);
        // The base plane is the same in every cell.
        let mut ground = Gap::new(&HeightPlane::GROUND, o, d, self.tol);
        if skip == Some(FLAT_FACET) {
            ground = ground.on_plane();
        }

        // Side the ray starts on.
        let side = side_outside_slab(o.z, z_lo, z_hi)
            .or_else(|| Side::leaving(Gap::new(&self.planes[skip? as usize], Vec3::ZERO, d, 0.0).e))
            .or_else(|| {
                let (i, j) = (floor_i64(o.x / self.period), floor_i64(o.y / self.period));
                let (x, y) = (o.x - i as f64 * self.period, o.y - j as f64 * self.period);
                let (z, k) = self.surface(x, y);
                let plane = self.planes[k];
                let ol = Vec3::new(x, y, o.z);
                super::side_from_surface(ol, d, z, plane.z_err(x, y), self.tol, &plane)
            })
            .unwrap_or_else(|| {
                let (i, j) = (floor_i64(o.x / self.period), floor_i64(o.y / self.period));
                side_at_origin(&self.below_spans(&self.gaps(o, &faces, ground, i, j, skip)))
            });

        // Walk the lattice cells until the ray changes side.
        let mut first = true;
        for cell in GridWalk::new(o, d, self.period, t_start, t_end, MAX_CELLS_PER_QUERY) {
            let g = self.gaps(o, &faces, ground, cell.i, cell.j, skip);
            let below = self.below_spans(&g);
            let first_cell = std::mem::replace(&mut first, false);
            let entry = match super::quick_entry(&below, side, cell.t0, cell.t1, self.depth) {
                Some(None) => continue,
                Some(Some((t, tag))) => Entry {
                    t,
                    tag: Some(tag),
                    inside_at_lo: false,
                    rate: 0.0,
                    since: t,
                    span_end: t,
                    span_end_rate: 0.0,
                },
                None => match cell_entry(&below, side, cell.t0, cell.t1, self.depth) {
                    Some(e) => e,
                    None => continue,
                },
            };
            // Hit point in the cell frame, snapped onto the surface (not onto the crossed
            // plane: within rounding of an edge the point may lie over the neighbouring facet,
            // and the surface is what the next ray's origin must be offset from).
            let t = entry.t;
            let probe = |dt: f64| {
                let q = o + (t + dt) * d;
                let (i, j) = (floor_i64(q.x / self.period), floor_i64(q.y / self.period));
                let (qx, qy) = (q.x - i as f64 * self.period, q.y - j as f64 * self.period);
                ((i, j), self.surface(qx, qy).1 as u32)
            };
            let ok = |c: (i64, i64), k: u32| {
                let left = skip == Some(k) && (k == FLAT_FACET || c == (0, 0));
                !left && super::faces(side, d, self.planes[k as usize].normal())
            };
            let delta = PROBE_REL * self.period;
            let ((ci, cj), facet) =
                crossed_facet(&entry, first_cell, (cell.i, cell.j), delta, probe, ok);
            return Some(self.hit_at(o, d, t, ci, cj, facet));
        }
        None
    }

    /// Gaps of the ray to the five planes of cell (i, j), with the leaving facet pinned.
    #[inline(always)]
    fn gaps(
        &self,
        o: Vec3,
        faces: &SquareFaces,
        ground: Gap,
        i: i64,
        j: i64,
        skip: Option<u32>,
    ) -> [Gap; 5] {
        let dx = (o.x - i as f64 * self.period) - self.centre;
        let dy = (o.y - j as f64 * self.period) - self.centre;
        let [g0, g1, g2, g3] = faces.gaps(dx, dy, o.z, self.height, self.tol);
        let mut g = [g0, g1, g2, g3, ground];
        if let Some(k) = skip
            && k < FLAT_FACET
            && i == 0
            && j == 0
        {
            g[k as usize] = g[k as usize].on_plane();
        }
        g
    }
}

/// `Packet::skip` of a ray entering from outside the slab (no facet left).
pub const NO_FACET: u32 = u32::MAX;

/// [`LANES`] rays for one query each, in the lattice frame: origins in the unit cell
/// [0, p)² (on the facet just left, or outside the slab for a ray entering it; only entries
/// from above are decided here), unit directions, and the facet left.
#[derive(Clone, Copy, Debug)]
pub struct Packet {
    pub ox: [f64; LANES],
    pub oy: [f64; LANES],
    pub oz: [f64; LANES],
    pub dx: [f64; LANES],
    pub dy: [f64; LANES],
    pub dz: [f64; LANES],
    /// Facet left (≤ [`FLAT_FACET`]), or [`NO_FACET`], as f64 (facet indices stay in vector
    /// registers with the rest of the lanes' values).
    pub skip: F,
}

impl Packet {
    /// Puts the ray from `o` along `d`, having left facet `skip`, into lane `l`.
    #[inline(always)]
    pub fn set(&mut self, l: usize, o: Vec3, d: Vec3, skip: u32) {
        self.ox[l] = o.x;
        self.oy[l] = o.y;
        self.oz[l] = o.z;
        self.dx[l] = d.x;
        self.dy[l] = d.y;
        self.dz[l] = d.z;
        self.skip[l] = f64::from(skip);
    }
}

impl Default for Packet {
    fn default() -> Self {
        Packet {
            ox: [0.0; LANES],
            oy: [0.0; LANES],
            oz: [1.0; LANES],
            dx: [0.0; LANES],
            dy: [0.0; LANES],
            dz: [-1.0; LANES],
            skip: [f64::from(NO_FACET); LANES],
        }
    }
}

/// Answers of a packet query ([`RegularPyramids::cross_packet`], or a texture's
/// `LaneTexture::cross_lanes` in the packet tracer), per lane: whether the ray crosses the
/// surface (then where, in the lattice frame, wrapped into the unit cell and snapped onto
/// the facet's plane, and on which facet) or leaves the slab first. A lane with neither
/// flag was too close to an edge, wall or plane to decide there: [`Texture::intersect`] or
/// [`Texture::intersect_after`] (the robust walk) must answer it.
#[derive(Clone, Copy, Debug)]
pub struct Crossings {
    pub crosses: M,
    pub leaves: M,
    /// The facet crossed, as f64 (see [`Packet::skip`]).
    pub face: F,
    pub x: [f64; LANES],
    pub y: [f64; LANES],
    pub z: [f64; LANES],
}

impl RegularPyramids {
    /// Whether [`Self::cross_packet`] serves this texture (upright pyramids; inverted ones
    /// are traced one ray at a time).
    pub fn has_packet_path(&self) -> bool {
        !self.spec.inverted
    }

    /// Lattice-frame vector → lab frame.
    #[inline(always)]
    pub fn lattice_to_lab(&self, v: Vec3) -> Vec3 {
        if self.rotated {
            let (c, s) = (self.cos_r, self.sin_r);
            Vec3::new(c * v.x - s * v.y, s * v.x + c * v.y, v.z)
        } else {
            v
        }
    }

    /// A lab-frame point of the unit cell (e.g. a hit point) in lattice coordinates, kept
    /// inside [0, p)² against rounding in the rotation.
    #[inline]
    pub fn home(&self, lab: Vec3) -> Vec3 {
        let v = self.to_lattice(lab);
        Vec3::new(
            clamp_into(v.x, self.period).0,
            clamp_into(v.y, self.period).0,
            v.z,
        )
    }

    /// The last coordinate below the period (the far edge of the unit cell), µm.
    #[inline]
    pub fn period_below(&self) -> f64 {
        self.period_below
    }

    /// Up normal of `facet` in the lattice frame.
    #[inline]
    pub fn lattice_normal(&self, facet: u32) -> Vec3 {
        self.lattice_normals[facet as usize]
    }

    /// [`Self::lattice_normal`] of each lane's facet (facet indices as f64).
    #[inline(always)]
    pub fn lattice_normal_lanes(&self, face: &F) -> [F; 3] {
        // Faces 0 and 1 tilt along x, 2 and 3 along y, all four with the same z component;
        // the ground is flat (as built in `new`; tested bit for bit).
        let is = face_masks(face);
        let flat = mask(|l| face[l] == f64::from(FLAT_FACET));
        let n = &self.lattice_normals;
        let [x0, x1, x2] = [n[0].x, n[1].x, n[2].x].map(|v| [v; LANES]);
        let [y2, y3, y0] = [n[2].y, n[3].y, n[0].y].map(|v| [v; LANES]);
        [
            pick(is[0], x0, pick(is[1], x1, x2)),
            pick(is[2], y2, pick(is[3], y3, y0)),
            pick(flat, [n[4].z; LANES], [n[0].z; LANES]),
        ]
    }

    /// The coefficients (a, b, w) of the planes of faces 0–3 (`is`: [`face_masks`]), lane
    /// by lane: faces 0 and 1 slope along x, 2 and 3 along y, and 0 and 2 (1 and 3) share
    /// their heights at the origin (as built in `new`; tested bit for bit).
    #[inline(always)]
    fn face_plane_lanes(&self, is: &[M; 4]) -> [F; 3] {
        let pl = &self.planes;
        let [a0, a1, a2] = [pl[0].a, pl[1].a, pl[2].a].map(|v| [v; LANES]);
        let [b2, b3, b0] = [pl[2].b, pl[3].b, pl[0].b].map(|v| [v; LANES]);
        [
            pick(is[0], a0, pick(is[1], a1, a2)),
            pick(is[2], b2, pick(is[3], b3, b0)),
            pick(or(is[1], is[3]), [pl[1].w; LANES], [pl[0].w; LANES]),
        ]
    }

    /// Height of `facet`'s plane at lattice-frame (x, y): a point snapped onto it.
    #[inline]
    pub fn snap(&self, facet: u32, x: f64, y: f64) -> f64 {
        self.planes[facet as usize].z_at(x, y)
    }

    /// The hit, in the lab frame, at lattice-frame (x, y) on `facet` (snapped onto its plane,
    /// with the error box of `fast_hit_at`): where a packet lane continues from when it asks
    /// [`Texture::intersect_after`].
    pub fn cell_hit(&self, x: f64, y: f64, facet: u32) -> Hit {
        let plane = &self.planes[facet as usize];
        let err = snapped_err(x, y, plane.z_err(x, y));
        self.lab_hit(0.0, x, y, plane.z_at(x, y), err, facet)
    }

    /// The cone shortcut (`convex_crossing`) for [`LANES`] rays at once (upright pyramids
    /// only, see [`Self::has_packet_path`]): the same three kinds of query, decisions and
    /// margins, written statement by statement over the lanes without branches, so that each
    /// statement compiles to one SIMD instruction. Lanes it cannot decide have neither flag
    /// set (see [`Crossings`]).
    #[inline(always)]
    pub fn cross_packet(&self, p: &Packet) -> Crossings {
        let (m, per) = (self.margin, self.period);
        let (none, zero) = ([0; LANES], [0.0; LANES]);
        let q = self.lane_query(p);
        let lanes_ray = q.ray(m);
        // Launch (A): where it enters the home cone, if clearly so, deep and above the ground.
        let launch = and(
            and(q.valid, mask(|l| p.skip[l] == f64::from(NO_FACET))),
            and(mask(|l| p.oz[l] > q.z_hi), q.down),
        );
        // Off a touching pyramid (C): the first step of the cell walk (`off_touching`)
        // comes first, so that one cone serves every lane: the home pyramid's for A and B,
        // the neighbour's across the first edge for C.
        let (mut i, mut j) = (zero, zero);
        let mut leaves = none;
        let (c_on, c_edge) = if self.touching {
            self.walk_step(p, &q, q.rising, &mut i, &mut j, &mut leaves)
        } else {
            (none, zero)
        };
        let (ci, cj) = (lanes(|l| i[l] * per), lanes(|l| j[l] * per));
        let pin: [M; 4] = std::array::from_fn(|f| and_not(q.left[f], q.rising));
        let r = self.pinned_roots(p, &q, &ci, &cj, &pin);
        let cone = lanes_ray.cone(&r, &pin);
        // (one entry test for A and C lanes, which are disjoint: from 0 for A, from the
        // edge for C)
        let enters_cone = lanes_ray.entry(p, &r, &cone, &pick(c_on, c_edge, zero));
        let a_hit = and(launch, enters_cone);
        // Into the pyramid (B): out through the first face plane it leaves, or below the
        // ground for good.
        let (b_on, sinks) = q.inside(&cone, m);
        leaves = or(leaves, sinks);
        let b_hit = and(
            and_not(b_on, sinks),
            and(
                mask(|l| cone.end[l].is_finite()),
                lanes_ray.clear(&r, &cone.end, &cone.te),
            ),
        );
        let c_meets = and(c_on, mask(|l| cone.s[l] < cone.end[l] - m));
        let c_hit = and(c_meets, enters_cone);
        let enters = or(a_hit, c_hit);
        let mut crosses = or(enters, b_hit);
        let mut t = pick(enters, cone.s, cone.end);
        let mut face = pick(enters, cone.ts, cone.te);
        let mut cell = [pick(c_hit, ci, zero), pick(c_hit, cj, zero)];
        // On from cell to cell while clearly past the cone (or else grazing it: undecided):
        // C lanes past the neighbour's, A lanes from above past the one below them.
        let past = mask(|l| cone.s[l] > cone.end[l] + m);
        let mut walking = if self.touching {
            and(or(launch, and_not(c_on, c_meets)), past)
        } else {
            none
        };
        for step in 0..4 {
            if step == 3 {
                walking = and_not(walking, q.rising); // four steps for C lanes, as off_touching
            }
            if !any(&walking) {
                break;
            }
            let (on, edge) = self.walk_step(p, &q, walking, &mut i, &mut j, &mut leaves);
            let (ci, cj) = (lanes(|l| i[l] * per), lanes(|l| j[l] * per));
            let rn = self.roots_lanes(p, &q.ie, &ci, &cj);
            let cone = lanes_ray.cone(&rn, &[none; 4]);
            let meets = and(on, mask(|l| cone.s[l] < cone.end[l] - m));
            let entry = and(meets, lanes_ray.entry(p, &rn, &cone, &edge));
            crosses = or(crosses, entry);
            t = pick(entry, cone.s, t);
            face = pick(entry, cone.ts, face);
            cell = [pick(entry, ci, cell[0]), pick(entry, cj, cell[1])];
            walking = and(and_not(on, meets), mask(|l| cone.s[l] > cone.end[l] + m));
        }
        // Crossing points, wrapped into the unit cell and snapped onto the facet's plane.
        let inside = |v: F| {
            let high = pick(mask(|l| v[l] >= per), [self.period_below; LANES], v);
            pick(mask(|l| v[l] < 0.0), [0.0; LANES], high)
        };
        let x = inside(lanes(|l| (p.ox[l] + t[l] * p.dx[l]) - cell[0][l]));
        let y = inside(lanes(|l| (p.oy[l] + t[l] * p.dy[l]) - cell[1][l]));
        // (The facets of crossings are faces 0–3.)
        let [pa, pb, pw] = self.face_plane_lanes(&face_masks(&face));
        Crossings {
            crosses,
            leaves,
            face,
            x,
            y,
            z: lanes(|l| pa[l] * x[l] + pb[l] * y[l] + pw[l]), // HeightPlane::z_at
        }
    }

    /// Whether a ray from height `z` along `d` (lattice frame) starts straight down from
    /// above the slab onto touching upright pyramids (as rays at normal incidence start).
    pub fn vertical_start(&self, d: Vec3, z: f64) -> bool {
        let z_hi = self.z_range_um()[1] + self.pad;
        self.touching && d.x == 0.0 && d.y == 0.0 && d.z < 0.0 && z > z_hi
    }

    /// Whether every lane of `p` holds such a ray ([`Self::vertical_start`]), just launched:
    /// then [`Self::vertical_packet`] answers the query.
    pub fn all_vertical(&self, p: &Packet) -> bool {
        (0..LANES).all(|l| {
            let d = Vec3::new(p.dx[l], p.dy[l], p.dz[l]);
            p.skip[l] == f64::from(NO_FACET) && self.vertical_start(d, p.oz[l])
        })
    }

    /// The crossings of a packet of rays straight down from above the slab onto touching
    /// upright pyramids, all just launched ([`Self::all_vertical`]), without the cone: the
    /// surface over the unit cell is its pyramid, so each ray meets it at its own (x, y), on
    /// the facet and at the height of `Self::surface` there (the lowest face plane, the
    /// first in face order on a ridge, where planes meet; the ground where none is above
    /// it: the cell's edge). Where [`Self::cross_packet`] decides such a lane, the same
    /// facet and crossing point, bit for bit; it also decides the lanes that the cone
    /// leaves to the robust walk (within its margin of a ridge or valley), where facets
    /// meet and which of them a ray lands on does not matter beyond rounding.
    #[inline(always)]
    pub fn vertical_packet(&self, p: &Packet) -> Crossings {
        let z: [F; 4] = std::array::from_fn(|f| {
            let plane = &self.planes[f];
            lanes(|l| plane.z_at(p.ox[l], p.oy[l]))
        });
        let (mut lowest, mut face) = (z[0], [0.0; LANES]);
        for (f, zf) in z.iter().enumerate().skip(1) {
            let lower = mask(|l| zf[l] < lowest[l]);
            lowest = pick(lower, *zf, lowest);
            face = pick(lower, [f as f64; LANES], face);
        }
        let ground = mask(|l| lowest[l] <= 0.0);
        Crossings {
            crosses: [u64::MAX; LANES],
            leaves: [0; LANES],
            face: pick(ground, [f64::from(FLAT_FACET); LANES], face),
            x: p.ox,
            y: p.oy,
            z: pick(ground, [0.0; LANES], lowest),
        }
    }

    /// Lanes certain to leave the slab without meeting the surface again, each decided
    /// clearly by the margin: rays into the pyramid of the facet they left that pass below
    /// the ground before any other face plane (case B of [`Self::cross_packet`], the same
    /// formulas); rays off a touching pyramid (case C) that rise out of the slab before the
    /// edge of their cell (the same formulas), or that cross that edge and then cannot come
    /// down to the surface before they are out of the slab. The last is a slope bound: the
    /// surface is Lipschitz, |S(a) − S(b)| ≤ tan α · max(|Δx|, |Δy|), and S = 0 on the cell
    /// edges of touching pyramids, so a ray at height z_e over an edge stays above the
    /// surface while z_e + s·(d_z − tan α · max(|d_x|, |d_y|)) > 0. The packet tracer asks
    /// this right after a facet event, so that a ray that leaves is done in the round of its
    /// last event.
    #[inline(always)]
    pub fn leaves_packet(&self, p: &Packet) -> M {
        let q = self.lane_query(p);
        let zero = [0.0; LANES];
        let r = self.pinned_roots(p, &q, &zero, &zero, &q.left);
        let home = q.ray(self.margin).cone(&r, &q.left);
        let (_, mut leaves) = q.inside(&home, self.margin);
        if self.touching {
            let (mut i, mut j) = (zero, zero);
            let (over, edge) = self.walk_step(p, &q, q.rising, &mut i, &mut j, &mut leaves);
            // Over the edge (clearly above it, S = 0 there): the least height above the
            // surface before the ray is out of the slab.
            let (tan, m) = (self.tan, self.margin);
            let lowest = lanes(|l| {
                let z_edge = p.oz[l] + p.dz[l] * edge[l];
                let steep = tan * greater(p.dx[l].abs(), p.dy[l].abs());
                z_edge + (q.t_top[l] - edge[l]) * lesser(p.dz[l] - steep, 0.0)
            });
            leaves = or(leaves, and(over, mask(|l| lowest[l] > m)));
        }
        leaves
    }

    /// The part of [`Self::cross_packet`] every kind of query needs (see [`LaneQuery`]).
    #[inline(always)]
    fn lane_query(&self, p: &Packet) -> LaneQuery {
        let tan = self.tan;
        let [z_min, z_max] = self.z_range_um();
        let (z_lo, z_hi) = (z_min - self.pad, z_max + self.pad);
        let none = [0; LANES];
        // Face-plane rates e (dG/dt), their inverses, and where the ray meets the ground.
        let sx = lanes(|l| tan * p.dx[l]);
        let sy = lanes(|l| tan * p.dy[l]);
        let e: [F; 4] = [
            lanes(|l| p.dz[l] + sx[l]),
            lanes(|l| p.dz[l] - sx[l]),
            lanes(|l| p.dz[l] + sy[l]),
            lanes(|l| p.dz[l] - sy[l]),
        ];
        let ie: [F; 4] = std::array::from_fn(|f| lanes(|l| 1.0 / e[f][l]));
        let iz = lanes(|l| 1.0 / p.dz[l]);
        let rg = lanes(|l| -p.oz[l] * iz[l]);
        let entering: [M; 4] = std::array::from_fn(|f| mask(|l| e[f][l] < 0.0));
        let rates: [F; 4] = std::array::from_fn(|f| lanes(|l| e[f][l].abs()));
        // The face each ray left (pinned at t = 0 in its pyramid's cone, not counted as
        // entered); none for the ground or no facet.
        let left = face_masks(&p.skip);
        let mut valid = mask(|l| p.dz[l] != 0.0);
        for ef in &e {
            valid = and(valid, mask(|l| ef[l] != 0.0));
        }
        let in_slab = and(mask(|l| z_lo <= p.oz[l]), mask(|l| p.oz[l] <= z_hi));
        let mut into = none;
        for f in 0..4 {
            into = or(into, and(left[f], entering[f]));
        }
        // (facets are 0–3, the ground 4, or NO_FACET)
        let on_face = mask(|l| p.skip[l] < f64::from(FLAT_FACET));
        let down = mask(|l| p.dz[l] < 0.0);
        let (east, north) = (mask(|l| p.dx[l] > 0.0), mask(|l| p.dy[l] > 0.0));
        LaneQuery {
            ie,
            rg,
            entering,
            rates,
            left,
            valid,
            in_slab,
            into,
            down,
            rising: and_not(and(and(valid, in_slab), on_face), into),
            t_top: pick(
                down,
                [f64::INFINITY; LANES],
                lanes(|l| (z_hi - p.oz[l]) * iz[l]),
            ),
            z_hi,
            east,
            north,
            west: mask(|l| p.dx[l] < 0.0),
            south: mask(|l| p.dy[l] < 0.0),
            step_x: pick(east, [1.0; LANES], [-1.0; LANES]),
            step_y: pick(north, [1.0; LANES], [-1.0; LANES]),
        }
    }

    /// [`Self::roots_lanes`] with the faces in `pin` (the facet each ray left, in its own
    /// pyramid) pinned at t = 0.
    #[inline(always)]
    fn pinned_roots(&self, p: &Packet, q: &LaneQuery, cx: &F, cy: &F, pin: &[M; 4]) -> [F; 4] {
        let mut r = self.roots_lanes(p, &q.ie, cx, cy);
        for f in 0..4 {
            r[f] = pick(pin[f], [0.0; LANES], r[f]);
        }
        r
    }

    /// One step of the cell walk of `off_touching` for the `walking` lanes, from lattice
    /// cell (`i`, `j`) (indices as f64): lanes that rise out of the slab before the cell's
    /// edge join `leaves`; lanes that meet the edge at a corner or low (a valley) drop out,
    /// undecided; the rest step into the next cell. Returns those and the ray parameter at
    /// the edge.
    #[inline(always)]
    fn walk_step(
        &self,
        p: &Packet,
        q: &LaneQuery,
        walking: M,
        i: &mut F,
        j: &mut F,
        leaves: &mut M,
    ) -> (M, F) {
        let m = self.margin;
        let tx = to_edge_lanes(i, &p.ox, &p.dx, q.east, q.west, self.period);
        let ty = to_edge_lanes(j, &p.oy, &p.dy, q.north, q.south, self.period);
        let edge = lanes(|l| lesser(tx[l], ty[l]));
        let out_top = and(walking, mask(|l| q.t_top[l] < edge[l] - m)); // out of the slab first
        *leaves = or(*leaves, out_top);
        // At a corner, or low at the edge (a valley): undecided.
        let clear_edge = and(
            and(mask(|l| edge[l] > m), mask(|l| (tx[l] - ty[l]).abs() > m)),
            mask(|l| p.oz[l] + p.dz[l] * edge[l] > m),
        );
        let on = and(and_not(walking, out_top), clear_edge);
        let across_x = mask(|l| tx[l] < ty[l]);
        *i = pick(and(on, across_x), lanes(|l| i[l] + q.step_x[l]), *i);
        *j = pick(and_not(on, across_x), lanes(|l| j[l] + q.step_y[l]), *j);
        (on, edge)
    }

    /// Face-plane roots (as [`ConeRay::roots`]) of the pyramids whose cells start at
    /// (`cx`, `cy`) (multiples of the period), lane by lane.
    #[inline(always)]
    fn roots_lanes(&self, p: &Packet, ie: &[F; 4], cx: &F, cy: &F) -> [F; 4] {
        let (tan, c, h) = (self.tan, self.centre, self.height);
        let u = lanes(|l| tan * ((p.ox[l] - cx[l]) - c));
        let v = lanes(|l| tan * ((p.oy[l] - cy[l]) - c));
        let q = lanes(|l| p.oz[l] - h);
        let g = [
            lanes(|l| q[l] + u[l]),
            lanes(|l| q[l] - u[l]),
            lanes(|l| q[l] + v[l]),
            lanes(|l| q[l] - v[l]),
        ];
        std::array::from_fn(|f| lanes(|l| -g[f][l] * ie[f][l]))
    }
}

/// Ray parameter at which each ray reaches the far wall of lattice cell `c` (cell index as
/// f64) along one axis (origin `x`, direction `dx`, `pos`/`neg` the sign of `dx`); ∞ along
/// a wall. (`off_touching`'s `to_edge` over the lanes.)
#[inline(always)]
fn to_edge_lanes(c: &F, x: &F, dx: &F, pos: M, neg: M, period: f64) -> F {
    let wall = pick(pos, lanes(|l| c[l] + 1.0), *c);
    let t = lanes(|l| (wall[l] * period - x[l]) / dx[l]);
    pick(or(pos, neg), t, [f64::INFINITY; LANES])
}

/// Which lanes have facet 0, 1, 2, 3 (facet indices as f64).
#[inline(always)]
fn face_masks(face: &F) -> [M; 4] {
    std::array::from_fn(|f| mask(|l| face[l] == f as f64))
}

/// The first part of a packet query ([`RegularPyramids::lane_query`]), lane by lane: the
/// inverse face-plane rates, where each ray meets the ground, which faces it goes below and
/// the rates' magnitudes; the facet it left; which rays have a valid query, start inside
/// the slab, go into the pyramid of the facet they left (case B), go down; the rays off a
/// face of a touching pyramid outward (case C, `rising`); when each ray rises out of the
/// slab, the slab's top; the signs of the directions and the cell steps along them.
struct LaneQuery {
    ie: [F; 4],
    rg: F,
    entering: [M; 4],
    rates: [F; 4],
    left: [M; 4],
    valid: M,
    in_slab: M,
    into: M,
    down: M,
    rising: M,
    t_top: F,
    z_hi: f64,
    east: M,
    north: M,
    west: M,
    south: M,
    step_x: F,
    step_y: F,
}

impl LaneQuery {
    /// The rays as the cone helpers see them.
    #[inline(always)]
    fn ray(&self, m: f64) -> LaneRay<'_> {
        LaneRay {
            entering: &self.entering,
            rates: &self.rates,
            rg: &self.rg,
            m,
        }
    }

    /// Case B on `cone` (the home pyramid's, the facet left pinned): the rays into it
    /// clearly inside the other face planes and clear of the ground, and those of them that
    /// pass below the ground before any face plane (out of the slab for good).
    #[inline(always)]
    fn inside(&self, cone: &LaneCone, m: f64) -> (M, M) {
        let (rg, down) = (&self.rg, self.down);
        let inside = and(
            and(and(self.valid, self.in_slab), self.into),
            and(mask(|l| -m > cone.s[l]), mask(|l| cone.end[l] > m)),
        );
        let ground_clear = or(
            and(down, mask(|l| rg[l] > m)),
            and_not(mask(|l| -m > rg[l]), down),
        );
        let b_on = and(inside, ground_clear);
        let sinks = and(and(b_on, down), mask(|l| cone.end[l] > rg[l] + m));
        (b_on, sinks)
    }
}

/// The rays of a packet as [`ConeRay`] sees one: which faces they
/// go below, the rates' magnitudes, where they meet the ground, and the margin.
struct LaneRay<'a> {
    entering: &'a [M; 4],
    rates: &'a [F; 4],
    rg: &'a F,
    m: f64,
}

/// A cone's span along each ray (as [`ConeRay::cone`]): latest entering root `s` on face
/// `ts` and earliest exiting root `end` on face `te` (faces as f64, 4 for none), with the
/// |rates| `rs`, `re` of those faces (∞ for none).
struct LaneCone {
    s: F,
    ts: F,
    rs: F,
    end: F,
    te: F,
    re: F,
}

impl LaneRay<'_> {
    /// [`ConeRay::cone`] lane by lane, the faces in `skip` not counted as entered.
    #[inline(always)]
    fn cone(&self, r: &[F; 4], skip: &[M; 4]) -> LaneCone {
        let mut c = LaneCone {
            s: [f64::NEG_INFINITY; LANES],
            ts: [4.0; LANES],
            rs: [f64::INFINITY; LANES],
            end: [f64::INFINITY; LANES],
            te: [4.0; LANES],
            re: [f64::INFINITY; LANES],
        };
        for f in 0..4 {
            let ff = [f as f64; LANES];
            let later = and_not(and(self.entering[f], mask(|l| r[f][l] > c.s[l])), skip[f]);
            let earlier = and_not(mask(|l| r[f][l] < c.end[l]), self.entering[f]);
            c.s = pick(later, r[f], c.s);
            c.ts = pick(later, ff, c.ts);
            c.rs = pick(later, self.rates[f], c.rs);
            c.end = pick(earlier, r[f], c.end);
            c.te = pick(earlier, ff, c.te);
            c.re = pick(earlier, self.rates[f], c.re);
        }
        c
    }

    /// [`ConeRay::clear`] lane by lane: `t` (on face `tag`) clear of every other face
    /// plane's root and of the ground's.
    #[inline(always)]
    fn clear(&self, r: &[F; 4], t: &F, tag: &F) -> M {
        let m = self.m;
        let mut ok = mask(|l| (self.rg[l] - t[l]).abs() > m);
        for (f, rf) in r.iter().enumerate() {
            let apart = mask(|l| (rf[l] - t[l]).abs() > m);
            ok = and(ok, or(apart, mask(|l| tag[l] == f as f64)));
        }
        ok
    }

    /// [`ConeRay::entry`] lane by lane: the ray enters `cone` (roots `r`) clearly after
    /// `from`, stays inside deeper than the margin, above the ground.
    #[inline(always)]
    fn entry(&self, p: &Packet, r: &[F; 4], cone: &LaneCone, from: &F) -> M {
        let m = self.m;
        let c = cone;
        let deep = mask(|l| lesser(c.rs[l], c.re[l]) * (c.end[l] - c.s[l]) > m);
        let above = mask(|l| p.oz[l] + p.dz[l] * c.s[l] > m);
        let after = mask(|l| c.s[l] > from[l] + m);
        and(and(deep, above), and(after, self.clear(r, &c.s, &c.ts)))
    }
}

/// A span [s, e) of the ray parameter with the planes bounding it (the fast path's light
/// counterpart of [`Span`]; empty when s ≥ e).
#[derive(Clone, Copy, Debug)]
struct Lean {
    s: f64,
    e: f64,
    ts: u32,
    te: u32,
}

impl Lean {
    const EMPTY: Lean = Lean::new(f64::INFINITY, f64::NEG_INFINITY, u32::MAX, u32::MAX);

    #[inline(always)]
    const fn new(s: f64, e: f64, ts: u32, te: u32) -> Lean {
        Lean { s, e, ts, te }
    }

    #[inline(always)]
    fn is_empty(&self) -> bool {
        self.s >= self.e
    }
}

/// One query of [`RegularPyramids::convex_crossing`]: the ray, its face-plane rates e_k
/// (dG/dt of the four faces' gaps G = c + e·t, negative going below the plane) and their
/// inverses, where it meets the ground plane, and the margin.
struct ConeRay {
    o: Vec3,
    d: Vec3,
    e: [f64; 4],
    ie: [f64; 4],
    rg: f64,
    m: f64,
}

impl ConeRay {
    /// |dG/dt| of face `k` (∞ for no face).
    #[inline(always)]
    fn rate(&self, k: u32) -> f64 {
        if k < 4 {
            self.e[k as usize].abs()
        } else {
            f64::INFINITY
        }
    }

    /// Roots of the face planes of the pyramid in lattice cell (i, j).
    #[inline(always)]
    fn roots(&self, tex: &RegularPyramids, i: i64, j: i64) -> [f64; 4] {
        let (o, ie) = (self.o, &self.ie);
        let u = tex.tan * ((o.x - i as f64 * tex.period) - tex.centre);
        let v = tex.tan * ((o.y - j as f64 * tex.period) - tex.centre);
        let q = o.z - tex.height;
        [
            -(q + u) * ie[0],
            -(q - u) * ie[1],
            -(q + v) * ie[2],
            -(q - v) * ie[3],
        ]
    }

    /// The cone's span (s, end) along the ray and the faces bounding it (u32::MAX: none).
    #[inline(always)]
    fn cone(&self, r: &[f64; 4]) -> (f64, u32, f64, u32) {
        let (mut s, mut ts, mut end, mut te) =
            (f64::NEG_INFINITY, u32::MAX, f64::INFINITY, u32::MAX);
        for (k, &rk) in r.iter().enumerate() {
            if self.e[k] < 0.0 {
                if rk > s {
                    (s, ts) = (rk, k as u32);
                }
            } else if rk < end {
                (end, te) = (rk, k as u32);
            }
        }
        (s, ts, end, te)
    }

    /// `t` is clear of every other face plane's root and of the ground's.
    #[inline(always)]
    fn clear(&self, r: &[f64; 4], t: f64, tag: u32) -> bool {
        let m = self.m;
        // (Without short-circuits: a few compares beat the branches.)
        let mut ok = (self.rg - t).abs() > m;
        for (k, rk) in r.iter().enumerate() {
            ok &= k as u32 == tag || (rk - t).abs() > m;
        }
        ok
    }

    /// A ray outside the cone at `from` enters it at `s` (face `ts`) and stays inside for
    /// a depth over the margin, above the ground: the crossing.
    #[inline(always)]
    fn entry(&self, r: &[f64; 4], from: f64) -> Option<(f64, u32)> {
        let m = self.m;
        let (s, ts, end, te) = self.cone(r);
        let deep = lesser(self.rate(ts), self.rate(te)) * (end - s) > m;
        let above_ground = self.o.z + self.d.z * s > m;
        (s > from + m && deep && above_ground && self.clear(r, s, ts)).then_some((s, ts))
    }
}

/// a > b, false if either is NaN: the convex shortcut declines on anything not clearly so.
#[inline(always)]
fn exceeds(a: f64, b: f64) -> bool {
    a > b
}

/// |dG/dt| of plane `tag` (∞ for an unbounded end).
#[inline(always)]
fn rate(e: &[f64; 5], tag: u32) -> f64 {
    e.get(tag as usize).map_or(f64::INFINITY, |v| v.abs())
}

/// Fast path, ray above the surface at `t0`: `Some(Some((t, plane)))` where it enters the
/// union of `spans` in [t0, t1] and goes deeper than `m`, `Some(None)` no entry in the cell,
/// `None` undecided (something within `m` of deciding differently).
#[inline(always)]
fn lean_entry(
    spans: &[Lean; 2],
    t0: f64,
    t1: f64,
    m: f64,
    e: &[f64; 5],
    pinned: u32,
) -> Option<Option<(f64, u32)>> {
    let mut best: Option<&Lean> = None;
    for sp in spans {
        // A span that ended before t0 — at t0 itself only if through the plane just left.
        if sp.is_empty() || sp.e < t0 - m || (sp.e <= t0 && sp.te == pinned) {
            continue;
        }
        if sp.s <= t0 + m || sp.e - sp.s <= m {
            return None; // inside (or nearly) at the cell's entry, or a sliver
        }
        if best.is_none_or(|b| sp.s < b.s) {
            best = Some(sp);
        }
    }
    let Some(b) = best else { return Some(None) };
    if b.s > t1 + m {
        return Some(None);
    }
    if b.s >= t1 - m {
        return None;
    }
    let depth = lesser(rate(e, b.ts), rate(e, b.te)) * (lesser(b.e, t1) - b.s);
    (depth > m).then_some(Some((b.s, b.ts)))
}

/// Fast path, ray below the surface at `t0`: where it leaves the union of `spans` (as
/// [`lean_entry`]).
#[inline(always)]
fn lean_exit(
    spans: &[Lean; 2],
    t0: f64,
    t1: f64,
    m: f64,
    e: &[f64; 5],
    pinned: u32,
) -> Option<Option<(f64, u32)>> {
    let mut exit: Option<(f64, u32)> = None;
    for sp in spans {
        if sp.is_empty() {
            continue;
        }
        // Entered at t0 itself only through the plane just left.
        let from_pinned = sp.ts == pinned && sp.s <= t0;
        let near = |v: f64| (v - t0).abs() <= m;
        if (near(sp.s) && !from_pinned) || near(sp.e) {
            return None;
        }
        if (sp.s < t0 || from_pinned) && t0 < sp.e && exit.is_none_or(|(x, _)| sp.e > x) {
            exit = Some((sp.e, sp.te));
        }
    }
    let (mut x, mut tag) = exit?;
    // A span overlapping the one left extends the stay below.
    for sp in spans {
        if sp.is_empty() || sp.e <= x {
            continue;
        }
        if (sp.s - x).abs() <= m || (sp.e - x).abs() <= m {
            return None;
        }
        if sp.s < x {
            (x, tag) = (sp.e, sp.te);
        }
    }
    if x > t1 + m {
        return Some(None);
    }
    if x >= t1 - m {
        return None;
    }
    let mut back = (t1, f64::INFINITY);
    for sp in spans {
        if !sp.is_empty() && sp.s > x && sp.s < back.0 {
            back = (sp.s, rate(e, sp.ts));
        }
    }
    let depth = lesser(rate(e, tag), back.1) * (back.0 - x);
    (depth > m).then_some(Some((x, tag)))
}

impl Texture for RegularPyramids {
    fn period_um(&self) -> [f64; 2] {
        [self.period; 2]
    }

    fn lattice_um(&self) -> [[f64; 2]; 2] {
        let p = self.period;
        [
            [p * self.cos_r, p * self.sin_r],
            [-p * self.sin_r, p * self.cos_r],
        ]
    }

    fn z_range_um(&self) -> [f64; 2] {
        if self.spec.inverted {
            [-self.height, 0.0]
        } else {
            [0.0, self.height]
        }
    }

    /// From the hit point itself when the cone shortcut decides (it pins the facet left at
    /// t = 0); otherwise as the default, from the offset origin.
    fn intersect_after(&self, from: &Hit, dir: Vec3) -> Option<Hit> {
        let (o, d) = (self.to_lattice(from.point), self.to_lattice(dir));
        let [z_min, z_max] = self.z_range_um();
        let (z_lo, z_hi) = (z_min - self.pad, z_max + self.pad);
        let skip = Some(from.facet.0).filter(|&k| k <= FLAT_FACET);
        if let Some(decided) = self.convex_crossing(o, d, skip, z_lo, z_hi) {
            return decided.map(|(t, i, j, facet)| self.fast_hit_at(o, d, t, i, j, facet));
        }
        let origin = offset_origin(from.point, from.p_err, from.normal, dir);
        self.intersect(origin, dir, Some(from.facet))
    }

    fn intersect(&self, origin: Vec3, dir: Vec3, skip: Option<FacetId>) -> Option<Hit> {
        let o = self.to_lattice(origin);
        let d = self.to_lattice(dir);
        let [z_min, z_max] = self.z_range_um();
        let (z_lo, z_hi) = (z_min - self.pad, z_max + self.pad);
        let skip = skip.map(|f| f.0).filter(|&k| k <= FLAT_FACET);
        // (The queries it answers all meet the slab.)
        if let Some(decided) = self.convex_crossing(o, d, skip, z_lo, z_hi) {
            return decided.map(|(t, i, j, facet)| self.fast_hit_at(o, d, t, i, j, facet));
        }
        let (t_start, t_end) = slab_interval(o.z, d.z, z_lo, z_hi)?;
        match self.fast_crossing(o, d, skip, t_start, t_end, z_lo, z_hi) {
            Some(Some((t, i, j, facet))) => Some(self.fast_hit_at(o, d, t, i, j, facet)),
            Some(None) => None,
            None => self.robust_crossing(o, d, skip, t_start, t_end, z_lo, z_hi),
        }
    }

    fn facet_tilts_deg(&self) -> Vec<f64> {
        let mut t = vec![self.spec.base_angle_deg];
        if self.spec.period_um > self.spec.base_um {
            t.push(0.0);
        }
        t
    }

    fn symmetry(&self) -> Symmetry {
        // C4v mirror lines of the lattice map onto the axes when the rotation is a multiple
        // of 45°.
        if (self.spec.rotation_deg / 45.0).fract() == 0.0 {
            Symmetry::Square
        } else {
            Symmetry::None
        }
    }

    fn describe(&self) -> String {
        let s = &self.spec;
        format!(
            "regular {} pyramids: base {} µm, facet angle {:.4}°, {} {:.4} µm, period {} µm, \
             rotation {}°",
            if s.inverted { "inverted" } else { "upright" },
            s.base_um,
            s.base_angle_deg,
            if s.inverted { "depth" } else { "height" },
            self.height,
            s.period_um,
            s.rotation_deg
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geometry::robust::offset_origin;

    #[test]
    fn vertical_rays_land_on_the_height_function() {
        for inverted in [false, true] {
            let spec = RegularPyramidsSpec {
                inverted,
                period_um: 12.0,
                ..RegularPyramidsSpec::upright(10.0)
            };
            let tex = RegularPyramids::new(spec).unwrap();
            for k in 0..400 {
                let (x, y) = (
                    (k as f64 * 0.6180339) % 1.0 * 12.0,
                    (k as f64 * 0.7548776) % 1.0 * 12.0,
                );
                let h = tex
                    .intersect(Vec3::new(x, y, 20.0), Vec3::NEG_Z, None)
                    .unwrap();
                assert!(
                    (h.point.z - tex.height_at(x, y)).abs() < 1e-12,
                    "inverted {inverted} at ({x}, {y})"
                );
                let b = tex
                    .intersect(Vec3::new(x, y, -20.0), Vec3::Z, None)
                    .unwrap();
                assert!((b.point.z - h.point.z).abs() < 1e-12);
            }
        }
    }

    #[test]
    fn lane_normals_and_planes_are_the_facets() {
        // lattice_normal_lanes and face_plane_lanes choose by the symmetry of the faces:
        // every facet's lane normal and plane must be its own, bit for bit.
        for spec in [
            RegularPyramidsSpec::upright(5.0),
            RegularPyramidsSpec {
                base_angle_deg: 40.0,
                period_um: 4.0,
                rotation_deg: 30.0,
                ..RegularPyramidsSpec::upright(3.0)
            },
            RegularPyramidsSpec {
                base_angle_deg: 71.3,
                ..RegularPyramidsSpec::inverted(2.0, 2.5)
            },
        ] {
            let tex = RegularPyramids::new(spec).unwrap();
            // Every facet in every lane, mixed.
            for f in 0..=FLAT_FACET {
                let faces: [u32; LANES] = std::array::from_fn(|l| (f + l as u32) % 5);
                let n = tex.lattice_normal_lanes(&faces.map(f64::from));
                for (l, &face) in faces.iter().enumerate() {
                    let got = [n[0][l], n[1][l], n[2][l]].map(f64::to_bits);
                    let want = tex.lattice_normal(face).to_array().map(f64::to_bits);
                    assert_eq!(got, want, "{spec:?} {face}");
                }
                let faces: [u32; LANES] = std::array::from_fn(|l| (f + l as u32) % 4);
                let [a, b, w] = tex.face_plane_lanes(&face_masks(&faces.map(f64::from)));
                for (l, &face) in faces.iter().enumerate() {
                    let plane = &tex.planes[face as usize];
                    let want = [plane.a, plane.b, plane.w].map(f64::to_bits);
                    assert_eq!(
                        [a[l], b[l], w[l]].map(f64::to_bits),
                        want,
                        "{spec:?} {face}"
                    );
                }
            }
        }
    }

    #[test]
    fn vertical_packets_land_where_the_surface_is() {
        // vertical_packet must give Self::surface's facet and height at every start point
        // (bit for bit: the same planes in the same order), ridges, valleys and the cell's
        // edges included, cross_packet's crossing wherever the cone decides, and nothing
        // unless every lane is a vertical ray from above onto touching upright pyramids.
        use crate::sampling::Stream;
        for spec in [
            RegularPyramidsSpec::upright(5.0),
            RegularPyramidsSpec {
                base_angle_deg: 40.0,
                ..RegularPyramidsSpec::upright(3.0)
            },
        ] {
            let tex = RegularPyramids::new(spec).unwrap();
            let (p, c) = (tex.period, tex.centre);
            let top = tex.z_range_um()[1] + 0.1;
            let mut rng = Stream::new(5, 1, 0);
            let mut decided = 0;
            for k in 0..20_000 {
                let mut packet = Packet::default();
                for l in 0..LANES {
                    let (u, v) = (rng.uniform() * p, rng.uniform() * p);
                    // every fourth lane on a ridge, a valley, the edge or the apex
                    let (x, y) = match (k + l) % 16 {
                        0 => (u, u),
                        1 => (u, p - u),
                        2 => (0.0, v),
                        3 => (u, tex.period_below),
                        4 => (c, c),
                        _ => (u, v),
                    };
                    packet.set(l, Vec3::new(x, y, top), Vec3::NEG_Z, NO_FACET);
                }
                assert!(tex.all_vertical(&packet));
                let got = tex.vertical_packet(&packet);
                let cone = tex.cross_packet(&packet);
                for l in 0..LANES {
                    let (z, face) = tex.surface(packet.ox[l], packet.oy[l]);
                    assert!(got.crosses[l] != 0 && got.leaves[l] == 0);
                    assert_eq!(got.face[l], face as f64);
                    assert_eq!(
                        (got.x[l], got.y[l], got.z[l].to_bits()),
                        (packet.ox[l], packet.oy[l], z.to_bits())
                    );
                    if cone.crosses[l] != 0 {
                        decided += 1;
                        assert_eq!(
                            (cone.face[l], cone.x[l], cone.y[l], cone.z[l].to_bits()),
                            (got.face[l], got.x[l], got.y[l], got.z[l].to_bits())
                        );
                    }
                }
                // One lane not vertical, not fresh or not above the slab: no shortcut.
                let l = k % LANES;
                let mut other = packet;
                match k % 3 {
                    0 => other.dx[l] = 1e-9,
                    1 => other.skip[l] = 0.0,
                    _ => other.oz[l] = 0.5 * top,
                }
                assert!(!tex.all_vertical(&other));
            }
            assert!(decided > 50_000, "{decided}");
            let gapped = RegularPyramids::new(RegularPyramidsSpec {
                period_um: 7.0,
                ..spec
            })
            .unwrap();
            let mut packet = Packet::default();
            for l in 0..LANES {
                packet.set(l, Vec3::new(1.0, 2.0, top), Vec3::NEG_Z, NO_FACET);
            }
            assert!(!gapped.all_vertical(&packet));
        }
    }

    /// The fast path must give the robust walk's crossing wherever it decides, and decide
    /// almost everywhere: rays from above and below at random angles, and rays leaving each
    /// hit by reflection and refraction-like turns, on upright, inverted, gapped and rotated
    /// lattices.
    #[test]
    fn packet_crossings_equal_the_cone_shortcut_lane_by_lane() {
        // cross_packet is convex_crossing rewritten over lanes: every lane must give the
        // same verdict, facet and (bit for bit) crossing point, for launches, rays into a
        // pyramid and rays off a face, on touching and gapped pyramids. leaves_packet must
        // flag only rays that the robust walk sends out of the slab, and most of those that
        // cross_packet sends out off a facet.
        use crate::sampling::Stream;
        let specs = [
            RegularPyramidsSpec::upright(5.0),
            RegularPyramidsSpec {
                period_um: 7.0,
                ..RegularPyramidsSpec::upright(5.0)
            },
            RegularPyramidsSpec {
                base_angle_deg: 40.0,
                ..RegularPyramidsSpec::upright(3.0)
            },
        ];
        for (n, spec) in specs.into_iter().enumerate() {
            let tex = RegularPyramids::new(spec).unwrap();
            let [z_min, z_max] = tex.z_range_um();
            let (z_lo, z_hi) = (z_min - tex.pad, z_max + tex.pad);
            let p = tex.period;
            let mut rng = Stream::new(21, n as u64, 0);
            // Queries (origin in the unit cell, direction, facet left) along random paths.
            let mut queries: Vec<(Vec3, Vec3, Option<u32>)> = Vec::new();
            while queries.len() < 40_000 {
                let mut dir = rng.cosine_hemisphere();
                dir.z = -dir.z;
                if rng.uniform() < 0.25 {
                    dir = Vec3::NEG_Z;
                }
                let mut o = Vec3::new(rng.uniform() * p, rng.uniform() * p, z_max + 0.1);
                let mut skip = None;
                for _ in 0..6 {
                    queries.push((o, dir, skip));
                    let Some(Some((t, i, j, k))) = tex.convex_crossing(o, dir, skip, z_lo, z_hi)
                    else {
                        break;
                    };
                    let hit = tex.fast_hit_at(o, dir, t, i, j, k);
                    let nrm = tex.planes[k as usize].normal();
                    let k_dot_n = dir.dot(nrm);
                    let turn = rng.uniform();
                    let (cos_i, eta) =
                        (k_dot_n.abs(), if k_dot_n < 0.0 { 1.0 / 3.94 } else { 3.94 });
                    let sin2_t = eta * eta * (1.0 - cos_i * cos_i);
                    dir = if turn < 0.5 || sin2_t >= 1.0 {
                        dir - 2.0 * k_dot_n * nrm
                    } else {
                        let facing = if k_dot_n < 0.0 { nrm } else { -nrm };
                        (eta * dir + (eta * cos_i - (1.0 - sin2_t).sqrt()) * facing).normalize()
                    };
                    o = hit.point;
                    skip = Some(k);
                }
            }
            let mut kinds = [0usize; 3];
            let (mut early, mut off_facet, mut sloped) = (0usize, 0usize, 0usize);
            for batch in queries.chunks_exact(LANES) {
                let mut packet = Packet::default();
                for (l, (o, d, skip)) in batch.iter().enumerate() {
                    packet.set(l, *o, *d, skip.unwrap_or(NO_FACET));
                }
                let got = tex.cross_packet(&packet);
                let soon = tex.leaves_packet(&packet);
                for (l, &(o, d, skip)) in batch.iter().enumerate() {
                    let (crosses, leaves) = (got.crosses[l] != 0, got.leaves[l] != 0);
                    if soon[l] != 0 {
                        let robust = match skip {
                            Some(k) => tex.intersect_after(&tex.cell_hit(o.x, o.y, k), d),
                            None => tex.intersect(o, d, None),
                        };
                        assert!(robust.is_none(), "spec {n}: {o:?} {d:?} {skip:?}");
                        early += 1;
                        sloped += usize::from(!leaves);
                    }
                    off_facet += usize::from(leaves && skip.is_some());
                    match tex.convex_crossing(o, d, skip, z_lo, z_hi) {
                        None => {
                            assert!(!crosses && !leaves, "spec {n}: {o:?} {d:?} {skip:?}");
                            kinds[2] += 1;
                        }
                        Some(None) => {
                            assert!(leaves && !crosses, "spec {n}: {o:?} {d:?} {skip:?}");
                            kinds[1] += 1;
                        }
                        Some(Some((t, i, j, k))) => {
                            assert!(crosses && !leaves, "spec {n}: {o:?} {d:?} {skip:?}");
                            let hit = tex.fast_hit_at(o, d, t, i, j, k);
                            assert_eq!(got.face[l], f64::from(k), "spec {n}");
                            assert_eq!([got.x[l], got.y[l], got.z[l]], hit.point.to_array());
                            kinds[0] += 1;
                        }
                    }
                }
            }
            eprintln!(
                "spec {n}: crosses, leaves, undecided = {kinds:?}; \
                 {early} of {off_facet} leaving off a facet flagged early \
                 ({sloped} by the slope bound alone)"
            );
            assert!(kinds[0] > 10_000 && kinds[1] > 1_000, "spec {n}: {kinds:?}");
            assert!(
                early - sloped <= off_facet && early * 5 > off_facet * 4,
                "spec {n}: {early} of {off_facet}"
            );
        }
    }

    #[test]
    fn fast_path_agrees_with_the_robust_walk() {
        use crate::sampling::Stream;
        let specs = [
            RegularPyramidsSpec::upright(5.0),
            RegularPyramidsSpec::inverted(8.0, 10.0),
            RegularPyramidsSpec {
                period_um: 7.0,
                rotation_deg: 30.0,
                ..RegularPyramidsSpec::upright(5.0)
            },
            RegularPyramidsSpec {
                base_angle_deg: 40.0,
                rotation_deg: 45.0,
                ..RegularPyramidsSpec::inverted(3.0, 3.0)
            },
        ];
        for (n, spec) in specs.into_iter().enumerate() {
            let tex = RegularPyramids::new(spec).unwrap();
            let mut rng = Stream::new(11, n as u64, 0);
            let [z_min, z_max] = tex.z_range_um();
            let (z_lo, z_hi) = (z_min - tex.pad, z_max + tex.pad);
            let (mut decided, mut total, mut convex) = (0usize, 0usize, 0usize);
            for _ in 0..20_000 {
                let from_above = rng.uniform() < 0.5;
                let mut dir = rng.cosine_hemisphere();
                let mut origin = Vec3::new(
                    rng.uniform() * 20.0,
                    rng.uniform() * 20.0,
                    if from_above { z_max + 0.1 } else { z_min - 0.1 },
                );
                if from_above {
                    dir.z = -dir.z;
                    // A quarter of them at normal incidence (axis-aligned turns follow).
                    if rng.uniform() < 0.25 {
                        dir = Vec3::NEG_Z;
                    }
                }
                let mut skip = None;
                // The hit the ray leaves, for the query from the hit point itself.
                let mut exact: Option<Vec3> = None;
                for _ in 0..6 {
                    let (o, d) = (tex.to_lattice(origin), tex.to_lattice(dir));
                    let Some((t_start, t_end)) = slab_interval(o.z, d.z, z_lo, z_hi) else {
                        break;
                    };
                    let sk = skip.map(|f: FacetId| f.0);
                    let robust = tex.robust_crossing(o, d, sk, t_start, t_end, z_lo, z_hi);
                    total += 1;
                    let from_point = exact.map_or(o, |p| tex.to_lattice(p));
                    for (start, count) in [(o, true), (from_point, false)] {
                        let Some(quick) = tex.convex_crossing(start, d, sk, z_lo, z_hi) else {
                            continue;
                        };
                        convex += usize::from(count);
                        let quick = quick.map(|(t, i, j, k)| tex.fast_hit_at(start, d, t, i, j, k));
                        match (quick, robust) {
                            (None, None) => {}
                            (Some(f), Some(r)) => {
                                assert_eq!(f.facet, r.facet, "spec {n}, convex");
                                let close = (f.t - r.t).abs() <= 1e-12 * (1.0 + r.t);
                                assert!(close, "spec {n}, convex");
                                assert!((f.point - r.point).length() < 1e-9, "spec {n}");
                            }
                            (f, r) => panic!("spec {n}: convex {f:?} vs robust {r:?}"),
                        }
                    }
                    if let Some(fast) = tex.fast_crossing(o, d, sk, t_start, t_end, z_lo, z_hi) {
                        decided += 1;
                        let fast = fast.map(|(t, i, j, k)| tex.fast_hit_at(o, d, t, i, j, k));
                        match (fast, robust) {
                            (None, None) => {}
                            (Some(f), Some(r)) => {
                                assert_eq!(f.facet, r.facet, "spec {n}");
                                assert!((f.t - r.t).abs() <= 1e-12 * (1.0 + r.t), "spec {n}");
                                assert!((f.point - r.point).length() < 1e-9, "spec {n}");
                            }
                            (f, r) => panic!("spec {n}: fast {f:?} vs robust {r:?}"),
                        }
                    }
                    let Some(h) = robust else { break };
                    // Leave by a mirror turn, a refraction (n = 3.94 below) or a random turn
                    // into the other side.
                    let k_dot_n = dir.dot(h.normal);
                    let turn = rng.uniform();
                    let (cos_i, eta) =
                        (k_dot_n.abs(), if k_dot_n < 0.0 { 1.0 / 3.94 } else { 3.94 });
                    let sin2_t = eta * eta * (1.0 - cos_i * cos_i);
                    let new_dir = if turn < 0.4 || (turn < 0.7 && sin2_t >= 1.0) {
                        dir - 2.0 * k_dot_n * h.normal
                    } else if turn < 0.7 {
                        let facing = if k_dot_n < 0.0 { h.normal } else { -h.normal };
                        (eta * dir + (eta * cos_i - (1.0 - sin2_t).sqrt()) * facing).normalize()
                    } else {
                        let mut l = rng.cosine_hemisphere();
                        if k_dot_n > 0.0 {
                            l.z = -l.z;
                        }
                        l
                    };
                    if new_dir.dot(h.normal).abs() < 1e-6 {
                        break;
                    }
                    origin = offset_origin(h.point, h.p_err, h.normal, new_dir);
                    exact = Some(h.point);
                    dir = new_dir;
                    skip = Some(h.facet);
                }
            }
            assert!(
                decided as f64 > 0.9999 * total as f64,
                "spec {n}: fast path decided only {decided} of {total}"
            );
            // The cone shortcut must carry a real share on upright pyramids (all three
            // query kinds on touching ones; rays from above and into the pyramid otherwise).
            if !spec.inverted {
                eprintln!("spec {n}: convex shortcut decided {convex} of {total}");
                let share = if tex.touching { 2 } else { 5 };
                assert!(
                    convex * share > total,
                    "spec {n}: convex decided {convex} of {total}"
                );
            }
        }
    }

    #[test]
    fn parameter_errors_name_the_key() {
        let e = RegularPyramids::new(RegularPyramidsSpec {
            period_um: 5.0,
            ..RegularPyramidsSpec::upright(10.0)
        })
        .unwrap_err()
        .to_string();
        assert!(e.contains("period_um") && e.contains("base_um"), "{e}");
        let e = RegularPyramids::new(RegularPyramidsSpec {
            base_angle_deg: 90.0,
            ..RegularPyramidsSpec::upright(10.0)
        })
        .unwrap_err()
        .to_string();
        assert!(e.contains("base_angle_deg"), "{e}");
    }
}
