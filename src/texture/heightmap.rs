//! Measured surfaces from grayscale height images (AFM, confocal or white-light
//! interferometry exports), tiled periodically and triangulated.
//!
//! Geometry: pixel (i, j) (column i, row j of the image) is the vertex (i·Δ, j·Δ) with height
//! z = grey/full_scale · height_scale (full_scale 255 or 65535), so grey 0 lies on the base
//! plane z = 0 (wafer thickness is measured from it) and y grows with the row index. The map
//! repeats with period (nx·Δ, ny·Δ): column nx is column 0 again. Each pixel quad
//! [i, i+1] × [j, j+1] is split along the same diagonal, from (i, j) to (i+1, j+1), into the
//! triangles 0: (i, j), (i+1, j), (i+1, j+1) and 1: (i, j), (i+1, j+1), (i, j+1).
//! Facet id of triangle k of quad (i, j): 2·(j·nx + i) + k, in the tile frame.
//!
//! Intersection: a 2D walk over the pixel quads along the ray. Within a quad the surface is
//! the two triangle planes combined by max (the fold along the diagonal is a valley) or min
//! (a ridge), so the crossing is found by the same parametric rule as the analytic textures
//! ([`crate::geometry::crossing`]): one root per plane, the walk's shared cell boundaries as
//! the only partition of the ray. This is watertight by construction at shared edges,
//! diagonals and vertices. (A per-triangle watertight test, S. Woop, C. Benthin & I. Wald,
//! JCGT 2(1), 65 (2013), is watertight among triangles that are all tested, but combined with
//! a cell walk it leaks where the walk, deciding with different arithmetic, skips the quad
//! whose triangle the edge test assigns the crossing to — at pixel corners and along grid
//! lines; `tests/robustness.rs` aims rays at exactly those points.)
//! Why a walk over the regular grid rather than a bounding volume hierarchy: the quad under a
//! point is found by arithmetic, the walk visits quads in the order the ray meets them so the
//! first crossing ends the search (no candidate sorting, no stack), and it needs no memory
//! beyond the heights, whereas a hierarchy over 2·nx·ny triangles costs tens of bytes per
//! triangle (≈ 2 GB at the size limit) and a logarithmic descent per ray. Quads whose height
//! range the ray's segment clears are skipped before any plane is set up.
//! Limits: at most [`MAX_SIDE_PX`] pixels per side. Heights are kept as 16-bit levels
//! (2 bytes per pixel, 32 MiB at 4096 × 4096) and decoding a 16-bit grey image needs as much
//! again, so a limit-size map loads in under ~70 MB and is shared read-only by all threads;
//! beyond that the memory of a many-threaded run on a workstation, not the tracer, becomes the
//! constraint (a 4096 px map at 0.1 µm already spans 410 µm, far more than one wafer
//! thickness, which is the lateral scale a periodic cell must represent).

use std::path::Path;

use image::ImageDecoder;

use super::{
    MAX_CELLS_PER_QUERY, PROBE_REL, Side, Symmetry, Texture, TextureError, cell_entry, clamp_into,
    side_at_origin, side_outside_slab, slab_interval, snapped_err,
};
use crate::geometry::crossing::{Gap, HeightPlane, Span};
use crate::geometry::grid::GridWalk;
use crate::geometry::{FacetId, Hit, Vec3, floor_i64, gamma};

/// Largest accepted image side, pixels.
pub const MAX_SIDE_PX: usize = 4096;

/// Relative padding of the slab and of the per-quad height test.
const PAD_REL: f64 = 1e-9;

/// A periodic triangulated height map.
#[derive(Clone, Debug)]
pub struct HeightMap {
    nx: usize,
    ny: usize,
    pixel: f64,
    height_scale: f64,
    full_scale: u16,
    z_per_level: f64,
    levels: Vec<u16>,
    z_min: f64,
    z_max: f64,
    pad: f64,
    /// On-plane tolerance floor (see [`Gap::new`]), µm.
    tol: f64,
    /// Excursion depth tolerance (see [`super::cell_entry`]), µm.
    depth: f64,
    source: String,
}

fn image_error(file: &Path, problem: String, expected: &str, fix: &str) -> TextureError {
    TextureError::Image {
        file: file.to_path_buf(),
        problem,
        expected: expected.to_string(),
        fix: fix.to_string(),
    }
}

