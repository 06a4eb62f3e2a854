//! Scene → RGBA pixels → PNG, with anti-aliasing.
//!
//! * Fills: non-zero winding rule on 5 sub-scanlines per pixel row, exact horizontal
//!   coverage of each span (common practice, no source).
//! * Strokes and discs: coverage from the distance of the pixel centre to the segment,
//!   `clamp(w/2 + 0.5 − d, 0, 1)`; a polyline's segments are merged with `max` before
//!   blending, so joints are not drawn twice (round caps and joins fall out of the distance).
//! * Blending: "source over" in sRGB values (T. Porter & T. Duff, Computer Graphics 18(3),
//!   253 (1984)); simple and the same as browsers do for SVG by default.

use image::ImageEncoder;
use image::codecs::png::PngEncoder;

use super::scene::{Color, Item, P, Scene, dash_polyline, text_strokes};

/// Sub-scanlines per pixel row for fills.
const SUB_ROWS: usize = 5;

/// A coverage mask over a pixel rectangle of the canvas.
struct Mask {
    x0: usize,
    y0: usize,
    w: usize,
    h: usize,
    cov: Vec<f32>,
}

impl Mask {
    /// A mask over the canvas pixels touched by the box [lo, hi] (None if off-canvas).
    fn over(lo: P, hi: P, cw: usize, ch: usize) -> Option<Mask> {
        if !(lo[0].is_finite() && lo[1].is_finite() && hi[0].is_finite() && hi[1].is_finite()) {
            return None;
        }
        let x0 = lo[0].floor().max(0.0);
        let y0 = lo[1].floor().max(0.0);
        let x1 = hi[0].ceil().min(cw as f64);
        let y1 = hi[1].ceil().min(ch as f64);
        if x1 <= x0 || y1 <= y0 {
            return None;
        }
        let (w, h) = ((x1 - x0) as usize, (y1 - y0) as usize);
        Some(Mask {
            x0: x0 as usize,
            y0: y0 as usize,
            w,
            h,
            cov: vec![0.0; w * h],
        })
    }
}

/// Opaque RGB canvas, channels in [0, 1].
struct Canvas {
    w: usize,
    h: usize,
    px: Vec<[f32; 3]>,
}

impl Canvas {
    fn new(w: usize, h: usize, bg: Color) -> Self {
        let c = [
            f32::from(bg.r) / 255.0,
            f32::from(bg.g) / 255.0,
            f32::from(bg.b) / 255.0,
        ];
        Self {
            w,
            h,
            px: vec![c; w * h],
        }
    }

    fn blend(&mut self, m: &Mask, color: Color) {
        let alpha = color.opacity() as f32;
        let c = [
            f32::from(color.r) / 255.0,
            f32::from(color.g) / 255.0,
            f32::from(color.b) / 255.0,
        ];
        for my in 0..m.h {
            let row = (m.y0 + my) * self.w + m.x0;
            for mx in 0..m.w {
                let a = m.cov[my * m.w + mx].min(1.0) * alpha;
                if a > 0.0 {
                    let p = &mut self.px[row + mx];
                    for k in 0..3 {
                        p[k] += (c[k] - p[k]) * a;
                    }
                }
            }
        }
    }

    /// Coverage of filled polygons (non-zero rule).
    fn fill_mask(&self, polys: &[&[P]]) -> Option<Mask> {
        let (lo, hi) = bounds(polys.iter().flat_map(|p| p.iter()), 0.0)?;
        let mut m = Mask::over(lo, hi, self.w, self.h)?;
        // Edges as (xa, ya, xb, yb, winding) with ya < yb, in mask coordinates.
        let mut edges: Vec<(f64, f64, f64, f64, i32)> = Vec::new();
        for poly in polys {
            for i in 0..poly.len() {
                let (a, b) = (poly[i], poly[(i + 1) % poly.len()]);
                if a[1] == b[1] {
                    continue;
                }
                let (ax, ay) = (a[0] - m.x0 as f64, a[1] - m.y0 as f64);
                let (bx, by) = (b[0] - m.x0 as f64, b[1] - m.y0 as f64);
                if ay < by {
                    edges.push((ax, ay, bx, by, 1));
                } else {
                    edges.push((bx, by, ax, ay, -1));
                }
            }
        }
        let weight = 1.0 / SUB_ROWS as f32;
        let mut xs: Vec<(f64, i32)> = Vec::new();
        for y in 0..m.h {
            let row = &mut m.cov[y * m.w..(y + 1) * m.w];
            for s in 0..SUB_ROWS {
                let sy = y as f64 + (s as f64 + 0.5) / SUB_ROWS as f64;
                xs.clear();
                for &(xa, ya, xb, yb, wnd) in &edges {
                    if sy >= ya && sy < yb {
                        xs.push((xa + (sy - ya) * (xb - xa) / (yb - ya), wnd));
                    }
                }
                xs.sort_by(|a, b| a.0.total_cmp(&b.0));
                let mut winding = 0;
                for k in 0..xs.len() {
                    let before = winding;
                    winding += xs[k].1;
                    if before == 0 && winding != 0 {
                        // Span starts here; find where the winding returns to zero.
                        let mut w2 = winding;
                        let mut j = k + 1;
                        while j < xs.len() {
                            w2 += xs[j].1;
                            if w2 == 0 {
                                break;
                            }
                            j += 1;
                        }
                        let xb = if j < xs.len() { xs[j].0 } else { m.w as f64 };
                        add_span(row, xs[k].0, xb, weight);
                    }
                }
            }
        }
        Some(m)
    }

