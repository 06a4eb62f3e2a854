//! Random upright pyramids, as left by alkaline (KOH/NaOH) etching of (100) silicon: the
//! visible surface is the union of many square-based pyramids with random centres and sizes on
//! a periodic square tile.
//!
//! Geometry: pyramid i has centre cᵢ, height Hᵢ, facet angle αᵢ, half base aᵢ = Hᵢ/tan αᵢ,
//! sides along x and y (the ⟨110⟩ edges of {111}-faceted pyramids on (100) Si). The surface
//! is the height field z = max(0, maxᵢ (Hᵢ − tan αᵢ · ‖(x, y) − cᵢ‖∞)) over the tile
//! [0, L)², repeated with period L; the base plane z = 0 (uncovered patches) is where wafer
//! thickness is measured from.
//!
//! Generation (deterministic for a seed, via [`crate::sampling::Stream`] with key
//! [`GENERATION_KEY`]): draw N sizes (log-normal with given mean and relative spread, or
//! uniform in a range; of the height or of the base) and facet angles (Gaussian, truncated at
//! ±3σ and to [1°, 89°]); choose the tile side so that a Boolean model of N squares with the
//! drawn bases, centred uniformly at random, covers the requested fraction c on average:
//! L² = Σbᵢ² / ln(1/(1 − c)) (the vacancy of a Boolean model is exp(−ρ⟨b²⟩); D. Stoyan,
//! W. S. Kendall & J. Mecke, *Stochastic Geometry and its Applications*, 2nd ed., Wiley 1995,
//! §3.1); then draw the centres uniformly on the tile. The realised coverage is computed
//! exactly (area of the union of the bases) and reported by [`RandomPyramids::coverage`].
//!
//! Intersection: exact against each pyramid (four planes, never a tessellation), accelerated
//! by a uniform 2D grid over the tile. Each grid cell lists the periodic images of pyramids
//! whose base overlaps it, minus those that lie below the envelope everywhere in the cell,
//! sorted by their highest point in the cell. A 2D walk visits the cells along the ray; in a
//! cell the below-surface set along the ray is the union of the ground half-line and one
//! interval per listed pyramid (Cyrus–Beck clipping against its four planes), and the first
//! change of side is the crossing (see [`crate::geometry::crossing`]). This works from above
//! and from below. A lean fast path (`RandomPyramids::fast_crossing`) answers nearly every
//! query with the same numbers as that walk, at a fraction of its cost, and hands the rest
//! (origins on the surface without a facet to leave, shallow excursions, crossings at cell
//! walls) to it; a ray leaving a facet down into its pyramid that meets the base plane clearly
//! inside it is known to stay below the surface without a walk.
//!
//! Facet ids (valid in the tile frame): 0 the base plane; 1 + 4·k + f for face f (0: +x side,
//! 1: −x, 2: +y, 3: −y) of pyramid image k. Invariant: every image whose footprint meets the
//! tile is listed in each grid cell where it can be part of the surface.
//! Limits: the tile must be at least twice the largest base (raise `pyramid_count`).

use super::{
    MAX_CELLS_PER_QUERY, SI_111_ANGLE_DEG, Side, Symmetry, Texture, TextureError, cell_entry,
    clamp_into, facet_hit, side_at_origin, side_outside_slab, slab_interval, snapped_err,
};
use crate::geometry::crossing::{Entry, Gap, HeightPlane, Span, SquareFaces};
use crate::geometry::grid::GridWalk;
use crate::geometry::robust::offset_origin;
use crate::geometry::{FacetId, Hit, Vec3, floor_i64, gamma, greater, lesser};
use crate::sampling::Stream;
use crate::texture::pyramids::{check_angle, check_length};

/// Job key of the random stream that generates a tile ("rpyr" in ASCII).
pub const GENERATION_KEY: u64 = 0x7270_7972;

/// Id of the base plane.
pub const GROUND_FACET: u32 = 0;

/// Most pyramids one grid cell may list (the grid is refined until this holds).
const MAX_PER_CELL: usize = 24;

/// Grid cell side as a fraction of the mean base (a few pyramids per cell).
const CELL_PER_MEAN_BASE: f64 = 0.35;

/// Most spans (the base plane and pyramids) the fast path holds for one cell seen from below;
/// a cell with more goes to the robust walk.
const FAST_SPANS: usize = 8;

/// Margin of the fast path's geometric shortcuts relative to tile side + highest apex: a
/// shortcut is taken only if the ray is that much clear of deciding differently (rounding
/// errors are ~10⁻¹⁵ of it). Kept below `PAD_REL`, as in [`crate::texture::pyramids`].
const FAST_MARGIN_REL: f64 = 1e-10;

/// Relative padding of slabs and pruning bounds, relative to tile side + highest apex.
const PAD_REL: f64 = 1e-9;

/// Size distribution of the pyramids (of the height or of the base, see [`SizeOf`]).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum SizeDistribution {
    /// Log-normal with mean `mean_um` and relative standard deviation `spread_rel` (σ/mean).
    LogNormal { mean_um: f64, spread_rel: f64 },
    /// Uniform on [min_um, max_um].
    Uniform { min_um: f64, max_um: f64 },
}

/// Which pyramid dimension the size distribution describes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SizeOf {
    /// Apex height above the base plane.
    Height,
    /// Side of the square base.
    Base,
}

/// Parameters of a random pyramid tile (file keys in [`crate::texture::file`]).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RandomPyramidsSpec {
    /// Size distribution.
    pub size: SizeDistribution,
    /// Dimension the distribution describes.
    pub size_of: SizeOf,
    /// Mean facet angle from the base plane, degrees, in (0, 90).
    pub base_angle_deg: f64,
    /// Standard deviation of the facet angle, degrees (≥ 0; Gaussian truncated at ±3σ and to
    /// [1°, 89°]; one angle per pyramid, shared by its four faces).
    pub angle_spread_deg: f64,
    /// Number of pyramids generated on the tile (≥ 1; ~400 keeps the tile statistically rich).
    pub pyramid_count: usize,
    /// Target covered fraction of the base plane, in (0, 1) (sets the tile side).
    pub coverage_target: f64,
    /// Master seed of the generation.
    pub seed: u64,
}

impl RandomPyramidsSpec {
    /// Log-normal heights with {111} facets, 400 pyramids, 99 % target coverage.
    pub fn log_normal_height(mean_height_um: f64, spread_rel: f64, seed: u64) -> Self {
        RandomPyramidsSpec {
            size: SizeDistribution::LogNormal {
                mean_um: mean_height_um,
                spread_rel,
            },
            size_of: SizeOf::Height,
            base_angle_deg: SI_111_ANGLE_DEG,
            angle_spread_deg: 0.0,
            pyramid_count: 400,
            coverage_target: 0.99,
            seed,
        }
    }
}

/// One generated pyramid (tile frame).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Pyramid {
    /// Centre of the base, µm, in [0, L)².
    pub centre_um: [f64; 2],
    /// Apex height, µm.
    pub height_um: f64,
    /// Base side, µm.
    pub base_um: f64,
    /// Facet angle from the base plane, degrees.
    pub angle_deg: f64,
}

/// A periodic image of a pyramid that can be part of the surface.
#[derive(Clone, Copy, Debug)]
struct Image {
    planes: [HeightPlane; 4],
    /// Up normals of the four faces (see [`face_normals`]): looked up, not chosen by a
    /// branch on the face, which the processor could not predict.
    normals: [Vec3; 4],
    sin_a: f64,
    cos_a: f64,
    cx: f64,
    cy: f64,
    half: f64,
    height: f64,
    tan_a: f64,
}

impl Image {
    /// Height of the pyramid's cone at (x, y) and the face that gives it.
    #[inline(always)]
    fn cone_at(&self, x: f64, y: f64) -> (f64, u32) {
        let mut best = (f64::INFINITY, 0);
        for (k, p) in self.planes.iter().enumerate() {
            let z = p.z_at(x, y);
            if z < best.0 {
                best = (z, k as u32);
            }
        }
        best
    }

    /// Up normal of face `k` (0..4).
    #[inline(always)]
    fn normal(&self, k: u32) -> Vec3 {
        self.normals[k as usize]
    }

    /// Highest and lowest cone height over the rectangle [x0, x1] × [y0, y1].
    fn range_over(&self, x0: f64, x1: f64, y0: f64, y1: f64) -> (f64, f64) {
        let dist_x = (x0 - self.cx).max(self.cx - x1).max(0.0);
        let dist_y = (y0 - self.cy).max(self.cy - y1).max(0.0);
        let far_x = (x0 - self.cx).abs().max((x1 - self.cx).abs());
        let far_y = (y0 - self.cy).abs().max((y1 - self.cy).abs());
        (
            self.height - self.tan_a * dist_x.max(dist_y),
            self.height - self.tan_a * far_x.max(far_y),
        )
    }

    /// True when the point lies inside this pyramid's solid by at least `margin`.
    fn contains(&self, x: f64, y: f64, z: f64, margin: f64) -> bool {
        z >= -margin && z + margin <= self.cone_at(x, y).0
    }
}

/// Up normals of the faces 0 (+x side), 1 (−x), 2 (+y), 3 (−y) of a pyramid with facet
/// angle α, from sin α and cos α.
fn face_normals(s: f64, c: f64) -> [Vec3; 4] {
    [
        Vec3::new(s, 0.0, c),
        Vec3::new(-s, 0.0, c),
        Vec3::new(0.0, s, c),
        Vec3::new(0.0, -s, c),
    ]
}

/// One entry of a grid cell's list.
#[derive(Clone, Copy, Debug)]
struct Item {
    image: u32,
    /// Highest point of the image's cone over the cell, µm.
    top: f64,
    /// The image's centre, apex height and facet slope (copies, for the fast path).
    cx: f64,
    cy: f64,
    height: f64,
    tan_a: f64,
    /// Heights at the tile origin of its four face planes (`HeightPlane::w`).
    w: [f64; 4],
}

/// A grid cell's list of items, and bounds of the surface height over the cell from below and
/// above.
#[derive(Clone, Debug)]
struct CellList {
    items: Box<[Item]>,
    z: [f64; 2],
}

/// Random upright pyramids on a periodic tile (see the module doc).
#[derive(Clone, Debug)]
pub struct RandomPyramids {
    spec: RandomPyramidsSpec,
    tile: f64,
    pyramids: Vec<Pyramid>,
    images: Vec<Image>,
    grid_n: i64,
    cell: f64,
    /// Each cell's items and bounds of the surface height over it.
    cells: Vec<CellList>,
    z_max: f64,
    pad: f64,
    /// On-plane tolerance floor (see [`Gap::new`]), µm.
    tol: f64,
    /// Excursion depth tolerance (see [`super::cell_entry`]), µm.
    depth: f64,
    /// Largest coordinate below the tile side (hit points are clamped into [0, L)).
    tile_below: f64,
    /// Margin of the fast path's geometric shortcuts, µm (see [`FAST_MARGIN_REL`]).
    fast_margin: f64,
    /// Steepest facet slope (tan α).
    max_tan: f64,
    /// The facet slope tan α shared by all pyramids, if there is no angle spread.
    common_tan: Option<f64>,
    /// The face normals shared by all pyramids, if there is no angle spread.
    common_normals: Option<[Vec3; 4]>,
    coverage: f64,
}

