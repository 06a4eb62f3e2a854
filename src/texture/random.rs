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
//! and from below.
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
use crate::geometry::{FacetId, Hit, Vec3, floor_i64};
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
    #[inline]
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

    /// Up normal of face `k`.
    #[inline]
    fn normal(&self, k: u32) -> Vec3 {
        let (s, c) = (self.sin_a, self.cos_a);
        match k {
            0 => Vec3::new(s, 0.0, c),
            1 => Vec3::new(-s, 0.0, c),
            2 => Vec3::new(0.0, s, c),
            _ => Vec3::new(0.0, -s, c),
        }
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

/// One entry of a grid cell's list.
#[derive(Clone, Copy, Debug)]
struct Item {
    image: u32,
    /// Highest point of the image's cone over the cell, µm.
    top: f64,
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
    cell_start: Vec<u32>,
    items: Vec<Item>,
    /// Lower and upper bound of the surface height over each cell.
    cell_z: Vec<[f64; 2]>,
    z_max: f64,
    pad: f64,
    /// On-plane tolerance floor (see [`Gap::new`]), µm.
    tol: f64,
    /// Excursion depth tolerance (see [`super::cell_entry`]), µm.
    depth: f64,
    /// Steepest facet slope (tan α).
    max_tan: f64,
    /// The facet slope tan α shared by all pyramids, if there is no angle spread.
    common_tan: Option<f64>,
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
            cell_start: Vec::new(),
            items: Vec::new(),
            cell_z: Vec::new(),
            z_max: 0.0,
            pad: 0.0,
            tol: 0.0,
            depth: 0.0,
            max_tan: 0.0,
            common_tan: None,
            coverage: 0.0,
        };
        tex.build_images();
        tex.z_max = tex.images.iter().map(|im| im.height).fold(0.0, f64::max);
        tex.pad = PAD_REL * (tile + tex.z_max);
        tex.max_tan = tex.images.iter().map(|im| im.tan_a).fold(0.0, f64::max);
        let first_tan = tex.images.first().map(|im| im.tan_a);
        tex.common_tan = first_tan.filter(|&t| tex.images.iter().all(|im| im.tan_a == t));
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
                        });
                    }
                }
            }
        }
        let mut cell_start = Vec::with_capacity(lists.len() + 1);
        let mut items = Vec::new();
        let mut cell_z = Vec::with_capacity(lists.len());
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
            cell_start.push(items.len() as u32);
            items.extend_from_slice(list);
            cell_z.push([floor, top]);
        }
        cell_start.push(items.len() as u32);
        self.grid_n = n;
        self.cell = cell;
        self.cell_start = cell_start;
        self.items = items;
        self.cell_z = cell_z;
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

    #[inline]
    fn cell_items(&self, li: i64, lj: i64) -> (&[Item], [f64; 2]) {
        let idx = (lj * self.grid_n + li) as usize;
        let (a, b) = (
            self.cell_start[idx] as usize,
            self.cell_start[idx + 1] as usize,
        );
        (&self.items[a..b], self.cell_z[idx])
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
        let (z_lo, z_hi) = (-self.pad, self.z_max + self.pad);
        let (t_start, t_end) = slab_interval(o.z, d.z, z_lo, z_hi)?;
        let n_facets = 1 + 4 * self.images.len() as u32;
        let skip = skip.map(|f| f.0).filter(|&f| f < n_facets);
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
}
