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
//! Intersection: a 2D walk over the pixel quads along the ray, two watertight triangle tests
//! per quad ([`crate::geometry::triangle`], Woop, Benthin & Wald 2013), first quad with a hit
//! wins. Why a walk over the regular grid rather than a bounding volume hierarchy: the quad
//! under a point is found by arithmetic, the walk visits quads in the order the ray meets them
//! so the first hit ends the search (no candidate sorting, no stack), and it needs no memory
//! beyond the heights themselves, whereas a hierarchy over 2·nx·ny triangles costs tens of
//! bytes per triangle (≈ 2 GB at the size limit) and a logarithmic descent per ray.
//! Quads whose height range the ray's segment clears are skipped before any triangle test.
//!
//! Limits: at most [`MAX_SIDE_PX`] pixels per side. Heights are kept as 16-bit levels
//! (2 bytes per pixel, 32 MiB at 4096 × 4096) and decoding a 16-bit grey image needs as much
//! again, so a limit-size map loads in under ~70 MB and is shared read-only by all threads;
//! beyond that the memory of a many-threaded run on a workstation, not the tracer, becomes the
//! constraint (a 4096 px map at 0.1 µm already spans 410 µm, far more than one wafer
//! thickness, which is the lateral scale a periodic cell must represent).

use std::path::Path;

use image::ImageDecoder;

use super::{MAX_CELLS_PER_QUERY, Symmetry, Texture, TextureError, clamp_into, slab_interval};
use crate::geometry::grid::GridWalk;
use crate::geometry::triangle::RayShear;
use crate::geometry::{FacetId, Hit, Vec3, gamma};

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

impl HeightMap {
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
        let shear = RayShear::new(o, d);
        let (nx, ny) = (self.nx as i64, self.ny as i64);
        let (w, h) = (nx as f64 * self.pixel, ny as f64 * self.pixel);
        for cell in GridWalk::new(o, d, self.pixel, t_start, t_end, MAX_CELLS_PER_QUERY) {
            let (gi, gj) = (cell.i, cell.j);
            let z00 = self.vertex_height(gi, gj);
            let z10 = self.vertex_height(gi + 1, gj);
            let z11 = self.vertex_height(gi + 1, gj + 1);
            let z01 = self.vertex_height(gi, gj + 1);
            // Skip quads whose height range the ray's segment clears.
            let (za, zb) = (o.z + cell.t0 * d.z, o.z + cell.t1 * d.z);
            if za.max(zb) < z00.min(z10).min(z11).min(z01) - self.pad
                || za.min(zb) > z00.max(z10).max(z11).max(z01) + self.pad
            {
                continue;
            }
            // Vertices in the unwrapped frame: a shared vertex is the same f64 triple in
            // every quad that uses it, which the watertight test relies on.
            let (x0, x1) = (gi as f64 * self.pixel, (gi + 1) as f64 * self.pixel);
            let (y0, y1) = (gj as f64 * self.pixel, (gj + 1) as f64 * self.pixel);
            let p = [
                Vec3::new(x0, y0, z00),
                Vec3::new(x1, y0, z10),
                Vec3::new(x1, y1, z11),
                Vec3::new(x0, y1, z01),
            ];
            let v = p.map(|q| shear.vertex(q));
            let (ti, tj) = (gi.div_euclid(nx), gj.div_euclid(ny));
            let (li, lj) = (gi.rem_euclid(nx), gj.rem_euclid(ny));
            let id0 = 2 * (lj * nx + li) as u32;
            let skip_here = if ti == 0 && tj == 0 {
                skip.map(|f| f.0)
            } else {
                None
            };
            let mut best: Option<(f64, [f64; 3], u32)> = None;
            for (k, [a, b, c]) in [(0u32, [0usize, 1, 2]), (1, [0, 2, 3])] {
                if skip_here == Some(id0 + k) {
                    continue;
                }
                let t_max = best.map_or(f64::INFINITY, |b| b.0);
                if let Some(hit) = shear.hit(v[a], v[b], v[c], t_max) {
                    best = Some((hit.t, hit.b, k));
                }
            }
            let Some((t, bary, k)) = best else { continue };
            let tri = if k == 0 {
                [p[0], p[1], p[2]]
            } else {
                [p[0], p[2], p[3]]
            };
            let point = bary[0] * tri[0] + bary[1] * tri[1] + bary[2] * tri[2];
            let err = gamma(7)
                * ((bary[0] * tri[0]).abs() + (bary[1] * tri[1]).abs() + (bary[2] * tri[2]).abs());
            // Wrap into the tile.
            let (tx, ty) = (ti as f64 * w, tj as f64 * h);
            let (x, ex) = clamp_into(point.x - tx, w);
            let (y, ey) = clamp_into(point.y - ty, h);
            let p_err = Vec3::new(
                err.x + ex + gamma(1) * point.x.abs(),
                err.y + ey + gamma(1) * point.y.abs(),
                err.z,
            );
            let normal = (tri[1] - tri[0]).cross(tri[2] - tri[0]).normalize();
            return Some(Hit {
                t,
                point: Vec3::new(x, y, point.z),
                p_err,
                normal,
                facet: FacetId(id0 + k),
            });
        }
        None
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