/// A standard normal deviate from two uniforms (Box–Muller; G. E. P. Box & M. E. Muller,
/// Ann. Math. Stat. 29, 610 (1958)).
fn normal(s: &mut Stream) -> f64 {
    let u1 = 1.0 - s.uniform(); // (0, 1]
    let u2 = s.uniform();
    (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
}

/// Area of the union of axis-aligned rectangles [x0, x1] × [y0, y1] (coordinate sweep).
fn union_area(rects: &[[f64; 4]]) -> f64 {
    let mut xs: Vec<f64> = rects.iter().flat_map(|r| [r[0], r[1]]).collect();
    xs.sort_by(f64::total_cmp);
    xs.dedup();
    let mut area = 0.0;
    let mut ys: Vec<(f64, f64)> = Vec::new();
    for w in xs.windows(2) {
        let xm = 0.5 * (w[0] + w[1]);
        ys.clear();
        ys.extend(
            rects
                .iter()
                .filter(|r| r[0] <= xm && xm < r[1])
                .map(|r| (r[2], r[3])),
        );
        ys.sort_by(|a, b| a.0.total_cmp(&b.0));
        let (mut len, mut cur) = (0.0, f64::NEG_INFINITY);
        for &(y0, y1) in &ys {
            let lo = y0.max(cur);
            if y1 > lo {
                len += y1 - lo;
            }
            cur = cur.max(y1);
        }
        area += (w[1] - w[0]) * len;
    }
    area
}

impl RandomPyramids {
    /// Generates the tile; errors name the offending parameter and its valid range.
    pub fn new(spec: RandomPyramidsSpec) -> Result<Self, TextureError> {
        // Check the parameters.
        match spec.size {
            SizeDistribution::LogNormal {
                mean_um,
                spread_rel,
            } => {
                check_length("mean size", mean_um)?;
                if !(spread_rel.is_finite() && spread_rel >= 0.0) {
                    return Err(TextureError::parameter(
                        format!("relative size spread = {spread_rel} is invalid"),
                        "a relative standard deviation ≥ 0 (e.g. 0.3 for ±30 %)",
                        "set the spread to a number ≥ 0",
                    ));
                }
            }
            SizeDistribution::Uniform { min_um, max_um } => {
                check_length("minimum size", min_um)?;
                check_length("maximum size", max_um)?;
                if max_um < min_um {
                    return Err(TextureError::parameter(
                        format!("size range [{min_um}, {max_um}] µm is reversed"),
                        "minimum ≤ maximum",
                        "swap the two values",
                    ));
                }
            }
        }
        check_angle("base_angle_deg", spec.base_angle_deg)?;
        if !(spec.angle_spread_deg.is_finite() && spec.angle_spread_deg >= 0.0) {
            return Err(TextureError::parameter(
                format!("angle_spread_deg = {} is invalid", spec.angle_spread_deg),
                "a standard deviation ≥ 0 in degrees",
                "set angle_spread_deg to 0 (no spread) or a small positive number",
            ));
        }
        if spec.pyramid_count == 0 || spec.pyramid_count > 100_000 {
            return Err(TextureError::parameter(
                format!("pyramid_count = {} is out of range", spec.pyramid_count),
                "1 to 100000 pyramids per tile (a few hundred are enough for statistics)",
                "set pyramid_count to e.g. 400",
            ));
        }
        if !(spec.coverage_target > 0.0 && spec.coverage_target < 1.0) {
            return Err(TextureError::parameter(
                format!("coverage = {} is out of range", spec.coverage_target),
                "a target covered fraction strictly between 0 and 1 (e.g. 0.99)",
                "set coverage to e.g. 0.99",
            ));
        }

        // Draw sizes and angles.
        let mut s = Stream::new(spec.seed, GENERATION_KEY, 0);
        let alpha = spec.base_angle_deg;
        let sigma = spec.angle_spread_deg;
        let mut pyramids = Vec::with_capacity(spec.pyramid_count);
        for _ in 0..spec.pyramid_count {
            let angle_deg = if sigma > 0.0 {
                let mut a = alpha;
                for _ in 0..1000 {
                    let c = alpha + sigma * normal(&mut s);
                    if (c - alpha).abs() <= 3.0 * sigma && (1.0..=89.0).contains(&c) {
                        a = c;
                        break;
                    }
                }
                a
            } else {
                alpha
            };
            let size = match spec.size {
                SizeDistribution::LogNormal {
                    mean_um,
                    spread_rel,
                } => {
                    if spread_rel > 0.0 {
                        let var = (1.0 + spread_rel * spread_rel).ln();
                        let mu = mean_um.ln() - 0.5 * var;
                        (mu + var.sqrt() * normal(&mut s)).exp()
                    } else {
                        mean_um
                    }
                }
                SizeDistribution::Uniform { min_um, max_um } => {
                    min_um + (max_um - min_um) * s.uniform()
                }
            };
            let tan_a = angle_deg.to_radians().tan();
            let (height_um, base_um) = match spec.size_of {
                SizeOf::Height => (size, 2.0 * size / tan_a),
                SizeOf::Base => (0.5 * size * tan_a, size),
            };
            pyramids.push(Pyramid {
                centre_um: [0.0; 2],
                height_um,
                base_um,
                angle_deg,
            });
        }

        // Tile side from the target coverage of the Boolean model, then the centres.
        let sum_b2: f64 = pyramids.iter().map(|p| p.base_um * p.base_um).sum();
        let tile = (sum_b2 / (1.0 / (1.0 - spec.coverage_target)).ln()).sqrt();
        let max_base = pyramids.iter().map(|p| p.base_um).fold(0.0, f64::max);
        if max_base > 0.5 * tile {
            return Err(TextureError::parameter(
                format!(
                    "the largest pyramid base ({max_base:.3} µm) exceeds half the tile side \
                     ({tile:.3} µm)"
                ),
                "a tile at least twice the largest base, so the tile is statistically rich",
                "raise pyramid_count (or lower the size spread or the coverage target)",
            ));
        }
        for p in &mut pyramids {
            p.centre_um = [tile * s.uniform(), tile * s.uniform()];
        }

        let mut tex = RandomPyramids {
            spec,
            tile,
            pyramids,
            images: Vec::new(),
            grid_n: 1,
            cell: tile,
            cells: Vec::new(),
            z_max: 0.0,
            pad: 0.0,
            tol: 0.0,
            depth: 0.0,
            tile_below: tile.next_down(),
            fast_margin: 0.0,
            max_tan: 0.0,
            common_tan: None,
            common_normals: None,
            coverage: 0.0,
        };
        tex.build_images();
        tex.z_max = tex.images.iter().map(|im| im.height).fold(0.0, f64::max);
        tex.pad = PAD_REL * (tile + tex.z_max);
        tex.fast_margin = FAST_MARGIN_REL * (tile + tex.z_max);
        tex.max_tan = tex.images.iter().map(|im| im.tan_a).fold(0.0, f64::max);
        let first_tan = tex.images.first().map(|im| im.tan_a);
        tex.common_tan = first_tan.filter(|&t| tex.images.iter().all(|im| im.tan_a == t));
        let first_normals = tex.images.first().map(|im| im.normals);
        tex.common_normals = first_normals.filter(|&n| tex.images.iter().all(|im| im.normals == n));
        let scale = (1.0 + 3.0 * tex.max_tan) * tile + 2.0 * tex.z_max;
        tex.tol = super::on_plane_tol(scale);
        tex.depth = super::depth_tol(scale);
        let mean_base =
            tex.pyramids.iter().map(|p| p.base_um).sum::<f64>() / tex.pyramids.len() as f64;
        let mut n = ((tile / (CELL_PER_MEAN_BASE * mean_base)).ceil() as i64).max(1);
        while !tex.build_grid(n) {
            n = n * 3 / 2 + 1;
            if n > 4096 {
                return Err(TextureError::parameter(
                    "too many overlapping pyramids for the acceleration grid".to_string(),
                    "a moderate overlap (coverage target ≤ 0.999)",
                    "lower the coverage target",
                ));
            }
        }
        let rects: Vec<[f64; 4]> = tex
            .images
            .iter()
            .map(|im| {
                [
                    (im.cx - im.half).max(0.0),
                    (im.cx + im.half).min(tile),
                    (im.cy - im.half).max(0.0),
                    (im.cy + im.half).min(tile),
                ]
            })
            .filter(|r| r[1] > r[0] && r[3] > r[2])
            .collect();
        tex.coverage = union_area(&rects) / (tile * tile);
        Ok(tex)
    }

    /// Periodic images that meet the tile, without those buried inside another pyramid.
    fn build_images(&mut self) {
        let l = self.tile;
        let mut all = Vec::new();
        for p in &self.pyramids {
            let tan_a = p.angle_deg.to_radians().tan();
            let (sin_a, cos_a) = p.angle_deg.to_radians().sin_cos();
            let half = 0.5 * p.base_um;
            for mx in -2i32..=2 {
                for my in -2i32..=2 {
                    let cx = p.centre_um[0] + mx as f64 * l;
                    let cy = p.centre_um[1] + my as f64 * l;
                    if cx + half < 0.0 || cx - half > l || cy + half < 0.0 || cy - half > l {
                        continue;
                    }
                    let h = p.height_um;
                    all.push(Image {
                        planes: [
                            HeightPlane {
                                a: -tan_a,
                                b: 0.0,
                                w: h + tan_a * cx,
                            },
                            HeightPlane {
                                a: tan_a,
                                b: 0.0,
                                w: h - tan_a * cx,
                            },
                            HeightPlane {
                                a: 0.0,
                                b: -tan_a,
                                w: h + tan_a * cy,
                            },
                            HeightPlane {
                                a: 0.0,
                                b: tan_a,
                                w: h - tan_a * cy,
                            },
                        ],
                        normals: face_normals(sin_a, cos_a),
                        sin_a,
                        cos_a,
                        cx,
                        cy,
                        half,
                        height: h,
                        tan_a,
                    });
                }
            }
        }
        // A pyramid whose apex and base corners lie inside another (convex) pyramid is
        // entirely inside it and never part of the surface.
        let margin = PAD_REL * (l + all.iter().map(|im| im.height).fold(0.0, f64::max));
        let buried: Vec<bool> = (0..all.len())
            .map(|j| {
                let b = &all[j];
                let pts = [
                    (b.cx, b.cy, b.height),
                    (b.cx - b.half, b.cy - b.half, 0.0),
                    (b.cx + b.half, b.cy - b.half, 0.0),
                    (b.cx - b.half, b.cy + b.half, 0.0),
                    (b.cx + b.half, b.cy + b.half, 0.0),
                ];
                all.iter().enumerate().any(|(i, a)| {
                    i != j
                        && a.height > b.height
                        && pts.iter().all(|&(x, y, z)| a.contains(x, y, z, margin))
                })
            })
            .collect();
        self.images = all
            .into_iter()
            .zip(buried)
            .filter(|(_, b)| !b)
            .map(|(im, _)| im)
            .collect();
    }

    /// Fills the grid with n × n cells; false if a cell would list too many pyramids.
    fn build_grid(&mut self, n: i64) -> bool {
        let cell = self.tile / n as f64;
        let margin = self.pad;
        let mut lists: Vec<Vec<Item>> = vec![Vec::new(); (n * n) as usize];
        for (k, im) in self.images.iter().enumerate() {
            let i0 = (((im.cx - im.half) / cell).floor() as i64 - 1).max(0);
            let i1 = (((im.cx + im.half) / cell).floor() as i64 + 1).min(n - 1);
            let j0 = (((im.cy - im.half) / cell).floor() as i64 - 1).max(0);
            let j1 = (((im.cy + im.half) / cell).floor() as i64 + 1).min(n - 1);
            for j in j0..=j1 {
                for i in i0..=i1 {
                    let (x0, x1) = (i as f64 * cell - margin, (i + 1) as f64 * cell + margin);
                    let (y0, y1) = (j as f64 * cell - margin, (j + 1) as f64 * cell + margin);
                    let (top, _) = im.range_over(x0, x1, y0, y1);
                    if top > -margin {
                        lists[(j * n + i) as usize].push(Item {
                            image: k as u32,
                            top,
                            cx: im.cx,
                            cy: im.cy,
                            height: im.height,
                            tan_a: im.tan_a,
                            w: im.planes.map(|p| p.w),
                        });
                    }
                }
            }
        }
        let mut cells = Vec::with_capacity(lists.len());
        for (idx, list) in lists.iter_mut().enumerate() {
            let (i, j) = (idx as i64 % n, idx as i64 / n);
            let (x0, x1) = (i as f64 * cell - margin, (i + 1) as f64 * cell + margin);
            let (y0, y1) = (j as f64 * cell - margin, (j + 1) as f64 * cell + margin);
            // The surface is at least the highest "lowest point" of any listed cone.
            let floor = list
                .iter()
                .map(|it| self.images[it.image as usize].range_over(x0, x1, y0, y1).1)
                .fold(0.0, f64::max);
            list.retain(|it| it.top >= floor - margin);
            self.prune_dominated(list, [x0, x1, y0, y1]);
            list.sort_by(|a, b| b.top.total_cmp(&a.top));
            if list.len() > MAX_PER_CELL {
                return false;
            }
            let top = list.first().map_or(0.0, |it| it.top.max(0.0));
            cells.push(CellList {
                items: list.as_slice().into(),
                z: [floor, top],
            });
        }
        self.grid_n = n;
        self.cell = cell;
        self.cells = cells;
        true
    }

    /// Removes from a cell's list the pyramids that lie below the envelope of the others (or
    /// the base plane) everywhere in the cell rectangle `r` = [x0, x1, y0, y1].
    ///
    /// Proof by sampling with a Lipschitz margin: each cone h = H − tan α·‖p − c‖∞ changes
    /// by at most tan α·ρ within ∞-distance ρ of a point, so on a sub-square of ∞-radius ρ
    /// around sample s, pyramid j is at most h_j(s) + tan α_j·ρ and the others' envelope at
    /// least max(0, maxᵢ hᵢ(s) − tan αᵢ·ρ). If the first never exceeds the second, j is never
    /// on the surface in the cell. Conservative: a pyramid that only touches the envelope is
    /// kept. Lowest candidates are tested first, against those still kept.
    fn prune_dominated(&self, list: &mut Vec<Item>, r: [f64; 4]) {
        const M: usize = 8;
        let (sx, sy) = ((r[1] - r[0]) / M as f64, (r[3] - r[2]) / M as f64);
        let rho = 0.5 * sx.max(sy);
        let margin = self.pad;
        list.sort_by(|a, b| a.top.total_cmp(&b.top));
        let mut k = 0;
        while k < list.len() {
            let j = list[k].image as usize;
            let dominated = (0..M * M).all(|q| {
                let x = r[0] + (q % M) as f64 * sx + 0.5 * sx;
                let y = r[2] + (q / M) as f64 * sy + 0.5 * sy;
                let mine = self.images[j].cone_at(x, y).0 + self.images[j].tan_a * rho;
                let others = list
                    .iter()
                    .filter(|it| it.image as usize != j)
                    .map(|it| {
                        let im = &self.images[it.image as usize];
                        im.cone_at(x, y).0 - im.tan_a * rho
                    })
                    .fold(0.0, f64::max);
                mine + margin < others
            });
            if dominated {
                list.remove(k);
            } else {
                k += 1;
            }
        }
    }

    /// The parameters this tile was generated from.
    pub fn spec(&self) -> RandomPyramidsSpec {
        self.spec
    }

    /// Tile side L, µm.
    pub fn tile_um(&self) -> f64 {
        self.tile
    }

    /// The largest coordinate below the tile side, µm (hit points lie in [0, this]).
    pub fn tile_below_um(&self) -> f64 {
        self.tile_below
    }

    /// All generated pyramids (including those buried inside others).
    pub fn pyramids(&self) -> &[Pyramid] {
        &self.pyramids
    }

    /// Number of pyramid images (periodic copies meeting the tile) that can be visible.
    pub fn visible_image_count(&self) -> usize {
        self.images.len()
    }

    /// Facet angle of each generated pyramid, degrees (the realised input distribution).
    pub fn facet_tilts(&self) -> Vec<f64> {
        self.pyramids.iter().map(|p| p.angle_deg).collect()
    }

    /// Fraction of the base plane covered by pyramids (exact area of the union of the bases);
    /// 1 − coverage is the flat fraction seen by vertical light.
    pub fn coverage(&self) -> f64 {
        self.coverage
    }

    /// Side of the acceleration grid cells, µm, and cells per tile side.
    pub fn grid(&self) -> (f64, usize) {
        (self.cell, self.grid_n as usize)
    }

    #[inline(always)]
    fn cell_items(&self, li: i64, lj: i64) -> (&[Item], [f64; 2]) {
        let c = &self.cells[(lj * self.grid_n + li) as usize];
        (&c.items, c.z)
    }

    /// Height of the surface and the facet under the tile point (x, y) (any x, y: wrapped).
    pub fn surface_at(&self, x: f64, y: f64) -> (f64, FacetId) {
        let x = x.rem_euclid(self.tile);
        let y = y.rem_euclid(self.tile);
        let li = floor_i64(x / self.cell).clamp(0, self.grid_n - 1);
        let lj = floor_i64(y / self.cell).clamp(0, self.grid_n - 1);
        let (z, f) = self.envelope(self.cell_items(li, lj).0, x, y);
        (z, FacetId(f))
    }

    /// Envelope of a cell's pyramids at tile point (x, y): height and facet id.
    #[inline]
    fn envelope(&self, items: &[Item], x: f64, y: f64) -> (f64, u32) {
        let mut best = (0.0, GROUND_FACET);
        for it in items {
            let (z, k) = self.images[it.image as usize].cone_at(x, y);
            if z > best.0 {
                best = (z, 1 + 4 * it.image + k);
            }
        }
        best
    }

    /// Fractions of the tile's projected area whose visible facet has a tilt in each bin
    /// `[edges_deg[i], edges_deg[i+1])`, and the flat (base-plane) fraction, sampled on an
    /// `n × n` grid of points (midpoint rule). Tilts seen by vertical light, area-weighted.
    pub fn visible_tilt_histogram(&self, edges_deg: &[f64], n: usize) -> (Vec<f64>, f64) {
        let mut counts = vec![0usize; edges_deg.len().saturating_sub(1)];
        let mut flat = 0usize;
        for j in 0..n {
            for i in 0..n {
                let x = (i as f64 + 0.5) / n as f64 * self.tile;
                let y = (j as f64 + 0.5) / n as f64 * self.tile;
                let (_, f) = self.surface_at(x, y);
                if f.0 == GROUND_FACET {
                    flat += 1;
                    continue;
                }
                let im = &self.images[((f.0 - 1) / 4) as usize];
                let tilt = im.sin_a.atan2(im.cos_a).to_degrees();
                if let Some(b) = edges_deg
                    .windows(2)
                    .position(|w| w[0] <= tilt && tilt < w[1])
                {
                    counts[b] += 1;
                }
            }
        }
        let total = (n * n) as f64;
        (
            counts.iter().map(|&c| c as f64 / total).collect(),
            flat as f64 / total,
        )
    }

    /// Plane and up normal of facet `f`.
    #[inline]
    fn facet_plane(&self, f: u32) -> (HeightPlane, Vec3) {
        if f == GROUND_FACET {
            (HeightPlane::GROUND, Vec3::Z)
        } else {
            let im = &self.images[((f - 1) / 4) as usize];
            let k = (f - 1) % 4;
            (im.planes[k as usize], im.normal(k))
        }
    }

    /// Below-surface interval of pyramid image `image` along the ray (origin `ol` in the tile
    /// frame), with face `pin` declared as the plane the ray leaves.
    #[inline]
    fn cone_span(&self, image: u32, ol: Vec3, faces: &FaceSlopes, pin: Option<u32>) -> Span {
        let im = &self.images[image as usize];
        let own;
        let f = match &faces.common {
            Some(c) if c.tan() == im.tan_a => c,
            _ => {
                own = SquareFaces::new(im.tan_a, faces.d, false);
                &own
            }
        };
        let mut g = f.gaps(ol.x - im.cx, ol.y - im.cy, ol.z, im.height, self.tol);
        if let Some(k) = pin {
            g[k as usize] = g[k as usize].on_plane();
        }
        let tag = 1 + 4 * image;
        g[0].below(tag)
            .and(g[1].below(tag + 1))
            .and(g[2].below(tag + 2))
            .and(g[3].below(tag + 3))
    }

    /// The facet left (if it is one of the tile's) and [t_start, t_end, z_lo, z_hi]: the
    /// parameter interval where the ray is inside the padded slab [z_lo, z_hi]; `None` if it
    /// never is.
    #[inline(always)]
    fn query(&self, o: Vec3, d: Vec3, skip: Option<FacetId>) -> Option<(Option<u32>, [f64; 4])> {
        let (z_lo, z_hi) = (-self.pad, self.z_max + self.pad);
        let (t_start, t_end) = slab_interval(o.z, d.z, z_lo, z_hi)?;
        let n_facets = 1 + 4 * self.images.len() as u32;
        let skip = skip.map(|f| f.0).filter(|&f| f < n_facets);
        Some((skip, [t_start, t_end, z_lo, z_hi]))
    }

    /// Closed-form crossing for the common case: `Some(Some(hit))` a crossing, `Some(None)`
    /// none before the ray leaves the slab, `None` undecided (the robust walk,
    /// [`Self::robust_crossing`], then decides). `d.z ≠ 0`.
    ///
    /// The same walk as the robust one, cell by cell, with the same spans computed by the same
    /// floating-point operations (so every comparison comes out the same), but lean: a span is
    /// two numbers, the face slopes and their reciprocals are set up once per query, the
    /// planes bounding a span are found only for the one that decides, a cell seen from below
    /// is left as soon as the spans found so far keep the ray below to its end, and no
    /// [`Span`] or [`Entry`] is built. It answers only where the robust walk takes its direct
    /// route — side known from the slab or the facet left, each crossing inside its cell and
    /// deep enough at once — and returns `None` wherever that walk would fall back to its full
    /// analysis (an origin on the surface with no facet to leave, a ray along a plane, a
    /// change of side at a cell wall, a shallow excursion, more spans in a cell than it
    /// holds). Where it answers, the answer is the robust walk's (test:
    /// `fast_path_agrees_with_the_robust_walk`). One shortcut is geometric rather than a
    /// replay: a ray leaving a facet down into its pyramid that stays clearly (by
    /// `fast_margin`, 10⁻¹⁰ of the feature size) inside pyramids until it is below the base
    /// plane is answered "no crossing" without a walk — what the walk finds too.
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
    ) -> Option<Option<FastHit<'_>>> {
        match self.common_tan {
            Some(tan) => {
                let common = LeanFaces::new(tan, d)?;
                self.fast_walk::<true>(o, d, skip, [t_start, t_end, z_lo, z_hi], &common)
            }
            None => {
                let unused = LeanFaces::UNUSED;
                self.fast_walk::<false>(o, d, skip, [t_start, t_end, z_lo, z_hi], &unused)
            }
        }
    }

    /// [`Self::fast_crossing`] with the face slopes `common` to all pyramids (`COMMON`) or
    /// set up per pyramid; `limits` = [t_start, t_end, z_lo, z_hi].
    #[inline(always)]
    fn fast_walk<const COMMON: bool>(
        &self,
        o: Vec3,
        d: Vec3,
        skip: Option<u32>,
        limits: [f64; 4],
        common: &LeanFaces,
    ) -> Option<Option<FastHit<'_>>> {
        let [t_start, t_end, z_lo, z_hi] = limits;
        let above = self.starts_above::<COMMON>(o, d, skip, [z_lo, z_hi], common)?;
        let ray = self.lean_ray(o, d, skip);
        // A ray leaving a pyramid face down into that pyramid, which reaches the base plane
        // before leaving the pyramid (or the pyramids it passes into), stays below the
        // surface: no crossing.
        if !above
            && d.z < 0.0
            && ray.skip_image != u32::MAX
            && self.sinks::<COMMON>(common, &ray)?
        {
            return Some(None);
        }
        let walk = GridWalk::new(o, d, self.cell, t_start, t_end, MAX_CELLS_PER_QUERY);
        if above {
            self.fast_above::<COMMON>(&ray, walk, common)
        } else {
            self.fast_below::<COMMON>(&ray, walk, common)
        }
    }

    /// Side a ray from `o` along `d` starts on: outside the slab (between `z_lo` and `z_hi`),
    /// or the side it leaves the skipped facet to (the sign of the facet's dG/dt, never 0
    /// here). `None` inside the slab without a facet left, or along a face.
    #[inline(always)]
    fn starts_above<const COMMON: bool>(
        &self,
        o: Vec3,
        d: Vec3,
        skip: Option<u32>,
        [z_lo, z_hi]: [f64; 2],
        common: &LeanFaces,
    ) -> Option<bool> {
        if o.z > z_hi {
            return Some(true);
        }
        if o.z < z_lo {
            return Some(false);
        }
        match skip? {
            GROUND_FACET => Some(d.z > 0.0),
            f => {
                let im = &self.images[((f - 1) / 4) as usize];
                let faces = Self::faces::<COMMON>(common, im.tan_a, d)?;
                Some(faces.cap[((f - 1) % 4) as usize] < 0.0)
            }
        }
    }

    /// Pyramid image `image` as an item of a cell list, its apex as the top.
    #[inline(always)]
    fn item_of(&self, image: u32) -> Item {
        let im = &self.images[image as usize];
        Item {
            image,
            top: im.height,
            cx: im.cx,
            cy: im.cy,
            height: im.height,
            tan_a: im.tan_a,
            w: im.planes.map(|p| p.w),
        }
    }

    /// The ray as the fast path uses it, leaving facet `skip` (if any).
    #[inline(always)]
    fn lean_ray(&self, o: Vec3, d: Vec3, skip: Option<u32>) -> LeanRay {
        // The base plane: the gap of `Gap::new` with its on-plane rule, then its half-line.
        let oz_abs = o.z.abs();
        let cg = if skip == Some(GROUND_FACET) || oz_abs <= greater(gamma(6) * oz_abs, self.tol) {
            0.0
        } else {
            o.z
        };
        let rg = -cg * (1.0 / d.z);
        LeanRay {
            o,
            d,
            oz_abs,
            ground: if d.z > 0.0 {
                (f64::NEG_INFINITY, rg)
            } else {
                (rg, f64::INFINITY)
            },
            skip_image: match skip {
                Some(f) if f != GROUND_FACET => (f - 1) / 4,
                _ => u32::MAX,
            },
            skip_face: skip.map_or(0, |f| f.wrapping_sub(1) % 4),
        }
    }

    /// Whether a ray that leaves a face of pyramid image `ray.skip_image` down into that
    /// pyramid (`d.z < 0`, below the surface at its start) stays below the surface: it reaches
    /// the base plane before leaving the pyramid (or the pyramids it passes into). Decided
    /// only when the ray is clearly (by `fast_margin`) inside a pyramid at each hand-over and
    /// where it meets the base plane; the robust walk finds no crossing either (in every cell
    /// those pyramids' spans, or those of the pyramids above them there, and the base
    /// plane's cover the ray). `None` if the ray runs parallel to a face of the pyramid.
    #[inline(always)]
    fn sinks<const COMMON: bool>(&self, common: &LeanFaces, ray: &LeanRay) -> Option<bool> {
        let it = self.item_of(ray.skip_image);
        let f = Self::faces::<COMMON>(common, it.tan_a, ray.d)?;
        let (s, e) = self.cone_extent(&f, &it, ray.o.x, ray.o.y, ray, true);
        Some(
            s <= 0.0
                && (f.rate_min * (e - ray.ground.0) > self.fast_margin
                    || self.stays_below::<COMMON>(common, ray, e)),
        )
    }

    /// [`Self::sinks`] for a ray from `o` (just off facet `facet`, as
    /// [`Texture::intersect_after`] starts it) along `d`, with the set-up of the fast path
    /// ([`Self::fast_walk`]) and nothing more: true only where [`Texture::intersect`] answers
    /// "no crossing" through that shortcut (false: ask it).
    #[inline(always)]
    fn sinks_at_once(&self, o: Vec3, d: Vec3, facet: u32) -> bool {
        // As `query` and `fast_crossing`: a pyramid face of the tile, d.z < 0, the faces'
        // set-up possible.
        let (down, n_facets) = (d.z < 0.0, 1 + 4 * self.images.len() as u32);
        if !down || facet == GROUND_FACET || facet >= n_facets {
            return false;
        }
        match self.common_tan {
            Some(tan) => match LeanFaces::new(tan, d) {
                Some(common) => self.sinks_from::<true>(&common, o, d, facet),
                None => false,
            },
            None => self.sinks_from::<false>(&LeanFaces::UNUSED, o, d, facet),
        }
    }

    /// [`Self::sinks_at_once`] with the face slopes of [`Self::fast_walk`].
    #[inline(always)]
    fn sinks_from<const COMMON: bool>(
        &self,
        common: &LeanFaces,
        o: Vec3,
        d: Vec3,
        facet: u32,
    ) -> bool {
        // The side the ray starts on, as `fast_walk` finds it: only from below.
        let slab = [-self.pad, self.z_max + self.pad];
        if self.starts_above::<COMMON>(o, d, Some(facet), slab, common) != Some(false) {
            return false;
        }
        let ray = self.lean_ray(o, d, Some(facet));
        self.sinks::<COMMON>(common, &ray) == Some(true)
    }

    /// Whether a ray that is inside pyramids from its origin up to `x`, where it leaves the
    /// last one above the base plane, passes into another pyramid there (entered clearly
    /// before `x`, left clearly after) and so on, a few times at most, until it is clearly
    /// inside one where it meets the base plane. Then it never crosses the surface.
    #[inline(never)]
    fn stays_below<const COMMON: bool>(&self, common: &LeanFaces, ray: &LeanRay, x: f64) -> bool {
        let (o, d, m) = (ray.o, ray.d, self.fast_margin);
        let n = self.grid_n;
        let mut x = x;
        for _ in 0..4 {
            // The pyramid of the cell under the hand-over point that goes on longest.
            let p = o + x * d;
            let (gi, gj) = (floor_i64(p.x / self.cell), floor_i64(p.y / self.cell));
            let ((ti, li), (tj, lj)) = (tile_and_cell(gi, n), tile_and_cell(gj, n));
            let (olx, oly) = (o.x - ti as f64 * self.tile, o.y - tj as f64 * self.tile);
            let zero = ti == 0 && tj == 0;
            let mut next: Option<(f64, f64)> = None;
            for it in self.cell_items(li, lj).0 {
                if it.top + self.pad < p.z {
                    break;
                }
                let Some(f) = Self::faces::<COMMON>(common, it.tan_a, d) else {
                    return false;
                };
                let pinned = zero && it.image == ray.skip_image;
                let (s, e) = self.cone_extent(&f, it, olx, oly, ray, pinned);
                let inside = f.rate_min * lesser(x - s, e - x) > m;
                if inside && next.is_none_or(|(e_next, _)| e > e_next) {
                    next = Some((e, f.rate_min));
                }
            }
            let Some((e, rate)) = next else {
                return false;
            };
            if rate * (e - ray.ground.0) > m {
                return true;
            }
            x = e;
        }
        false
    }

    /// The fast walk of a ray starting above the surface.
    #[inline(always)]
    fn fast_above<const COMMON: bool>(
        &self,
        ray: &LeanRay,
        walk: GridWalk,
        common: &LeanFaces,
    ) -> Option<Option<FastHit<'_>>> {
        let (o, d) = (ray.o, ray.d);
        let n = self.grid_n;
        let margin = self.pad;
        let (ground_s, ground_e) = ray.ground;
        for cell in walk {
            let (t0, t1) = (cell.t0, cell.t1);
            let (za, zb) = (o.z + t0 * d.z, o.z + t1 * d.z);
            let z_min = lesser(za, zb);
            let ((ti, li), (tj, lj)) = (tile_and_cell(cell.i, n), tile_and_cell(cell.j, n));
            let (items, [_, z_top]) = self.cell_items(li, lj);
            // Cells where the ray stays above the surface's height range.
            if z_min > z_top + margin {
                continue;
            }
            let (tx, ty) = (ti as f64 * self.tile, tj as f64 * self.tile);
            let (olx, oly) = (o.x - tx, o.y - ty);
            let zero = ti == 0 && tj == 0;
            // The earliest entry into the ground or a pyramid, pyramids in order of height
            // until one is lower than the ray before that entry.
            let (mut best_t, mut best_s, mut best_e) = (f64::INFINITY, 0.0, 0.0);
            let (mut best_tag, mut best_rate) = (GROUND_FACET, d.z.abs());
            let mut best_item: Option<&Item> = None;
            // Lowest point of the ray before the best entry so far.
            let mut z_far = z_min;
            let t = greater(ground_s, t0);
            if t < ground_e && t <= t1 {
                (best_t, best_s, best_e) = (t, ground_s, ground_e);
                z_far = lesser(za, o.z + t * d.z);
            }
            for it in items {
                if it.top + margin < z_far {
                    break;
                }
                let (s, e, tag, rate) = self.bounds::<COMMON>(common, ray, it, olx, oly, zero)?;
                let t = greater(s, t0);
                if t < e && t <= t1 && t < best_t {
                    (best_t, best_s, best_e, best_item) = (t, s, e, Some(it));
                    (best_tag, best_rate) = (tag, rate);
                    z_far = lesser(za, o.z + t * d.z);
                }
            }
            if best_t == f64::INFINITY {
                continue;
            }
            // Inside at the cell's entry: a crossing at the wall, for the robust walk.
            if best_s < t0 {
                return None;
            }
            // Deep enough inside that one solid (`excursion_depth` with the rates of the planes
            // bounding the span, each at least `best_rate`: the bound, when it suffices, says
            // the same), else the robust walk.
            let until = lesser(best_e, t1);
            let deep = 4.0 * self.depth;
            let deep_enough = best_rate * (until - best_s) > deep;
            if !deep_enough {
                let it = best_item?;
                let sp =
                    self.tagged::<COMMON>(common, ray, it, olx, oly, zero, (best_s, best_e))?;
                let depth = lesser(sp.rs * (until - best_s), sp.re * (until - best_t));
                let deep_enough = depth > deep;
                if !deep_enough {
                    return None;
                }
            }
            return Some(Some(FastHit {
                t: best_t,
                facet: best_tag,
                tx,
                ty,
                items,
            }));
        }
        Some(None)
    }

    /// The fast walk of a ray starting below the surface.
    #[inline(always)]
    fn fast_below<const COMMON: bool>(
        &self,
        ray: &LeanRay,
        walk: GridWalk,
        common: &LeanFaces,
    ) -> Option<Option<FastHit<'_>>> {
        let (o, d) = (ray.o, ray.d);
        let n = self.grid_n;
        let margin = self.pad;
        // Spans of a cell: start, end, index in the cell's list (`u32::MAX`: the base plane,
        // always first).
        let mut spans = [(0.0, 0.0, u32::MAX); FAST_SPANS];
        spans[0] = (ray.ground.0, ray.ground.1, u32::MAX);
        'cells: for cell in walk {
            let (t0, t1) = (cell.t0, cell.t1);
            let (za, zb) = (o.z + t0 * d.z, o.z + t1 * d.z);
            let ((ti, li), (tj, lj)) = (tile_and_cell(cell.i, n), tile_and_cell(cell.j, n));
            let (items, [z_floor, _]) = self.cell_items(li, lj);
            // Cells where the ray stays below the surface's height range.
            if greater(za, zb) < z_floor - margin {
                continue;
            }
            let (tx, ty) = (ti as f64 * self.tile, tj as f64 * self.tile);
            let (olx, oly) = (o.x - tx, o.y - ty);
            let zero = ti == 0 && tj == 0;
            // The first t ≥ t0 outside the union of the spans found so far, x, only grows as
            // spans are added; once past t1 the cell has no crossing, whatever the other
            // spans (`first_outside_union` over all of them would be past t1 too).
            let (gs, ge, _) = spans[0];
            let mut x = if gs <= t0 && t0 < ge { ge } else { t0 };
            if x > t1 {
                continue;
            }
            let z_min = lesser(za, zb);
            let mut m = 1;
            for (k, it) in items.iter().enumerate() {
                if it.top + margin < z_min {
                    break;
                }
                if m == FAST_SPANS {
                    return None;
                }
                let (s, e, _, _) = self.bounds::<COMMON>(common, ray, it, olx, oly, zero)?;
                if s <= x && x < e {
                    // Moved: the spans found before may now contain x.
                    x = e;
                    let mut moved = true;
                    while moved {
                        moved = false;
                        for &(s, e, _) in &spans[..m] {
                            if s <= x && x < e {
                                (x, moved) = (e, true);
                            }
                        }
                    }
                    if x > t1 {
                        continue 'cells;
                    }
                }
                spans[m] = (s, e, k as u32);
                m += 1;
            }
            // Never inside (a crossing at the cell's wall): robust walk.
            if x == t0 {
                return None;
            }
            // The crossing, pass for pass as `first_outside_union` (which span ends it).
            let spans = &spans[..m];
            let (mut t, mut last) = (t0, 0);
            for _ in 0..=m {
                let mut moved = false;
                for (k, &(s, e, _)) in spans.iter().enumerate() {
                    if s <= t && t < e {
                        (t, last, moved) = (e, k, true);
                    }
                }
                if !moved {
                    break;
                }
            }
            let (tag, rate) = match spans[last].2 {
                u32::MAX => (GROUND_FACET, d.z.abs()),
                k => {
                    let it = &items[k as usize];
                    let span = (spans[last].0, spans[last].1);
                    let sp = self.tagged::<COMMON>(common, ray, it, olx, oly, zero, span)?;
                    (sp.te, sp.re)
                }
            };
            // Not deep enough above at the cell's end (`cell_entry`'s direct acceptance):
            // robust walk.
            let deep_enough = rate * (t1 - t) > self.depth;
            if !deep_enough {
                return None;
            }
            return Some(Some(FastHit {
                t,
                facet: tag,
                tx,
                ty,
                items,
            }));
        }
        Some(None)
    }

    /// Face slopes for a pyramid with slope `tan_a`: the shared ones (`COMMON`) or its own.
    #[inline(always)]
    fn faces<const COMMON: bool>(common: &LeanFaces, tan_a: f64, d: Vec3) -> Option<LeanFaces> {
        if COMMON {
            Some(*common)
        } else {
            LeanFaces::new(tan_a, d)
        }
    }

    /// Below-surface span [s, e) of the pyramid image of item `it` along the ray from
    /// (`olx`, `oly`, o.z) in the tile frame of a cell (`zero`: tile (0, 0)), the facet
    /// starting it, and the smallest |dG/dt| of its faces; `None` if the ray runs parallel to
    /// one of its faces.
    #[inline(always)]
    fn bounds<const COMMON: bool>(
        &self,
        common: &LeanFaces,
        ray: &LeanRay,
        it: &Item,
        olx: f64,
        oly: f64,
        zero: bool,
    ) -> Option<(f64, f64, u32, f64)> {
        let f = Self::faces::<COMMON>(common, it.tan_a, ray.d)?;
        let pinned = zero && it.image == ray.skip_image;
        if !pinned && let Some((s, e, ts)) = self.cone_bounds(&f, it, olx, oly, ray) {
            return Some((s, e, ts, f.rate_min));
        }
        let sp = self.cone_tagged(&f, it, olx, oly, ray, pinned);
        Some((sp.s, sp.e, sp.ts, f.rate_min))
    }

    /// The span [`s`, `e`) of item `it` found by [`Self::bounds`], with the planes bounding it
    /// and their rates: the faces [`Self::cone_tagged`] would name (the first face giving the
    /// latest start and the first giving the earliest end), found again from the roots.
    #[inline(always)]
    #[allow(clippy::too_many_arguments)]
    fn tagged<const COMMON: bool>(
        &self,
        common: &LeanFaces,
        ray: &LeanRay,
        it: &Item,
        olx: f64,
        oly: f64,
        zero: bool,
        (s, e): (f64, f64),
    ) -> Option<Lean> {
        let f = Self::faces::<COMMON>(common, it.tan_a, ray.d)?;
        let pinned = zero && it.image == ray.skip_image;
        let (q, u, v, err) = self.origin_gaps(&f, it, olx, oly, ray);
        if pinned || !clear_of_planes(q, u, v, err) {
            return Some(self.cone_tagged(&f, it, olx, oly, ray, pinned));
        }
        let r = face_roots(&f, q, u, v);
        let c = &f.cap;
        let first = |x: [f64; 4], v: f64| {
            if x[0] == v {
                0
            } else if x[1] == v {
                1
            } else if x[2] == v {
                2
            } else {
                3
            }
        };
        let ts = first(std::array::from_fn(|k| lesser(r[k], c[k])), s);
        let te = first(std::array::from_fn(|k| greater(r[k], c[k])), e);
        let tag = 1 + 4 * it.image;
        Some(Lean {
            s,
            e,
            ts: tag + ts as u32,
            te: tag + te as u32,
            rs: f.rate[ts],
            re: f.rate[te],
        })
    }

    /// The gaps c = q ± u, q ± v of the ray origin (`olx`, `oly`, o.z) to the four faces of
    /// the pyramid image of item `it`, and their on-plane tolerance, as `SquareFaces::gaps`
    /// computes them: (q, u, v, tolerance).
    #[inline(always)]
    fn origin_gaps(
        &self,
        f: &LeanFaces,
        it: &Item,
        olx: f64,
        oly: f64,
        ray: &LeanRay,
    ) -> (f64, f64, f64, f64) {
        let u = f.tan * (olx - it.cx);
        let v = f.tan * (oly - it.cy);
        let h = it.height;
        let q = ray.o.z - h;
        let err = greater(
            gamma(6) * (ray.oz_abs + h.abs() + u.abs() + v.abs()),
            self.tol,
        );
        (q, u, v, err)
    }

    /// [`Texture::intersect`] by the walk (fast, else robust), for every ray.
    #[inline(always)]
    fn walk_intersect(&self, o: Vec3, d: Vec3, skip: Option<FacetId>) -> Option<Hit> {
        let (skip, [t_start, t_end, z_lo, z_hi]) = self.query(o, d, skip)?;
        if d.z != 0.0
            && let Some(found) = self.fast_crossing(o, d, skip, t_start, t_end, z_lo, z_hi)
        {
            return found.map(|h| self.fast_hit(o, d, h));
        }
        self.robust_crossing(o, d, skip, t_start, t_end, z_lo, z_hi)
    }

    /// The hit of a crossing found by the fast path: the point in the tile frame, snapped onto
    /// the surface, as the robust walk makes it.
    #[inline(always)]
    fn fast_hit(&self, o: Vec3, d: Vec3, h: FastHit) -> Hit {
        let FastHit {
            t,
            facet,
            tx,
            ty,
            items,
        } = h;
        let p = o + t * d;
        // `clamp_into` with the tile side's predecessor stored.
        let below = self.tile_below;
        let inside = |v: f64| {
            if v < 0.0 {
                0.0
            } else if v > below {
                below
            } else {
                v
            }
        };
        let (x, y) = (inside(p.x - tx), inside(p.y - ty));
        let (z, active) = self.envelope_over(items, x, y);
        let z_err = match active {
            Some((it, k)) => face_err(it, k, x, y),
            None => HeightPlane::GROUND.z_err(x, y),
        };
        facet_hit(
            t,
            Vec3::new(x, y, z),
            snapped_err(x, y, z_err),
            self.facet_normal(facet),
            facet,
        )
    }

    /// The envelope of a cell's `items` at tile point (x, y) and the item and face giving
    /// it (`None`: the base plane), without the pyramids that cannot reach the running
    /// maximum (the list is sorted by the highest point over the cell, a bound for every
    /// point of it): the result of [`Self::envelope`]. A face's height a·x + b·y + w, with
    /// one of a, b zero and x, y ≥ 0, is a·x + w to the bit (adding the zero term changes
    /// nothing but the sign of a zero, which adding w then drops).
    #[inline(always)]
    fn envelope_over<'a>(
        &self,
        items: &'a [Item],
        x: f64,
        y: f64,
    ) -> (f64, Option<(&'a Item, u32)>) {
        let mut z = 0.0;
        let mut active = None;
        for it in items {
            if it.top + self.pad < z {
                break;
            }
            let (ux, uy) = (it.tan_a * x, it.tan_a * y);
            let (z0, z1, z2, z3) = (it.w[0] - ux, ux + it.w[1], it.w[2] - uy, uy + it.w[3]);
            // The lowest face, the first on ties (as `Image::cone_at`).
            let (za, ka) = if z1 < z0 { (z1, 1) } else { (z0, 0) };
            let (zb, kb) = if z3 < z2 { (z3, 3) } else { (z2, 2) };
            let (zi, k) = if zb < za { (zb, kb) } else { (za, ka) };
            if zi > z {
                (z, active) = (zi, Some((it, k)));
            }
        }
        (z, active)
    }

    /// Up normal of facet `facet` of the tile (from the normals shared by all pyramids where
    /// they are: the pyramid's own record is not read).
    #[inline(always)]
    fn facet_normal(&self, facet: u32) -> Vec3 {
        if facet == GROUND_FACET {
            Vec3::Z
        } else if let Some(n) = &self.common_normals {
            n[((facet - 1) % 4) as usize]
        } else {
            self.images[((facet - 1) / 4) as usize].normal((facet - 1) % 4)
        }
    }

    /// Whether [`Texture::intersect`] answers a ray from `o` along `d` by
    /// [`Self::vertical_hit`]: vertical, downward, from above the padded slab.
    #[inline(always)]
    fn is_vertical_launch(&self, o: Vec3, d: Vec3) -> bool {
        d.x == 0.0 && d.y == 0.0 && d.z < 0.0 && o.z > self.z_max + self.pad
    }

    /// The cell list a vertical ray through `o` reads (see [`Self::vertical_hit`]).
    #[inline(always)]
    fn vertical_cell(&self, o: Vec3) -> ((i64, i64), &CellList) {
        let inv_cell = 1.0 / self.cell;
        let n = self.grid_n;
        let (ti, li) = tile_and_cell(floor_i64(o.x * inv_cell), n);
        let (tj, lj) = tile_and_cell(floor_i64(o.y * inv_cell), n);
        ((ti, tj), &self.cells[(lj * n + li) as usize])
    }

    /// Asks the processor to start loading the cell list that [`Texture::intersect`] will
    /// read for a ray from `o` along `d`, if it is a vertical launch: called for several
    /// rays before their queries, the memory accesses of the rays overlap instead of each
    /// query waiting for its own. No effect on any result.
    #[inline(always)]
    pub fn prefetch_launch(&self, o: Vec3, d: Vec3) {
        if self.is_vertical_launch(o, d) {
            let items = &self.vertical_cell(o).1.items;
            if let Some(first) = items.first() {
                prefetch(first);
                // and its last field: an 80-byte item straddles two cache lines (or three)
                prefetch(first.w.as_ptr().wrapping_add(3));
            }
        }
    }

    /// [`Texture::intersect_after`] from the start point `origin` it computes (just off
    /// `facet`, [`crate::geometry::robust::offset_origin`]).
    #[inline]
    pub fn intersect_off(&self, origin: Vec3, dir: Vec3, facet: FacetId) -> Option<Hit> {
        if self.sinks_at_once(origin, dir, facet.0) {
            return None;
        }
        self.intersect(origin, dir, Some(facet))
    }

    /// [`Texture::intersect`] for a ray entering the slab (no facet left), with the
    /// vertical shortcut inlined into the caller.
    #[inline(always)]
    pub fn intersect_entering(&self, o: Vec3, d: Vec3) -> Option<Hit> {
        if self.is_vertical_launch(o, d) {
            return Some(self.vertical_hit(o, d));
        }
        self.intersect(o, d, None)
    }

    /// The crossing of a vertical ray from above the slab (`d` = (0, 0, −1), `o.z` above
    /// the padded slab): straight below its origin, at the envelope's height there, on the
    /// facet giving it — what the walk ([`Self::fast_above`], then [`Self::fast_hit`])
    /// finds, without the walk (one cell, its envelope once). The walk takes the facet from
    /// the earliest entry and the height from the envelope; here both come from the
    /// envelope, so they cannot disagree at a valley (test:
    /// `vertical_launches_agree_with_the_walk`).
    #[inline(always)]
    fn vertical_hit(&self, o: Vec3, d: Vec3) -> Hit {
        let ((ti, tj), cell) = self.vertical_cell(o);
        let items = &cell.items;
        let below = self.tile_below;
        let inside = |v: f64| lesser(greater(v, 0.0), below);
        let (x, y) = (
            inside(o.x - ti as f64 * self.tile),
            inside(o.y - tj as f64 * self.tile),
        );
        let (z, active) = self.envelope_over(items, x, y);
        let (facet, z_err, normal) = match active {
            Some((it, k)) => {
                let facet = 1 + 4 * it.image + k;
                (facet, face_err(it, k, x, y), self.facet_normal(facet))
            }
            None => (GROUND_FACET, HeightPlane::GROUND.z_err(x, y), Vec3::Z),
        };
        facet_hit(
            (z - o.z) / d.z,
            Vec3::new(x, y, z),
            snapped_err(x, y, z_err),
            normal,
            facet,
        )
    }

    /// Below-surface span [s, e) of the pyramid image of item `it` along the ray from
    /// (`olx`, `oly`, o.z) in a tile frame, when no face's gap at the origin is within its
    /// on-plane tolerance (`None` otherwise: see [`Self::cone_tagged`]): the bounds of
    /// [`Self::cone_span`], from the same operations, and the facet starting it.
    #[inline(always)]
    fn cone_bounds(
        &self,
        f: &LeanFaces,
        it: &Item,
        olx: f64,
        oly: f64,
        ray: &LeanRay,
    ) -> Option<(f64, f64, u32)> {
        let (q, u, v, err) = self.origin_gaps(f, it, olx, oly, ray);
        if !clear_of_planes(q, u, v, err) {
            return None;
        }
        let r = face_roots(f, q, u, v);
        let c = &f.cap;
        // Latest start, its first face (as the chain of `Span::and`, pairwise), earliest end.
        let (s0, s1, s2, s3) = (
            lesser(r[0], c[0]),
            lesser(r[1], c[1]),
            lesser(r[2], c[2]),
            lesser(r[3], c[3]),
        );
        let (sa, ka) = if s1 > s0 { (s1, 1) } else { (s0, 0) };
        let (sb, kb) = if s3 > s2 { (s3, 3) } else { (s2, 2) };
        let (s, ks) = if sb > sa { (sb, kb) } else { (sa, ka) };
        let e = lesser(
            lesser(greater(r[0], c[0]), greater(r[1], c[1])),
            lesser(greater(r[2], c[2]), greater(r[3], c[3])),
        );
        Some((s, e, 1 + 4 * it.image + ks))
    }

    /// Roots −c/e of the four face gaps of the pyramid image of item `im` along the ray from
    /// (`olx`, `oly`, o.z) in a tile frame, after the on-plane rule (`pinned`: the facet left
    /// is a face of it, its gap declared 0), as [`Self::cone_span`] finds them.
    #[inline(always)]
    fn cone_roots(
        &self,
        f: &LeanFaces,
        im: &Item,
        olx: f64,
        oly: f64,
        ray: &LeanRay,
        pinned: bool,
    ) -> [f64; 4] {
        let (q, u, v, err) = self.origin_gaps(f, im, olx, oly, ray);
        let pin = if pinned { ray.skip_face } else { 4 };
        let gap = |c: f64, k: u32| {
            if c.abs() <= err || k == pin { 0.0 } else { c }
        };
        [
            gap(q + u, 0) * f.ninv[0],
            gap(q - u, 1) * f.ninv[1],
            gap(q + v, 2) * f.ninv[2],
            gap(q - v, 3) * f.ninv[3],
        ]
    }

    /// The bounds `s`, `e` of [`Self::cone_tagged`]'s span, bit for bit, without the planes
    /// bounding it, in one-instruction maxima and minima rather than branches on the data
    /// that the processor would often mispredict. Ties are broken as there (the earlier face
    /// wins, in pairs and then between them), though they cannot differ in their bits: the
    /// roots of equal value are equal numbers or zeros of one sign (a gap set to 0 is +0, and
    /// the sign of −1/e is that of the bound's side).
    #[inline(always)]
    fn cone_extent(
        &self,
        f: &LeanFaces,
        im: &Item,
        olx: f64,
        oly: f64,
        ray: &LeanRay,
        pinned: bool,
    ) -> (f64, f64) {
        let r = self.cone_roots(f, im, olx, oly, ray, pinned);
        let c = &f.cap;
        // `greater(b, a)` keeps a on a tie, `lesser(b, a)` too: the earlier face wins.
        let s = greater(
            greater(lesser(r[3], c[3]), lesser(r[2], c[2])),
            greater(lesser(r[1], c[1]), lesser(r[0], c[0])),
        );
        let e = lesser(
            lesser(greater(r[3], c[3]), greater(r[2], c[2])),
            lesser(greater(r[1], c[1]), greater(r[0], c[0])),
        );
        (s, e)
    }

    /// Below-surface span of the pyramid image of item `im` along the ray from (`olx`, `oly`,
    /// o.z) in a tile frame, with the planes bounding it and their rates (`pinned`: the facet left is
    /// a face of it, declared as the plane the ray leaves): [`Self::cone_span`] from the same
    /// operations, on-plane rule included.
    #[inline(always)]
    fn cone_tagged(
        &self,
        f: &LeanFaces,
        im: &Item,
        olx: f64,
        oly: f64,
        ray: &LeanRay,
        pinned: bool,
    ) -> Lean {
        // A face the ray dives under (cap +∞) bounds the span's start, one it rises over
        // (cap −∞) its end: latest start and earliest end, the first face winning ties (as
        // `Span::and`).
        let r = self.cone_roots(f, im, olx, oly, ray, pinned);
        let (mut s, mut ts) = (f64::NEG_INFINITY, 0);
        let (mut e, mut te) = (f64::INFINITY, 0);
        for (k, (&rk, &ck)) in r.iter().zip(&f.cap).enumerate() {
            let sk = lesser(rk, ck);
            if k == 0 || sk > s {
                (s, ts) = (sk, k);
            }
            let ek = greater(rk, ck);
            if k == 0 || ek < e {
                (e, te) = (ek, k);
            }
        }
        let tag = 1 + 4 * im.image;
        Lean {
            s,
            e,
            ts: tag + ts as u32,
            te: tag + te as u32,
            rs: f.rate[ts],
            re: f.rate[te],
        }
    }

    /// The robust walk (see the module doc): decides every query, including those the fast
    /// path ([`Self::fast_crossing`]) leaves open.
    #[inline(never)]
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
        let n = self.grid_n;
        // Grid cell → cell in the tile, tile offset, origin in that tile's frame.
        let locate = |gi: i64, gj: i64| {
            let ((ti, li), (tj, lj)) = (tile_and_cell(gi, n), tile_and_cell(gj, n));
            let (tx, ty) = (ti as f64 * self.tile, tj as f64 * self.tile);
            let ol = Vec3::new(o.x - tx, o.y - ty, o.z);
            (li, lj, [tx, ty], ol, ti == 0 && tj == 0)
        };
        let mut ground = Gap::new(&HeightPlane::GROUND, o, d, self.tol);
        if skip == Some(GROUND_FACET) {
            ground = ground.on_plane();
        }
        let ground_span = ground.below(GROUND_FACET);
        let slopes = FaceSlopes::new(d, self.common_tan);
        // Span buffer, filled only where all spans of a cell are needed.
        let mut buf: Option<[Span; MAX_PER_CELL + 1]> = None;

        // Side the ray starts on.
        let side = side_outside_slab(o.z, z_lo, z_hi)
            .or_else(|| {
                let (plane, _) = self.facet_plane(skip?);
                Side::leaving(Gap::new(&plane, Vec3::ZERO, d, 0.0).e)
            })
            .or_else(|| {
                let gi = floor_i64(o.x / self.cell);
                let gj = floor_i64(o.y / self.cell);
                let (li, lj, _, ol, _) = locate(gi, gj);
                let (items, _) = self.cell_items(li, lj);
                let (z, f) = self.envelope(items, ol.x, ol.y);
                let (plane, _) = self.facet_plane(f);
                super::side_from_surface(ol, d, z, plane.z_err(ol.x, ol.y), self.tol, &plane)
            })
            .unwrap_or_else(|| {
                let gi = floor_i64(o.x / self.cell);
                let gj = floor_i64(o.y / self.cell);
                let (li, lj, _, ol, zero) = locate(gi, gj);
                let (items, _) = self.cell_items(li, lj);
                let spans = buf.get_or_insert([Span::EMPTY; MAX_PER_CELL + 1]);
                spans[0] = ground_span;
                for (m, it) in items.iter().enumerate() {
                    spans[m + 1] =
                        self.cone_span(it.image, ol, &slopes, pinned(skip, it.image, zero));
                }
                side_at_origin(&spans[..items.len() + 1])
            });

        let margin = self.pad;
        let mut first = true;
        for cell in GridWalk::new(o, d, self.cell, t_start, t_end, MAX_CELLS_PER_QUERY) {
            let first_cell = std::mem::replace(&mut first, false);
            let (li, lj, _, ol, zero) = locate(cell.i, cell.j);
            let (items, [z_floor, z_top]) = self.cell_items(li, lj);
            let (za, zb) = (o.z + cell.t0 * d.z, o.z + cell.t1 * d.z);
            // Skip cells where the ray stays clear of the surface's height range.
            let clear = match side {
                Side::Above => za.min(zb) > z_top + margin,
                Side::Below => za.max(zb) < z_floor - margin,
            };
            if clear {
                continue;
            }
            // All spans that can meet the ray's segment in this cell (pyramids lower than
            // the ray's lowest point in it are clear of it).
            let all_spans = |spans: &mut [Span; MAX_PER_CELL + 1]| {
                spans[0] = ground_span;
                let mut m = 1;
                for it in items {
                    if it.top + margin < za.min(zb) {
                        break;
                    }
                    spans[m] = self.cone_span(it.image, ol, &slopes, pinned(skip, it.image, zero));
                    m += 1;
                }
                m
            };
            let entry = match side {
                Side::Above => {
                    // Fast path: the earliest entry into any pyramid or the ground, testing
                    // pyramids in order of height and stopping at the first one lower than
                    // the ray before that entry.
                    let mut best: Option<(Entry, Span)> = None;
                    let consider = |span: Span, best: &mut Option<(Entry, Span)>| {
                        if let Some(t) = span.first_from(cell.t0)
                            && t <= cell.t1
                            && best.is_none_or(|b| t < b.0.t)
                        {
                            let tag = span.start.is_finite().then_some(span.start_tag);
                            let rate = if tag.is_some() {
                                span.start_rate
                            } else {
                                f64::INFINITY
                            };
                            let inside_at_lo = span.start < cell.t0;
                            let e = Entry {
                                t,
                                tag,
                                inside_at_lo,
                                rate,
                                since: span.start,
                                span_end: span.end,
                                span_end_rate: span.end_rate,
                            };
                            *best = Some((e, span));
                        }
                    };
                    consider(ground_span, &mut best);
                    for it in items {
                        let t_far = best.map_or(cell.t1, |b| b.0.t);
                        if it.top + margin < za.min(o.z + t_far * d.z) {
                            break;
                        }
                        consider(
                            self.cone_span(it.image, ol, &slopes, pinned(skip, it.image, zero)),
                            &mut best,
                        );
                    }
                    match best {
                        None => None,
                        // The ray gets deep inside that one solid: a real crossing.
                        Some((e, span))
                            if !e.inside_at_lo
                                && super::excursion_depth(
                                    &e,
                                    span.end.min(cell.t1),
                                    span.end_rate,
                                ) > 4.0 * self.depth =>
                        {
                            Some(e)
                        }
                        // A possibly spurious touch: decide with every span of the cell.
                        Some(_) => {
                            let spans = buf.get_or_insert([Span::EMPTY; MAX_PER_CELL + 1]);
                            let m = all_spans(spans);
                            cell_entry(&spans[..m], side, cell.t0, cell.t1, self.depth)
                        }
                    }
                }
                Side::Below => {
                    let spans = buf.get_or_insert([Span::EMPTY; MAX_PER_CELL + 1]);
                    let m = all_spans(spans);
                    cell_entry(&spans[..m], side, cell.t0, cell.t1, self.depth)
                }
            };
            let Some(entry) = entry else { continue };
            // Hit point in the tile frame, snapped onto the surface (the envelope of the
            // cell's pyramids, which near an edge may be the neighbour of the crossed facet).
            let t = entry.t;
            let probe = |dt: f64| {
                let q = o + (t + dt) * d;
                let (gi, gj) = (floor_i64(q.x / self.cell), floor_i64(q.y / self.cell));
                let (li, lj, [tx, ty], _, _) = locate(gi, gj);
                (
                    (gi, gj),
                    self.envelope(self.cell_items(li, lj).0, q.x - tx, q.y - ty)
                        .1,
                )
            };
            let ok = |c: (i64, i64), k: u32| {
                let tile_zero = (c.0.div_euclid(n), c.1.div_euclid(n)) == (0, 0);
                let left = skip == Some(k) && (k == GROUND_FACET || tile_zero);
                !left && super::faces(side, d, self.facet_plane(k).1)
            };
            let delta = super::PROBE_REL * self.tile;
            let ((gi, gj), facet) =
                super::crossed_facet(&entry, first_cell, (cell.i, cell.j), delta, probe, ok);
            let (li, lj, [tx, ty], _, _) = locate(gi, gj);
            let (items, _) = self.cell_items(li, lj);
            let p = o + t * d;
            let (x, _) = clamp_into(p.x - tx, self.tile);
            let (y, _) = clamp_into(p.y - ty, self.tile);
            let (z, active) = self.envelope(items, x, y);
            let (_, normal) = self.facet_plane(facet);
            let point = Vec3::new(x, y, z);
            let p_err = snapped_err(x, y, self.facet_plane(active).0.z_err(x, y));
            return Some(facet_hit(t, point, p_err, normal, facet));
        }
        None
    }
}