/// The two triangle planes of one pixel quad, in the quad's frame ([0, Δ]², origin at vertex
/// (i, j)), and how they combine.
#[derive(Clone, Copy, Debug)]
struct Quad {
    /// Triangle 0 ((i, j), (i+1, j), (i+1, j+1); x ≥ y) and triangle 1 (x < y).
    planes: [HeightPlane; 2],
    /// True when the fold along the diagonal is a ridge (surface = min of the planes).
    ridge: bool,
    z_bottom: f64,
    z_top: f64,
}

impl Quad {
    /// The below-surface set along the ray as a union of spans (tags 0 and 1).
    #[inline]
    fn below(&self, g: &[Gap; 2]) -> [Span; 2] {
        if self.ridge {
            [g[0].below(0).and(g[1].below(1)), Span::EMPTY]
        } else {
            [g[0].below(0), g[1].below(1)]
        }
    }

    /// Surface height at quad coordinates and the plane giving it.
    #[inline]
    fn surface(&self, x: f64, y: f64) -> (f64, usize) {
        let (z0, z1) = (self.planes[0].z_at(x, y), self.planes[1].z_at(x, y));
        if (z0 <= z1) == self.ridge {
            (z0, 0)
        } else {
            (z1, 1)
        }
    }
}

impl HeightMap {
    /// Planes of quad (gi, gj) of the unwrapped grid (heights wrap periodically).
    #[inline]
    fn quad(&self, gi: i64, gj: i64) -> Quad {
        let z00 = self.vertex_height(gi, gj);
        let z10 = self.vertex_height(gi + 1, gj);
        let z11 = self.vertex_height(gi + 1, gj + 1);
        let z01 = self.vertex_height(gi, gj + 1);
        let inv = 1.0 / self.pixel;
        let planes = [
            HeightPlane {
                a: (z10 - z00) * inv,
                b: (z11 - z10) * inv,
                w: z00,
            },
            HeightPlane {
                a: (z11 - z01) * inv,
                b: (z01 - z00) * inv,
                w: z00,
            },
        ];
        // Plane 0 continued over triangle 1's corner (0, Δ) lies above z01: a ridge.
        let ridge = (z00 + z11) - (z10 + z01) >= 0.0;
        Quad {
            planes,
            ridge,
            z_bottom: z00.min(z10).min(z11).min(z01),
            z_top: z00.max(z10).max(z11).max(z01),
        }
    }

    /// Height map from grey levels, row-major (`levels[j·nx + i]`), each ≤ `full_scale`.
    pub fn from_levels(
        nx: usize,
        ny: usize,
        levels: Vec<u16>,
        full_scale: u16,
        pixel_um: f64,
        height_scale_um: f64,
    ) -> Result<Self, TextureError> {
        super::pyramids::check_length("pixel_um", pixel_um)?;
        super::pyramids::check_length("height_scale_um", height_scale_um)?;
        if !(2..=MAX_SIDE_PX).contains(&nx) || !(2..=MAX_SIDE_PX).contains(&ny) {
            return Err(TextureError::parameter(
                format!("height map of {nx} × {ny} pixels"),
                format!("2 to {MAX_SIDE_PX} pixels per side"),
                "resample the image",
            ));
        }
        if levels.len() != nx * ny || full_scale == 0 || levels.iter().any(|&v| v > full_scale) {
            return Err(TextureError::parameter(
                format!(
                    "{} grey levels for {nx} × {ny} pixels (full scale {full_scale})",
                    levels.len()
                ),
                "nx·ny levels, each ≤ full scale > 0",
                "pass one level per pixel",
            ));
        }
        let z_per_level = height_scale_um / full_scale as f64;
        let lo = *levels.iter().min().unwrap_or(&0);
        let hi = *levels.iter().max().unwrap_or(&0);
        let (z_min, z_max) = (lo as f64 * z_per_level, hi as f64 * z_per_level);
        // Steepest pixel-to-pixel slope, for the on-plane tolerance.
        let mut step = 0u16;
        for j in 0..ny {
            for i in 0..nx {
                let v = levels[j * nx + i];
                step = step.max(v.abs_diff(levels[j * nx + (i + 1) % nx]));
                step = step.max(v.abs_diff(levels[((j + 1) % ny) * nx + i]));
            }
        }
        let slope = step as f64 * z_per_level / pixel_um;
        let extent = pixel_um * (nx + ny) as f64;
        Ok(HeightMap {
            nx,
            ny,
            pixel: pixel_um,
            height_scale: height_scale_um,
            full_scale,
            z_per_level,
            levels,
            z_min,
            z_max,
            pad: PAD_REL * (height_scale_um + pixel_um * nx.max(ny) as f64),
            tol: super::on_plane_tol(z_max + 2.0 * slope * extent),
            depth: super::depth_tol(z_max + (1.0 + 4.0 * slope) * extent),
            source: format!("{nx} × {ny} grey levels"),
        })
    }