    /// Coverage of round-capped strokes of width `width` along polylines.
    fn stroke_mask(&self, lines: &[&[P]], width: f64) -> Option<Mask> {
        let r = (width / 2.0).max(0.5);
        let scale = width.min(1.0) as f32; // thin lines: 1 px wide, fainter
        let (lo, hi) = bounds(lines.iter().flat_map(|p| p.iter()), r + 1.0)?;
        let mut m = Mask::over(lo, hi, self.w, self.h)?;
        for line in lines {
            if line.len() == 1 {
                disc_into(&mut m, line[0], r, scale);
            }
            for seg in line.windows(2) {
                capsule_into(&mut m, seg[0], seg[1], r, scale);
            }
        }
        Some(m)
    }

    fn disc_mask(&self, c: P, r: f64) -> Option<Mask> {
        let mut m = Mask::over(
            [c[0] - r - 1.0, c[1] - r - 1.0],
            [c[0] + r + 1.0, c[1] + r + 1.0],
            self.w,
            self.h,
        )?;
        disc_into(&mut m, c, r, 1.0);
        Some(m)
    }
}

fn bounds<'a>(pts: impl Iterator<Item = &'a P>, pad: f64) -> Option<(P, P)> {
    let mut lo = [f64::INFINITY; 2];
    let mut hi = [f64::NEG_INFINITY; 2];
    for p in pts {
        if p[0].is_finite() && p[1].is_finite() {
            for k in 0..2 {
                lo[k] = lo[k].min(p[k]);
                hi[k] = hi[k].max(p[k]);
            }
        }
    }
    if lo[0] > hi[0] {
        return None;
    }
    Some(([lo[0] - pad, lo[1] - pad], [hi[0] + pad, hi[1] + pad]))
}

/// Adds `weight` × the covered fraction of each pixel in the span [xa, xb) of one row.
fn add_span(row: &mut [f32], xa: f64, xb: f64, weight: f32) {
    let w = row.len() as f64;
    let (xa, xb) = (xa.clamp(0.0, w), xb.clamp(0.0, w));
    if xb <= xa {
        return;
    }
    let (ia, ib) = (xa.floor() as usize, xb.floor() as usize);
    if ia == ib {
        row[ia] += (xb - xa) as f32 * weight;
        return;
    }
    row[ia] += (ia as f64 + 1.0 - xa) as f32 * weight;
    for c in &mut row[ia + 1..ib] {
        *c += weight;
    }
    if ib < row.len() {
        row[ib] += (xb - ib as f64) as f32 * weight;
    }
}

fn capsule_into(m: &mut Mask, a: P, b: P, r: f64, scale: f32) {
    let (ax, ay) = (a[0] - m.x0 as f64, a[1] - m.y0 as f64);
    let (bx, by) = (b[0] - m.x0 as f64, b[1] - m.y0 as f64);
    if !(ax.is_finite() && ay.is_finite() && bx.is_finite() && by.is_finite()) {
        return;
    }
    let pad = r + 1.0;
    let xs = (ax.min(bx) - pad).floor().max(0.0) as usize;
    let xe = ((ax.max(bx) + pad).ceil().max(0.0) as usize).min(m.w);
    let ys = (ay.min(by) - pad).floor().max(0.0) as usize;
    let ye = ((ay.max(by) + pad).ceil().max(0.0) as usize).min(m.h);
    let (dx, dy) = (bx - ax, by - ay);
    let len2 = dx * dx + dy * dy;
    for y in ys..ye {
        let py = y as f64 + 0.5;
        for x in xs..xe {
            let px = x as f64 + 0.5;
            let t = if len2 > 0.0 {
                (((px - ax) * dx + (py - ay) * dy) / len2).clamp(0.0, 1.0)
            } else {
                0.0
            };
            let (qx, qy) = (ax + t * dx - px, ay + t * dy - py);
            let d = (qx * qx + qy * qy).sqrt();
            let c = ((r + 0.5 - d).clamp(0.0, 1.0)) as f32 * scale;
            let cell = &mut m.cov[y * m.w + x];
            if c > *cell {
                *cell = c;
            }
        }
    }
}