/// Face slopes along a ray, shared by every pyramid with the common facet angle (set up once
/// per ray).
struct FaceSlopes {
    d: Vec3,
    common: Option<SquareFaces>,
}

impl FaceSlopes {
    fn new(d: Vec3, common_tan: Option<f64>) -> FaceSlopes {
        FaceSlopes {
            d,
            common: common_tan.map(|t| SquareFaces::new(t, d, false)),
        }
    }
}

/// The four face slopes of pyramids with facet slope `tan` along one ray, for the fast path:
/// with e = dG/dt of each face as in [`SquareFaces::new`], −1/e (a root is c·(−1/e), the
/// same number as −c·(1/e)), |e|, and the cap ±∞ = −sign(e)·∞ that turns a root into the start
/// of the below-surface span (a face the ray dives under, e < 0: min(root, +∞)) or its end
/// (e > 0: max(root, −∞)), the other bound staying infinite.
#[derive(Clone, Copy, Debug)]
struct LeanFaces {
    tan: f64,
    ninv: [f64; 4],
    rate: [f64; 4],
    /// The smallest of `rate`.
    rate_min: f64,
    cap: [f64; 4],
}

impl LeanFaces {
    /// Placeholder where no facet angle is shared.
    const UNUSED: LeanFaces = LeanFaces {
        tan: 0.0,
        ninv: [0.0; 4],
        rate: [0.0; 4],
        rate_min: 0.0,
        cap: [0.0; 4],
    };

