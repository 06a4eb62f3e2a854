//! The display list every plot is drawn into, in pixels (origin top left, y down), and the
//! geometry helpers both back ends share (clipping, dashes, text placement).
//!
//! Invariant: the SVG and PNG back ends draw exactly these items, so both files show the
//! same picture. Data geometry is clipped here, so neither back end needs clip paths.

use super::font;

/// A point in pixels.
pub(crate) type P = [f64; 2];

/// An sRGB colour with opacity.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Color {
    /// Red, 0–255.
    pub r: u8,
    /// Green, 0–255.
    pub g: u8,
    /// Blue, 0–255.
    pub b: u8,
    /// Opacity, 0 (transparent) – 255 (opaque).
    pub a: u8,
}

impl Color {
    /// An opaque colour.
    pub const fn rgb(r: u8, g: u8, b: u8) -> Self {
        Self { r, g, b, a: 255 }
    }

    /// The same colour with opacity `alpha` in [0, 1] (clamped).
    pub fn with_alpha(self, alpha: f64) -> Self {
        Self {
            a: (alpha.clamp(0.0, 1.0) * 255.0).round() as u8,
            ..self
        }
    }

    /// `#rrggbb` (opacity not included).
    pub fn hex(&self) -> String {
        format!("#{:02x}{:02x}{:02x}", self.r, self.g, self.b)
    }

    /// Opacity in [0, 1].
    pub fn opacity(&self) -> f64 {
        f64::from(self.a) / 255.0
    }

    /// Linear interpolation in sRGB between `self` (t = 0) and `other` (t = 1).
    pub(crate) fn lerp(self, other: Color, t: f64) -> Color {
        let t = t.clamp(0.0, 1.0);
        let m = |a: u8, b: u8| (f64::from(a) + (f64::from(b) - f64::from(a)) * t).round() as u8;
        Color {
            r: m(self.r, other.r),
            g: m(self.g, other.g),
            b: m(self.b, other.b),
            a: m(self.a, other.a),
        }
    }
}

pub(crate) const WHITE: Color = Color::rgb(255, 255, 255);
pub(crate) const INK: Color = Color::rgb(0x22, 0x22, 0x22);
pub(crate) const AXIS: Color = Color::rgb(0x55, 0x55, 0x55);
pub(crate) const GRID: Color = Color::rgb(0xe3, 0xe3, 0xe3);
pub(crate) const GRID_MINOR: Color = Color::rgb(0xf1, 0xf1, 0xf1);

/// Horizontal anchor of a text item.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Anchor {
    Start,
    Middle,
    End,
}

/// Vertical anchor of a text item.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum VAlign {
    /// `y` is the baseline.
    Baseline,
    /// `y` is half the cap height above the baseline.
    Middle,
    /// `y` is the top of the capitals.
    Top,
}

/// One drawing instruction.
#[derive(Debug, Clone)]
pub(crate) enum Item {
    /// An open polyline, round caps and joins; `dash` = (on, off) lengths in px.
    Stroke {
        pts: Vec<P>,
        color: Color,
        width: f64,
        dash: Option<(f64, f64)>,
    },
    /// A filled polygon (non-zero rule); `edge` > 0 also strokes its outline in the same
    /// colour to close hairline seams between neighbouring cells.
    Fill {
        pts: Vec<P>,
        color: Color,
        edge: f64,
    },
    /// A filled disc.
    Circle { c: P, r: f64, color: Color },
    /// One line of text drawn with the stroke font.
    Text {
        at: P,
        size: f64,
        anchor: Anchor,
        valign: VAlign,
        /// Rotated 90° anticlockwise (reads bottom to top) about `at`.
        vertical: bool,
        color: Color,
        weight: f64,
        text: String,
    },
}

/// A picture: size, background and items in drawing order.
#[derive(Debug, Clone)]
pub(crate) struct Scene {
    pub width: f64,
    pub height: f64,
    pub background: Color,
    /// Accessible name (SVG `<title>`).
    pub title: String,
    pub items: Vec<Item>,
}