    /// Reads an 8- or 16-bit single-channel grayscale PNG or TIFF. Errors: unreadable file,
    /// unknown format, not grayscale (RGB, with alpha, float), larger than [`MAX_SIDE_PX`].
    pub fn from_image(
        path: &Path,
        pixel_um: f64,
        height_scale_um: f64,
    ) -> Result<Self, TextureError> {
        let reader = image::ImageReader::open(path)
            .map_err(|source| TextureError::Read {
                file: path.to_path_buf(),
                source,
            })?
            .with_guessed_format()
            .map_err(|source| TextureError::Read {
                file: path.to_path_buf(),
                source,
            })?;
        let decoder = reader.into_decoder().map_err(|e| {
            image_error(
                path,
                format!("cannot decode the image: {e}"),
                "a PNG or TIFF file",
                "export the height map as a 16-bit grayscale PNG or TIFF",
            )
        })?;
        let (w, h) = decoder.dimensions();
        if w as usize > MAX_SIDE_PX || h as usize > MAX_SIDE_PX || w < 2 || h < 2 {
            return Err(image_error(
                path,
                format!("image is {w} × {h} pixels"),
                &format!("2 to {MAX_SIDE_PX} pixels per side (memory: 2 bytes per pixel kept)"),
                "crop or resample the map; a few wafer thicknesses across is enough",
            ));
        }
        let color = decoder.color_type();
        let full_scale = match color {
            image::ColorType::L8 => 255,
            image::ColorType::L16 => 65535,
            other => {
                return Err(image_error(
                    path,
                    format!(
                        "image is not single-channel grayscale (colour type {other:?}, {} \
                         channels)",
                        other.channel_count()
                    ),
                    "an 8- or 16-bit grayscale image without alpha: one grey level per pixel \
                     encoding height",
                    "export the height channel alone as grayscale (16-bit keeps resolution)",
                ));
            }
        };
        let img = image::DynamicImage::from_decoder(decoder).map_err(|e| {
            image_error(
                path,
                format!("cannot decode the image: {e}"),
                "a valid PNG or TIFF file",
                "re-export the file",
            )
        })?;
        let levels: Vec<u16> = match img {
            image::DynamicImage::ImageLuma8(b) => b.into_raw().into_iter().map(u16::from).collect(),
            image::DynamicImage::ImageLuma16(b) => b.into_raw(),
            _ => {
                return Err(image_error(
                    path,
                    "decoded image is not grayscale".to_string(),
                    "an 8- or 16-bit grayscale image",
                    "export as grayscale",
                ));
            }
        };
        let mut map = Self::from_levels(
            w as usize,
            h as usize,
            levels,
            full_scale,
            pixel_um,
            height_scale_um,
        )?;
        map.source = format!(
            "{} ({w} × {h} px, {}-bit)",
            path.display(),
            if full_scale == 255 { 8 } else { 16 }
        );
        Ok(map)
    }

    /// Pixels along x and y.
    pub fn size_px(&self) -> (usize, usize) {
        (self.nx, self.ny)
    }

    /// Height of vertex (i, j), any integers (wrapped periodically), µm.
    #[inline]
    pub fn vertex_height(&self, i: i64, j: i64) -> f64 {
        let (i, j) = (
            i.rem_euclid(self.nx as i64) as usize,
            j.rem_euclid(self.ny as i64) as usize,
        );
        self.levels[j * self.nx + i] as f64 * self.z_per_level
    }

    /// Grey level of pixel (i, j) and the full-scale level (255 or 65535).
    pub fn level(&self, i: usize, j: usize) -> (u16, u16) {
        (self.levels[j * self.nx + i], self.full_scale)
    }
}