    /// Set-up for slope `tan` and direction `d`; `None` if the ray runs parallel to a face.
    #[inline(always)]
    fn new(tan: f64, d: Vec3) -> Option<LeanFaces> {
        let (tx, ty) = (tan * d.x, tan * d.y);
        let e = [d.z + tx, d.z - tx, d.z + ty, d.z - ty];
        if e.contains(&0.0) {
            return None;
        }
        let rate = e.map(f64::abs);
        Some(LeanFaces {
            tan,
            ninv: e.map(|v| -(1.0 / v)),
            rate,
            rate_min: lesser(lesser(rate[0], rate[1]), lesser(rate[2], rate[3])),
            cap: e.map(|v| f64::INFINITY.copysign(-v)),
        })
    }
}

/// A crossing found by the fast path at ray parameter `t` on `facet`, in the cell with list
/// `items` of the tile shifted by (`tx`, `ty`).
struct FastHit<'a> {
    t: f64,
    facet: u32,
    tx: f64,
    ty: f64,
    items: &'a [Item],
}

/// A ray as the fast path uses it: origin, direction, |o.z|, its below-ground span, and the
/// facet it leaves.
struct LeanRay {
    o: Vec3,
    d: Vec3,
    oz_abs: f64,
    ground: (f64, f64),
    /// Image of the pyramid facet left (`u32::MAX` if none) and its face.
    skip_image: u32,
    skip_face: u32,
}