impl Scene {
    pub fn new(width: u32, height: u32, title: &str) -> Self {
        Self {
            width: f64::from(width),
            height: f64::from(height),
            background: WHITE,
            title: title.to_string(),
            items: Vec::new(),
        }
    }

    pub fn stroke(&mut self, pts: Vec<P>, color: Color, width: f64) {
        if pts.len() >= 2 {
            self.items.push(Item::Stroke {
                pts,
                color,
                width,
                dash: None,
            });
        }
    }

    pub fn dashed(&mut self, pts: Vec<P>, color: Color, width: f64, dash: (f64, f64)) {
        if pts.len() >= 2 {
            self.items.push(Item::Stroke {
                pts,
                color,
                width,
                dash: Some(dash),
            });
        }
    }

    pub fn line(&mut self, a: P, b: P, color: Color, width: f64) {
        self.stroke(vec![a, b], color, width);
    }

    pub fn fill(&mut self, pts: Vec<P>, color: Color) {
        if pts.len() >= 3 {
            self.items.push(Item::Fill {
                pts,
                color,
                edge: 0.0,
            });
        }
    }

    pub fn fill_seamless(&mut self, pts: Vec<P>, color: Color, edge: f64) {
        if pts.len() >= 3 {
            self.items.push(Item::Fill { pts, color, edge });
        }
    }

    pub fn rect(&mut self, x: f64, y: f64, w: f64, h: f64, color: Color) {
        self.fill(rect_pts(x, y, w, h), color);
    }

    pub fn rect_outline(&mut self, x: f64, y: f64, w: f64, h: f64, color: Color, width: f64) {
        let mut pts = rect_pts(x, y, w, h);
        pts.push(pts[0]);
        self.stroke(pts, color, width);
    }

    pub fn circle(&mut self, c: P, r: f64, color: Color) {
        self.items.push(Item::Circle { c, r, color });
    }

    #[allow(clippy::too_many_arguments)]
    pub fn text(
        &mut self,
        at: P,
        size: f64,
        anchor: Anchor,
        valign: VAlign,
        vertical: bool,
        color: Color,
        weight: f64,
        text: &str,
    ) {
        if !text.is_empty() {
            self.items.push(Item::Text {
                at,
                size,
                anchor,
                valign,
                vertical,
                color,
                weight,
                text: text.to_string(),
            });
        }
    }
}

pub(crate) fn rect_pts(x: f64, y: f64, w: f64, h: f64) -> Vec<P> {
    vec![[x, y], [x + w, y], [x + w, y + h], [x, y + h]]
}

/// The strokes of a text item in absolute pixels, and their stroke width.
pub(crate) fn text_strokes(item: &Item) -> (Vec<Vec<P>>, f64) {
    let Item::Text {
        at,
        size,
        anchor,
        valign,
        vertical,
        weight,
        text,
        ..
    } = item
    else {
        return (Vec::new(), 0.0);
    };
    let shape = font::shape_text(text, *size);
    let dx = match anchor {
        Anchor::Start => 0.0,
        Anchor::Middle => -shape.width / 2.0,
        Anchor::End => -shape.width,
    };
    let dy = match valign {
        VAlign::Baseline => 0.0,
        VAlign::Middle => font::cap_height(*size) / 2.0,
        VAlign::Top => font::cap_height(*size),
    };
    let strokes = shape
        .strokes
        .into_iter()
        .map(|s| {
            s.into_iter()
                .map(|p| {
                    let (lx, ly) = (p[0] + dx, p[1] + dy);
                    if *vertical {
                        // Rotate 90° anticlockwise on screen: (x, y) → (y, −x).
                        [at[0] + ly, at[1] - lx]
                    } else {
                        [at[0] + lx, at[1] + ly]
                    }
                })
                .collect()
        })
        .collect();
    (strokes, font::stroke_width(*size, *weight))
}

/// An axis-aligned rectangle: x0 ≤ x1, y0 ≤ y1.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Rect {
    pub x0: f64,
    pub y0: f64,
    pub x1: f64,
    pub y1: f64,
}