impl Texture for HeightMap {
    fn period_um(&self) -> [f64; 2] {
        [self.nx as f64 * self.pixel, self.ny as f64 * self.pixel]
    }

    fn z_range_um(&self) -> [f64; 2] {
        [self.z_min, self.z_max]
    }

    fn intersect(&self, o: Vec3, d: Vec3, skip: Option<FacetId>) -> Option<Hit> {
        let (z_lo, z_hi) = (self.z_min - self.pad, self.z_max + self.pad);
        let (t_start, t_end) = slab_interval(o.z, d.z, z_lo, z_hi)?;
        let (nx, ny) = (self.nx as i64, self.ny as i64);
        let n_facets = 2 * (nx * ny) as u32;
        let skip = skip.map(|f| f.0).filter(|&f| f < n_facets);
        // Quad (gi, gj) of the unwrapped grid: its two planes in the quad's frame, the origin
        // in that frame, and whether it is the unit-cell copy holding `skip`.
        let quad = |gi: i64, gj: i64| {
            let q = self.quad(gi, gj);
            let ol = Vec3::new(
                o.x - gi as f64 * self.pixel,
                o.y - gj as f64 * self.pixel,
                o.z,
            );
            let id0 = 2 * (gj.rem_euclid(ny) * nx + gi.rem_euclid(nx)) as u32;
            let in_cell = gi.div_euclid(nx) == 0 && gj.div_euclid(ny) == 0;
            let mut g = q.planes.map(|p| Gap::new(&p, ol, d, self.tol));
            for (k, gk) in g.iter_mut().enumerate() {
                if in_cell && skip == Some(id0 + k as u32) {
                    *gk = gk.on_plane();
                }
            }
            (q, g, id0)
        };

        // Side the ray starts on.
        let side = side_outside_slab(o.z, z_lo, z_hi)
            .or_else(|| {
                let f = skip?;
                let (i, j) = (((f / 2) as i64) % nx, ((f / 2) as i64) / nx);
                let p = self.quad(i, j).planes[(f % 2) as usize];
                Side::leaving(Gap::new(&p, Vec3::ZERO, d, 0.0).e)
            })
            .or_else(|| {
                let (gi, gj) = (floor_i64(o.x / self.pixel), floor_i64(o.y / self.pixel));
                let q = self.quad(gi, gj);
                let (x, y) = (o.x - gi as f64 * self.pixel, o.y - gj as f64 * self.pixel);
                let (z, k) = q.surface(x, y);
                // The owner of the position, by the diagonal rule (x ≥ y: triangle 0).
                let owner = q.planes[if x >= y { 0 } else { 1 }];
                let err = q.planes[k].z_err(x, y);
                super::side_from_surface(Vec3::new(x, y, o.z), d, z, err, self.tol, &owner)
            })
            .unwrap_or_else(|| {
                let (gi, gj) = (floor_i64(o.x / self.pixel), floor_i64(o.y / self.pixel));
                let (q, g, _) = quad(gi, gj);
                side_at_origin(&q.below(&g))
            });

        let (w, h) = (nx as f64 * self.pixel, ny as f64 * self.pixel);
        let mut first = true;
        for cell in GridWalk::new(o, d, self.pixel, t_start, t_end, MAX_CELLS_PER_QUERY) {
            let first_cell = std::mem::replace(&mut first, false);
            let q0 = self.quad(cell.i, cell.j);
            // Skip quads whose height range the ray's segment clears.
            let (za, zb) = (o.z + cell.t0 * d.z, o.z + cell.t1 * d.z);
            let clear = match side {
                Side::Above => za.min(zb) > q0.z_top + self.pad,
                Side::Below => za.max(zb) < q0.z_bottom - self.pad,
            };
            let entry = if clear {
                None
            } else {
                let (q, g, _) = quad(cell.i, cell.j);
                cell_entry(&q.below(&g), side, cell.t0, cell.t1, self.depth)
            };
            let Some(entry) = entry else { continue };
            // Hit point in the tile frame, snapped onto the quad's surface.
            let t = entry.t;
            let probe = |dt: f64| {
                let q = o + (t + dt) * d;
                let (gi, gj) = (floor_i64(q.x / self.pixel), floor_i64(q.y / self.pixel));
                let (qx, qy) = (q.x - gi as f64 * self.pixel, q.y - gj as f64 * self.pixel);
                ((gi, gj), self.quad(gi, gj).surface(qx, qy).1 as u32)
            };
            let ok = |c: (i64, i64), k: u32| {
                let in_cell = c.0.div_euclid(nx) == 0 && c.1.div_euclid(ny) == 0;
                let id = 2 * (c.1.rem_euclid(ny) * nx + c.0.rem_euclid(nx)) as u32 + k;
                let normal = self.quad(c.0, c.1).planes[k as usize].normal();
                !(in_cell && skip == Some(id)) && super::faces(side, d, normal)
            };
            let delta = PROBE_REL * self.pixel;
            let ((gi, gj), k) =
                super::crossed_facet(&entry, first_cell, (cell.i, cell.j), delta, probe, ok);
            let (q, _, id0) = quad(gi, gj);
            let p = o + t * d;
            let (xl, _) = clamp_into(p.x - gi as f64 * self.pixel, self.pixel);
            let (yl, _) = clamp_into(p.y - gj as f64 * self.pixel, self.pixel);
            let (z, active) = q.surface(xl, yl);
            let (ti, tj) = (gi.div_euclid(nx), gj.div_euclid(ny));
            let (x, _) = clamp_into(p.x - ti as f64 * w, w);
            let (y, _) = clamp_into(p.y - tj as f64 * h, h);
            let plane = q.planes[active];
            // The tile-frame x, y differ from the quad-frame ones by rounding of the shift.
            let shift_err = gamma(2) * (x.abs() + y.abs()) * (plane.a.abs() + plane.b.abs());
            let p_err = snapped_err(x, y, plane.z_err(xl, yl) + shift_err);
            let normal = q.planes[k as usize].normal();
            let facet = FacetId(id0 + k);
            return Some(Hit {
                t,
                point: Vec3::new(x, y, z),
                p_err,
                normal,
                facet,
            });
        }
        None
    }