/// True when none of the gaps q ± u, q ± v is within `err` of 0 (the on-plane rule of
/// `SquareFaces::gaps` leaves them all as they are): the smaller of |q + u| and |q − u| is
/// ||q| − |u||, to the bit (rounding to nearest is odd).
#[inline(always)]
fn clear_of_planes(q: f64, u: f64, v: f64, err: f64) -> bool {
    let aq = q.abs();
    lesser((aq - u.abs()).abs(), (aq - v.abs()).abs()) > err
}

/// Roots −c/e of the four face gaps c = q ± u, q ± v along the ray (as −c·(1/e)).
#[inline(always)]
fn face_roots(f: &LeanFaces, q: f64, u: f64, v: f64) -> [f64; 4] {
    [
        (q + u) * f.ninv[0],
        (q - u) * f.ninv[1],
        (q + v) * f.ninv[2],
        (q - v) * f.ninv[3],
    ]
}

/// A span [s, e) of the ray parameter with the planes bounding it and |dG/dt| of each (the
/// fast path's light counterpart of [`Span`]; empty when s ≥ e).
#[derive(Clone, Copy, Debug)]
struct Lean {
    s: f64,
    e: f64,
    ts: u32,
    te: u32,
    rs: f64,
    re: f64,
}

/// [`HeightPlane::z_err`] at (x, y) of face `k` of the pyramid image of item `it`, from the
/// item's copies (the face's slope is ±tan α along one axis and 0 along the other: the same
/// bits), without reading the image.
#[inline(always)]
fn face_err(it: &Item, k: u32, x: f64, y: f64) -> f64 {
    let u = it.tan_a * [x, y][(k >> 1) as usize];
    gamma(3) * (u.abs() + it.w[k as usize].abs())
}