impl Rect {
    pub fn w(&self) -> f64 {
        self.x1 - self.x0
    }
    pub fn h(&self) -> f64 {
        self.y1 - self.y0
    }
    pub fn contains(&self, p: P) -> bool {
        p[0] >= self.x0 && p[0] <= self.x1 && p[1] >= self.y0 && p[1] <= self.y1
    }
}

/// Clips a polyline to `r`; returns the visible pieces. Non-finite points break the line.
/// Segment clipping after Liang & Barsky, ACM Trans. Graphics 3(1), 1 (1984).
pub(crate) fn clip_polyline(pts: &[P], r: Rect) -> Vec<Vec<P>> {
    let mut out: Vec<Vec<P>> = Vec::new();
    let mut cur: Vec<P> = Vec::new();
    for w in pts.windows(2) {
        let (a, b) = (w[0], w[1]);
        if !(a[0].is_finite() && a[1].is_finite() && b[0].is_finite() && b[1].is_finite()) {
            if cur.len() >= 2 {
                out.push(std::mem::take(&mut cur));
            }
            cur.clear();
            continue;
        }
        match clip_segment(a, b, r) {
            Some((p, q, starts_inside, ends_inside)) => {
                if !starts_inside || cur.is_empty() {
                    if cur.len() >= 2 {
                        out.push(std::mem::take(&mut cur));
                    }
                    cur.clear();
                    cur.push(p);
                }
                cur.push(q);
                if !ends_inside {
                    if cur.len() >= 2 {
                        out.push(std::mem::take(&mut cur));
                    }
                    cur.clear();
                }
            }
            None => {
                if cur.len() >= 2 {
                    out.push(std::mem::take(&mut cur));
                }
                cur.clear();
            }
        }
    }
    if cur.len() >= 2 {
        out.push(cur);
    }
    out
}

/// Liang–Barsky: the visible part of segment a→b and whether a and b themselves are kept.
fn clip_segment(a: P, b: P, r: Rect) -> Option<(P, P, bool, bool)> {
    let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
    let (mut t0, mut t1) = (0.0_f64, 1.0_f64);
    for (p, q) in [
        (-dx, a[0] - r.x0),
        (dx, r.x1 - a[0]),
        (-dy, a[1] - r.y0),
        (dy, r.y1 - a[1]),
    ] {
        if p == 0.0 {
            if q < 0.0 {
                return None;
            }
        } else {
            let t = q / p;
            if p < 0.0 {
                t0 = t0.max(t);
            } else {
                t1 = t1.min(t);
            }
        }
    }
    if t0 > t1 {
        return None;
    }
    let at = |t: f64| [a[0] + t * dx, a[1] + t * dy];
    Some((at(t0), at(t1), t0 == 0.0, t1 == 1.0))
}

/// Clips a polygon to `r` (Sutherland & Hodgman, Comm. ACM 17(1), 32 (1974)).
/// Non-finite vertices are dropped first.
pub(crate) fn clip_polygon(pts: &[P], r: Rect) -> Vec<P> {
    let mut poly: Vec<P> = pts
        .iter()
        .copied()
        .filter(|p| p[0].is_finite() && p[1].is_finite())
        .collect();
    // (inside test, intersection with the boundary) for the four edges.
    type Edge = (fn(P, Rect) -> bool, fn(P, P, Rect) -> P);
    let edges: [Edge; 4] = [
        (|p, r| p[0] >= r.x0, |a, b, r| cut_x(a, b, r.x0)),
        (|p, r| p[0] <= r.x1, |a, b, r| cut_x(a, b, r.x1)),
        (|p, r| p[1] >= r.y0, |a, b, r| cut_y(a, b, r.y0)),
        (|p, r| p[1] <= r.y1, |a, b, r| cut_y(a, b, r.y1)),
    ];
    for (inside, cut) in edges {
        if poly.is_empty() {
            break;
        }
        let input = std::mem::take(&mut poly);
        let mut prev = input[input.len() - 1];
        for &p in &input {
            match (inside(p, r), inside(prev, r)) {
                (true, true) => poly.push(p),
                (true, false) => {
                    poly.push(cut(prev, p, r));
                    poly.push(p);
                }
                (false, true) => poly.push(cut(prev, p, r)),
                (false, false) => {}
            }
            prev = p;
        }
    }
    poly
}