    fn facet_tilts_deg(&self) -> Vec<f64> {
        let mut t = Vec::with_capacity(2 * self.nx * self.ny);
        for j in 0..self.ny as i64 {
            for i in 0..self.nx as i64 {
                for p in self.quad(i, j).planes {
                    t.push(p.a.hypot(p.b).atan().to_degrees());
                }
            }
        }
        t
    }

    fn symmetry(&self) -> Symmetry {
        Symmetry::None
    }

    fn describe(&self) -> String {
        format!(
            "height map {}: pixel {} µm, height scale {} µm per full scale, heights {:.4}–{:.4} µm",
            self.source, self.pixel, self.height_scale, self.z_min, self.z_max
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn vertical_rays_hit_the_triangulated_surface() {
        let (nx, ny) = (5usize, 4usize);
        let levels: Vec<u16> = (0..nx * ny).map(|k| ((k * 37) % 256) as u16).collect();
        let m = HeightMap::from_levels(nx, ny, levels, 255, 0.5, 2.0).unwrap();
        for k in 0..500 {
            let x = (k as f64 * 0.618_033_988_7).fract() * 2.5;
            let y = (k as f64 * 0.754_877_666_2).fract() * 2.0;
            let h = m
                .intersect(Vec3::new(x, y, 5.0), Vec3::NEG_Z, None)
                .unwrap();
            // Barycentric interpolation by hand on the diagonal split.
            let (i, j) = ((x / 0.5).floor() as i64, (y / 0.5).floor() as i64);
            let (u, v) = (x / 0.5 - i as f64, y / 0.5 - j as f64);
            let (z00, z10, z11, z01) = (
                m.vertex_height(i, j),
                m.vertex_height(i + 1, j),
                m.vertex_height(i + 1, j + 1),
                m.vertex_height(i, j + 1),
            );
            let z = if u >= v {
                z00 + u * (z10 - z00) + v * (z11 - z10)
            } else {
                z00 + v * (z01 - z00) + u * (z11 - z01)
            };
            assert!(
                (h.point.z - z).abs() < 1e-12,
                "({x}, {y}): {} vs {z}",
                h.point.z
            );
            assert!(h.normal.z > 0.0);
        }
    }
}