/// A hint to the processor to bring the cache line holding `x` into the cache (no effect
/// on results; nothing on processors without the instruction).
#[inline(always)]
fn prefetch<T>(x: *const T) {
    #[cfg(target_arch = "x86_64")]
    // SAFETY: a prefetch never faults and reads nothing into the program, whatever the
    // address (SSE, present on every x86-64).
    unsafe {
        std::arch::x86_64::_mm_prefetch::<{ std::arch::x86_64::_MM_HINT_T0 }>(x.cast());
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = x;
}

/// Tile index and cell within the tile of grid cell `g` (n cells per tile): the Euclidean
/// quotient and remainder, without an integer division for the tile and its neighbours
/// (where nearly every ray is).
#[inline(always)]
fn tile_and_cell(g: i64, n: i64) -> (i64, i64) {
    if (0..n).contains(&g) {
        (0, g)
    } else if (n..2 * n).contains(&g) {
        (1, g - n)
    } else if (-n..0).contains(&g) {
        (-1, g + n)
    } else {
        (g.div_euclid(n), g.rem_euclid(n))
    }
}

/// Which face of which image is the leaving facet, in tile (0, 0).
#[inline]
fn pinned(skip: Option<u32>, image: u32, tile_zero: bool) -> Option<u32> {
    match skip {
        Some(f) if tile_zero && f != GROUND_FACET && (f - 1) / 4 == image => Some((f - 1) % 4),
        _ => None,
    }
}

impl Texture for RandomPyramids {
    fn period_um(&self) -> [f64; 2] {
        [self.tile; 2]
    }

    fn z_range_um(&self) -> [f64; 2] {
        [0.0, self.z_max]
    }

    fn intersect(&self, o: Vec3, d: Vec3, skip: Option<FacetId>) -> Option<Hit> {
        if self.is_vertical_launch(o, d) {
            return Some(self.vertical_hit(o, d));
        }
        self.walk_intersect(o, d, skip)
    }

    /// The default (from just off the facet, with the facet as `skip`), with a ray that sinks
    /// into the pyramid it leaves answered at once (`sinks_at_once`).
    fn intersect_after(&self, from: &Hit, dir: Vec3) -> Option<Hit> {
        let origin = offset_origin(from.point, from.p_err, from.normal, dir);
        self.intersect_off(origin, dir, from.facet)
    }

    fn facet_tilts_deg(&self) -> Vec<f64> {
        let mut t = self.facet_tilts();
        if self.coverage < 1.0 {
            t.push(0.0);
        }
        t
    }

    fn symmetry(&self) -> Symmetry {
        // Statistically fourfold with mirror lines along the pyramid edges (x, y).
        Symmetry::Square
    }

    fn describe(&self) -> String {
        let s = &self.spec;
        let what = match s.size_of {
            SizeOf::Height => "height",
            SizeOf::Base => "base",
        };
        let dist = match s.size {
            SizeDistribution::LogNormal {
                mean_um,
                spread_rel,
            } => {
                format!("log-normal {what}, mean {mean_um} µm, relative spread {spread_rel}")
            }
            SizeDistribution::Uniform { min_um, max_um } => {
                format!("uniform {what} {min_um}–{max_um} µm")
            }
        };
        format!(
            "random upright pyramids: {} pyramids ({} visible images) on a {:.3} µm tile, {}, \
             facet angle {:.4}° ± {}°, coverage {:.4}, seed {}",
            s.pyramid_count,
            self.images.len(),
            self.tile,
            dist,
            s.base_angle_deg,
            s.angle_spread_deg,
            self.coverage,
            s.seed
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::TAU;

    #[test]
    fn tile_and_cell_is_the_euclidean_division() {
        for n in [1i64, 3, 7] {
            for g in -40..40 {
                assert_eq!(
                    tile_and_cell(g, n),
                    (g.div_euclid(n), g.rem_euclid(n)),
                    "{g} / {n}"
                );
            }
        }
    }

    /// The fast path must give the robust walk's answer wherever it decides, and decide almost
    /// everywhere: rays from above (near normal and cosine-distributed) and from below, then
    /// the rays leaving each hit by mirror reflection or refraction into (or out of) silicon,
    /// n = 3.94, as the tracer makes them; on the tile of the throughput example, a finer one,
    /// and one with a facet-angle spread (per-pyramid face slopes).
    /// A tile of 150 pyramids of heights uniform in 1–4 µm, facet angles spread by 1.5°,
    /// for target coverage `coverage`.
    fn uniform_tile_with_angle_spread(coverage: f64) -> RandomPyramidsSpec {
        RandomPyramidsSpec {
            size: SizeDistribution::Uniform {
                min_um: 1.0,
                max_um: 4.0,
            },
            angle_spread_deg: 1.5,
            pyramid_count: 150,
            coverage_target: coverage,
            ..RandomPyramidsSpec::log_normal_height(2.0, 0.0, 3)
        }
    }

    #[test]
    fn fast_path_agrees_with_the_robust_walk() {
        use crate::geometry::robust::offset_origin;
        let specs = [
            RandomPyramidsSpec::log_normal_height(3.0, 0.35, 1),
            RandomPyramidsSpec::log_normal_height(1.0, 0.35, 7),
            uniform_tile_with_angle_spread(0.99),
        ];
        let n_si = 3.94;
        for (n, spec) in specs.into_iter().enumerate() {
            let tex = RandomPyramids::new(spec).unwrap();
            let l = tex.tile_um();
            let [z_min, z_max] = tex.z_range_um();
            let mut rng = Stream::new(23, n as u64, 0);
            let (mut decided, mut total, mut hits) = (0usize, 0usize, 0usize);
            let (mut after, mut sank) = (0usize, 0usize);
            for k in 0..7000 {
                // Launch: 3 in 4 from above (one in 8 at normal incidence, half within 10° of
                // the normal).
                let from_above = k % 4 != 3;
                let mut dir = if k % 8 == 0 {
                    Vec3::Z
                } else if k % 2 == 0 {
                    let (st, phi) = (
                        (10f64).to_radians().sin() * rng.uniform(),
                        TAU * rng.uniform(),
                    );
                    Vec3::new(st * phi.cos(), st * phi.sin(), (1.0 - st * st).sqrt())
                } else {
                    rng.cosine_hemisphere()
                };
                if from_above {
                    dir.z = -dir.z;
                }
                let z0 = if from_above {
                    z_max + 0.01
                } else {
                    z_min - 0.01
                };
                let mut origin = Vec3::new(rng.uniform() * l, rng.uniform() * l, z0);
                let mut skip = None;
                let mut above = from_above;
                let mut from: Option<Hit> = None;
                for _ in 0..8 {
                    // A query from a hit point: `intersect_after` (with its shortcut for rays
                    // sinking into the pyramid left) against the robust walk from the same
                    // start, and the shortcut only where the fast path takes it too.
                    if let Some(h) = &from {
                        let q = tex.query(origin, dir, skip);
                        let robust = q.and_then(|(sk, [t0, t1, lo, hi])| {
                            tex.robust_crossing(origin, dir, sk, t0, t1, lo, hi)
                        });
                        // The span bounds of the shortcut, bit for bit those of the tagged span,
                        // for the pyramid left, pinned or not.
                        if h.facet.0 != GROUND_FACET {
                            let it = tex.item_of((h.facet.0 - 1) / 4);
                            let ray = tex.lean_ray(origin, dir, Some(h.facet.0));
                            if let Some(f) = LeanFaces::new(it.tan_a, dir) {
                                for pinned in [true, false] {
                                    let (s, e) =
                                        tex.cone_extent(&f, &it, origin.x, origin.y, &ray, pinned);
                                    let sp =
                                        tex.cone_tagged(&f, &it, origin.x, origin.y, &ray, pinned);
                                    assert_eq!(
                                        (s.to_bits(), e.to_bits()),
                                        (sp.s.to_bits(), sp.e.to_bits()),
                                        "tile {n}, ray {k}"
                                    );
                                }
                            }
                        }
                        if tex.sinks_at_once(origin, dir, h.facet.0) {
                            sank += 1;
                            assert!(robust.is_none(), "tile {n}, ray {k}: sank, yet {robust:?}");
                            if let Some((sk, [t0, t1, lo, hi])) = q {
                                let fast = tex.fast_crossing(origin, dir, sk, t0, t1, lo, hi);
                                assert!(matches!(fast, Some(None)), "tile {n}, ray {k}");
                            }
                        }
                        after += 1;
                        match (tex.intersect_after(h, dir), robust) {
                            (None, None) => {}
                            (Some(f), Some(r)) => {
                                assert_eq!(f.facet, r.facet, "tile {n}, ray {k}");
                                assert!((f.t - r.t).abs() <= 1e-12 * r.t.abs(), "tile {n}");
                                assert_eq!(f.point, r.point, "tile {n}, ray {k}");
                            }
                            (f, r) => panic!("tile {n}, ray {k}: after {f:?} vs robust {r:?}"),
                        }
                    }
                    let Some((sk, [t_start, t_end, z_lo, z_hi])) = tex.query(origin, dir, skip)
                    else {
                        break;
                    };
                    let robust = tex.robust_crossing(origin, dir, sk, t_start, t_end, z_lo, z_hi);
                    total += 1;
                    if let Some(fast) =
                        tex.fast_crossing(origin, dir, sk, t_start, t_end, z_lo, z_hi)
                    {
                        decided += 1;
                        match (fast.map(|h| tex.fast_hit(origin, dir, h)), robust) {
                            (None, None) => {}
                            (Some(f), Some(r)) => {
                                hits += 1;
                                assert_eq!(f.facet, r.facet, "tile {n}, ray {k}");
                                assert!((f.t - r.t).abs() <= 1e-12 * r.t.abs(), "tile {n}");
                                assert_eq!(f.point, r.point, "tile {n}, ray {k}");
                                assert_eq!(f.p_err, r.p_err, "tile {n}, ray {k}");
                                assert_eq!(f.normal, r.normal, "tile {n}, ray {k}");
                            }
                            (f, r) => panic!("tile {n}, ray {k}: fast {f:?} vs robust {r:?}"),
                        }
                    }
                    let Some(h) = robust else { break };
                    // Leave by reflection or refraction (Snell; total internal reflection
                    // from inside turns it back), as the tracer does.
                    let k_dot_n = dir.dot(h.normal);
                    let facing = if k_dot_n < 0.0 { h.normal } else { -h.normal };
                    let cos_i = k_dot_n.abs().min(1.0);
                    let eta = if above { 1.0 / n_si } else { n_si };
                    let sin2_t = eta * eta * (1.0 - cos_i * cos_i);
                    let new_dir = if rng.uniform() < 0.5 || sin2_t >= 1.0 {
                        dir - 2.0 * k_dot_n * h.normal
                    } else {
                        above = !above;
                        (eta * dir + (eta * cos_i - (1.0 - sin2_t).sqrt()) * facing).normalize()
                    };
                    if new_dir.dot(h.normal).abs() < 1e-9 {
                        break;
                    }
                    origin = offset_origin(h.point, h.p_err, h.normal, new_dir);
                    dir = new_dir;
                    skip = Some(h.facet);
                    from = Some(h);
                }
            }
            let declined = total - decided;
            // Rays refracted into the wafer mostly sink into the pyramid they cross.
            assert!(
                sank > after / 10,
                "tile {n}: {sank} of {after} queries from hit points sank at once"
            );
            assert!(
                hits > total / 4 && (declined as f64) < 0.01 * total as f64,
                "tile {n}: the fast path declined {declined} of {total} queries ({hits} hits)"
            );
        }
    }

    #[test]
    fn union_area_of_overlapping_squares() {
        let a = union_area(&[
            [0.0, 2.0, 0.0, 2.0],
            [1.0, 3.0, 1.0, 3.0],
            [5.0, 6.0, 0.0, 1.0],
        ]);
        assert!((a - (4.0 + 4.0 - 1.0 + 1.0)).abs() < 1e-12);
    }

    #[test]
    fn vertical_rays_land_on_the_envelope() {
        let tex = RandomPyramids::new(RandomPyramidsSpec::log_normal_height(1.0, 0.3, 7)).unwrap();
        let l = tex.tile_um();
        for k in 0..2000 {
            let x = (k as f64 * 0.618_033_988_7).fract() * l;
            let y = (k as f64 * 0.754_877_666_2).fract() * l;
            let h = tex
                .intersect(Vec3::new(x, y, 10.0), Vec3::NEG_Z, None)
                .unwrap();
            let (z, f) = tex.surface_at(x, y);
            assert!(
                (h.point.z - z).abs() < 1e-12,
                "({x}, {y}): {} vs {z}",
                h.point.z
            );
            let below = tex.intersect(Vec3::new(x, y, -1.0), Vec3::Z, None).unwrap();
            assert!((below.point.z - z).abs() < 1e-12);
            assert!(h.facet == f || (h.point.z - z).abs() < 1e-12);
        }
        assert!(
            tex.coverage() > 0.95 && tex.coverage() < 1.0,
            "coverage {}",
            tex.coverage()
        );
    }

    #[test]
    fn vertical_launches_agree_with_the_walk() {
        // The shortcut for vertical rays from above (`vertical_hit`) must answer as the walk
        // does (`walk_intersect`: fast path, else robust): same facet, point, error box and
        // normal, at random points, on cell walls and tile edges (exactly), and from
        // origins outside the home tile (wrapped).
        let specs = [
            RandomPyramidsSpec::log_normal_height(3.0, 0.35, 1),
            uniform_tile_with_angle_spread(0.8),
        ];
        for (n, spec) in specs.into_iter().enumerate() {
            let tex = RandomPyramids::new(spec).unwrap();
            let (l, (cell, cells)) = (tex.tile_um(), tex.grid());
            let z0 = tex.z_range_um()[1] + 0.5;
            let mut rng = Stream::new(31, n as u64, 0);
            let (mut ground, mut faces) = (0, 0);
            for k in 0..20_000 {
                let (u, v) = (rng.uniform(), rng.uniform());
                let (x, y) = match k % 4 {
                    0 | 1 => (u * l, v * l),
                    // on a cell wall (x) and a cell corner
                    2 => ((u * cells as f64).floor() * cell, v * l),
                    _ => (
                        (u * cells as f64).floor() * cell,
                        (v * cells as f64).floor() * cell,
                    ),
                };
                // every other ray from a neighbouring tile's copy of the point
                let shift = if k % 2 == 0 {
                    0.0
                } else {
                    l * (1.0 - 2.0 * (k % 3) as f64)
                };
                let o = Vec3::new(x + shift, y - shift, z0);
                let fast = tex.vertical_hit(o, Vec3::NEG_Z);
                let walk = tex.walk_intersect(o, Vec3::NEG_Z, None).unwrap();
                let case = format!("tile {n}, ray {k} at ({x}, {y})");
                assert_eq!(fast.facet, walk.facet, "{case}");
                assert_eq!(fast.point, walk.point, "{case}");
                assert_eq!(fast.p_err, walk.p_err, "{case}");
                assert_eq!(fast.normal, walk.normal, "{case}");
                assert!((fast.t - walk.t).abs() <= 1e-12 * walk.t, "{case}");
                if fast.facet.0 == GROUND_FACET {
                    ground += 1;
                } else {
                    faces += 1;
                }
            }
            // Both kinds of facet were met (the gapped tile shows its base plane).
            assert!(faces > 15_000, "tile {n}: {faces} pyramid faces");
            assert!(
                n == 0 || ground > 500,
                "tile {n}: {ground} on the base plane"
            );
        }
    }
}