fn cut_x(a: P, b: P, x: f64) -> P {
    let t = (x - a[0]) / (b[0] - a[0]);
    [x, a[1] + t * (b[1] - a[1])]
}

fn cut_y(a: P, b: P, y: f64) -> P {
    let t = (y - a[1]) / (b[1] - a[1]);
    [a[0] + t * (b[0] - a[0]), y]
}

/// Splits a polyline into dashes of length `on` separated by gaps `off`, the pattern running
/// on across vertices (as SVG `stroke-dasharray` does).
pub(crate) fn dash_polyline(pts: &[P], on: f64, off: f64) -> Vec<Vec<P>> {
    let mut out = Vec::new();
    if on <= 0.0 || off < 0.0 {
        return vec![pts.to_vec()];
    }
    let mut drawing = true;
    let mut left = on; // length left in the current dash or gap
    let mut cur: Vec<P> = vec![pts[0]];
    for w in pts.windows(2) {
        let (mut a, b) = (w[0], w[1]);
        let mut seg = ((b[0] - a[0]).powi(2) + (b[1] - a[1]).powi(2)).sqrt();
        while seg > left {
            let t = left / seg;
            let p = [a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])];
            if drawing {
                cur.push(p);
                out.push(std::mem::take(&mut cur));
            } else {
                cur = vec![p];
            }
            seg -= left;
            a = p;
            drawing = !drawing;
            left = if drawing { on } else { off };
        }
        left -= seg;
        if drawing {
            cur.push(b);
        }
    }
    if drawing && cur.len() >= 2 {
        out.push(cur);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    const R: Rect = Rect {
        x0: 0.0,
        y0: 0.0,
        x1: 10.0,
        y1: 10.0,
    };

    #[test]
    fn polyline_leaving_and_reentering_splits_in_two() {
        let pieces = clip_polyline(&[[1.0, 5.0], [15.0, 5.0], [15.0, 8.0], [5.0, 8.0]], R);
        assert_eq!(pieces.len(), 2);
        assert_eq!(pieces[0], vec![[1.0, 5.0], [10.0, 5.0]]);
        assert_eq!(pieces[1], vec![[10.0, 8.0], [5.0, 8.0]]);
    }

    #[test]
    fn nan_breaks_a_polyline() {
        let pieces = clip_polyline(
            &[
                [1.0, 1.0],
                [2.0, 2.0],
                [f64::NAN, 3.0],
                [4.0, 4.0],
                [5.0, 5.0],
            ],
            R,
        );
        assert_eq!(pieces.len(), 2);
    }

    #[test]
    fn polygon_clipped_to_a_square_has_its_area() {
        let tri = clip_polygon(
            &[[-10.0, -10.0], [20.0, -10.0], [20.0, 20.0], [-10.0, 20.0]],
            R,
        );
        let area: f64 = (0..tri.len())
            .map(|i| {
                let (a, b) = (tri[i], tri[(i + 1) % tri.len()]);
                a[0] * b[1] - b[0] * a[1]
            })
            .sum::<f64>()
            / 2.0;
        assert!((area.abs() - 100.0).abs() < 1e-9);
    }

    #[test]
    fn dashes_have_the_requested_lengths() {
        let d = dash_polyline(&[[0.0, 0.0], [10.0, 0.0], [10.0, 10.0]], 3.0, 2.0);
        // 20 px of line: dashes at 0–3, 5–8, 10–13 (across the corner), 15–18.
        assert_eq!(d.len(), 4);
        assert_eq!(d[2], vec![[10.0, 0.0], [10.0, 3.0]]);
        assert_eq!(d[3], vec![[10.0, 5.0], [10.0, 8.0]]);
    }
}