fn disc_into(m: &mut Mask, c: P, r: f64, scale: f32) {
    capsule_into(m, c, c, r, scale);
}

fn max_merge(into: &mut Mask, other: &Mask) {
    // Both masks come from the same shape; `other` may have a larger box.
    for y in 0..other.h {
        for x in 0..other.w {
            let (gx, gy) = (other.x0 + x, other.y0 + y);
            if gx >= into.x0 && gy >= into.y0 && gx < into.x0 + into.w && gy < into.y0 + into.h {
                let i = (gy - into.y0) * into.w + (gx - into.x0);
                into.cov[i] = into.cov[i].max(other.cov[y * other.w + x]);
            }
        }
    }
}

/// Renders the scene into RGBA bytes (row-major, 4 bytes per pixel, opaque).
pub(crate) fn render_rgba(scene: &Scene) -> (u32, u32, Vec<u8>) {
    let (w, h) = (scene.width as usize, scene.height as usize);
    let mut cv = Canvas::new(w, h, scene.background);
    for item in &scene.items {
        match item {
            Item::Stroke {
                pts,
                color,
                width,
                dash,
            } => {
                let pieces = match dash {
                    Some((on, off)) => dash_polyline(pts, *on, *off),
                    None => vec![pts.clone()],
                };
                let refs: Vec<&[P]> = pieces.iter().map(|p| p.as_slice()).collect();
                if let Some(m) = cv.stroke_mask(&refs, *width) {
                    cv.blend(&m, *color);
                }
            }
            Item::Fill { pts, color, edge } => {
                if let Some(mut m) = cv.fill_mask(&[pts.as_slice()]) {
                    if *edge > 0.0 {
                        let mut closed = pts.clone();
                        closed.push(pts[0]);
                        if let Some(e) = cv.stroke_mask(&[closed.as_slice()], *edge) {
                            // Grow the fill mask to the stroke's box, then merge.
                            let mut big = Mask {
                                x0: e.x0,
                                y0: e.y0,
                                w: e.w,
                                h: e.h,
                                cov: vec![0.0; e.w * e.h],
                            };
                            max_merge(&mut big, &m);
                            max_merge(&mut big, &e);
                            m = big;
                        }
                    }
                    cv.blend(&m, *color);
                }
            }
            Item::Circle { c, r, color } => {
                if let Some(m) = cv.disc_mask(*c, *r) {
                    cv.blend(&m, *color);
                }
            }
            Item::Text { color, .. } => {
                let (strokes, width) = text_strokes(item);
                let refs: Vec<&[P]> = strokes.iter().map(|p| p.as_slice()).collect();
                if let Some(m) = cv.stroke_mask(&refs, width) {
                    cv.blend(&m, *color);
                }
            }
        }
    }
    let mut bytes = Vec::with_capacity(w * h * 4);
    for p in &cv.px {
        for c in p {
            bytes.push((c.clamp(0.0, 1.0) * 255.0).round() as u8);
        }
        bytes.push(255);
    }
    (w as u32, h as u32, bytes)
}

/// Renders the scene as PNG file bytes.
pub(crate) fn render_png(scene: &Scene) -> Vec<u8> {
    let (w, h, rgba) = render_rgba(scene);
    let mut out = Vec::new();
    PngEncoder::new(&mut out)
        .write_image(&rgba, w, h, image::ExtendedColorType::Rgba8)
        .expect("PNG encoding of a well-sized RGBA buffer into memory cannot fail");
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::plot::scene::WHITE;

    #[test]
    fn a_filled_square_covers_its_area() {
        let cv = Canvas::new(20, 20, WHITE);
        let sq = [[2.5, 2.5], [12.5, 2.5], [12.5, 12.5], [2.5, 12.5]];
        let m = cv.fill_mask(&[&sq]).unwrap();
        let total: f32 = m.cov.iter().sum();
        assert!((total - 100.0).abs() < 0.5, "area {total}");
    }

    #[test]
    fn a_stroke_covers_length_times_width() {
        let cv = Canvas::new(100, 20, WHITE);
        let m = cv
            .stroke_mask(&[&[[10.0, 10.0], [90.0, 10.0]]], 2.0)
            .unwrap();
        let total: f32 = m.cov.iter().sum();
        // 80 × 2 plus two half-disc caps of radius 1 (π).
        let expected = 160.0 + std::f32::consts::PI;
        assert!(
            (total - expected).abs() < 3.0,
            "area {total}, expected {expected}"
        );
    }
}
