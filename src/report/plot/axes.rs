//! Shared pieces of the Cartesian plots: sizes that scale with the picture, axes with nice
//! ticks (linear or logarithmic), the frame (grid, ticks, labels, title) and the legend.

use super::font;
use super::scene::{AXIS, Anchor, Color, GRID, GRID_MINOR, INK, P, Rect, Scene, VAlign, WHITE};
use super::ticks::{self, decade_label, tick_labels};

/// Sizes in px for one picture.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Style {
    /// Base font size (axis labels, legend).
    pub fs: f64,
    /// Tick label font size.
    pub tick_fs: f64,
    /// Title font size.
    pub title_fs: f64,
    /// Data line width.
    pub lw: f64,
    /// General spacing.
    pub pad: f64,
    /// Tick mark length.
    pub tick_len: f64,
}

impl Style {
    pub fn for_size(w: f64, h: f64) -> Style {
        let fs = (w / 55.0).min(h / 30.0).clamp(9.0, 18.0);
        Style {
            fs,
            tick_fs: 0.88 * fs,
            title_fs: 1.15 * fs,
            lw: (fs * 0.15).max(1.5),
            pad: 0.6 * fs,
            tick_len: 0.35 * fs,
        }
    }
}

/// One axis: range, scale, ticks and labels.
#[derive(Debug, Clone)]
pub(crate) struct Axis {
    pub lo: f64,
    pub hi: f64,
    pub log: bool,
    pub ticks: Vec<f64>,
    pub labels: Vec<String>,
    pub minor: Vec<f64>,
}

impl Axis {
    /// Linear axis; `fixed` keeps the range, otherwise it is widened to whole steps.
    pub fn linear(lo: f64, hi: f64, fixed: bool, target: usize) -> Axis {
        let t = if fixed {
            ticks::ticks_within(lo, hi, target)
        } else {
            ticks::nice_ticks(lo, hi, target)
        };
        let labels = tick_labels(&t.values, t.step);
        Axis {
            lo: t.range.0,
            hi: t.range.1,
            log: false,
            ticks: t.values,
            labels,
            minor: Vec::new(),
        }
    }

    /// Logarithmic axis over positive `lo < hi`; `fixed` keeps the range, otherwise it is
    /// widened to whole decades. Under one decade, linear nice ticks are placed on it.
    pub fn log(lo: f64, hi: f64, fixed: bool, target: usize) -> Axis {
        let (mut lo, mut hi) = if lo > 0.0 && hi > lo && hi.is_finite() {
            (lo, hi)
        } else if hi > 0.0 && hi.is_finite() {
            (hi / 10.0, hi)
        } else {
            (0.1, 1.0)
        };
        if !fixed {
            lo = 10f64.powf(lo.log10().floor());
            hi = 10f64.powf(hi.log10().ceil());
            if hi <= lo {
                hi = lo * 10.0;
            }
        }
        let k0 = (lo.log10() - 1e-9).ceil() as i32;
        let k1 = (hi.log10() + 1e-9).floor() as i32;
        let n_dec = (k1 - k0 + 1).max(0) as usize;
        if n_dec < 2 {
            let t = ticks::ticks_within(lo, hi, target);
            let labels = tick_labels(&t.values, t.step);
            return Axis {
                lo,
                hi,
                log: true,
                ticks: t.values,
                labels,
                minor: Vec::new(),
            };
        }
        let stride = n_dec.div_ceil(target.max(2)).max(1) as i32;
        let mut ticks = Vec::new();
        let mut labels = Vec::new();
        let mut minor = Vec::new();
        for k in k0..=k1 {
            if (k - k0) % stride == 0 {
                ticks.push(10f64.powi(k));
                labels.push(decade_label(k));
            } else {
                minor.push(10f64.powi(k));
            }
        }
        if stride == 1 && n_dec <= 4 {
            for k in (k0 - 1)..=k1 {
                for m in 2..=9 {
                    let v = f64::from(m) * 10f64.powi(k);
                    if v > lo && v < hi {
                        minor.push(v);
                    }
                }
            }
        }
        Axis {
            lo,
            hi,
            log: true,
            ticks,
            labels,
            minor,
        }
    }

    /// Position of `v` along the axis in [0, 1] (outside for values off the range; NaN for
    /// values a log axis cannot show).
    pub fn frac(&self, v: f64) -> f64 {
        if self.log {
            if v > 0.0 {
                (v.log10() - self.lo.log10()) / (self.hi.log10() - self.lo.log10())
            } else {
                f64::NAN
            }
        } else {
            (v - self.lo) / (self.hi - self.lo)
        }
    }

    pub fn max_label_width(&self, size: f64) -> f64 {
        self.labels
            .iter()
            .map(|l| font::text_width(l, size))
            .fold(0.0, f64::max)
    }
}

/// A laid-out Cartesian frame: plot rectangle and both axes.
#[derive(Debug, Clone)]
pub(crate) struct Frame {
    pub plot: Rect,
    pub x: Axis,
    pub y: Axis,
}

impl Frame {
    /// Data → pixels (NaN for points a log axis cannot show).
    pub fn px(&self, x: f64, y: f64) -> P {
        [
            self.plot.x0 + self.x.frac(x) * self.plot.w(),
            self.plot.y1 - self.y.frac(y) * self.plot.h(),
        ]
    }
}

/// Text that labels a plot.
pub(crate) struct Labels<'a> {
    pub title: &'a str,
    pub x_label: &'a str,
    pub y_label: &'a str,
}

/// Lays out a frame in a `w` × `h` picture, leaving `right_extra` px free at the right
/// (for a legend). `make_x`/`make_y` build an axis for a wanted tick count.
pub(crate) fn layout(
    w: f64,
    h: f64,
    st: &Style,
    labels: &Labels,
    right_extra: f64,
    make_x: &dyn Fn(usize) -> Axis,
    make_y: &dyn Fn(usize) -> Axis,
) -> Frame {
    let cap = font::cap_height(st.fs);
    let tick_cap = font::cap_height(st.tick_fs);
    let top = if labels.title.is_empty() {
        st.pad * 1.5
    } else {
        st.pad + font::cap_height(st.title_fs) + st.pad * 1.6
    };
    let mut bottom = st.tick_len + st.pad * 0.6 + tick_cap + st.pad;
    if !labels.x_label.is_empty() {
        bottom += cap + st.pad * 0.9;
    }
    let plot_h = (h - top - bottom).max(10.0);
    let y_target = ((plot_h / (st.fs * 3.0)) as usize).clamp(3, 10);
    let y = make_y(y_target);
    let mut left = st.pad + y.max_label_width(st.tick_fs) + st.pad * 0.6 + st.tick_len;
    if !labels.y_label.is_empty() {
        left += cap + st.pad * 1.2;
    }
    // The last x tick label may reach past the plot's right edge by half its width.
    let right = st.pad * 2.5 + right_extra;
    let plot_w = (w - left - right).max(10.0);
    let x = fit_x_axis(plot_w, st, make_x);
    Frame {
        plot: Rect {
            x0: left,
            y0: top,
            x1: left + plot_w,
            y1: top + plot_h,
        },
        x,
        y,
    }
}

/// A horizontal axis for a plot `plot_w` px wide: about one tick per 5.5 font sizes, fewer
/// while the tick labels would touch.
pub(crate) fn fit_x_axis(plot_w: f64, st: &Style, make_x: &dyn Fn(usize) -> Axis) -> Axis {
    let mut target = ((plot_w / (st.fs * 5.5)) as usize).clamp(3, 12);
    let mut x = make_x(target);
    while target > 2 {
        let need: f64 = x
            .labels
            .iter()
            .map(|l| font::text_width(l, st.tick_fs) + st.fs * 1.2)
            .sum();
        if need <= plot_w {
            break;
        }
        target -= 1;
        x = make_x(target);
    }
    x
}

/// Grid lines under the data: vertical at x ticks (if `x_grid`), horizontal at y ticks.
pub(crate) fn draw_grid(scene: &mut Scene, f: &Frame, x_grid: bool, y_grid: bool) {
    let r = f.plot;
    if y_grid {
        for &v in &f.y.minor {
            let y = f.px(f.x.lo, v)[1];
            if y > r.y0 + 0.5 && y < r.y1 - 0.5 {
                scene.line([r.x0, y], [r.x1, y], GRID_MINOR, 1.0);
            }
        }
        for &v in &f.y.ticks {
            let y = f.px(f.x.lo, v)[1];
            if y > r.y0 + 0.5 && y < r.y1 - 0.5 {
                scene.line([r.x0, y], [r.x1, y], GRID, 1.0);
            }
        }
    }
    if x_grid {
        for &v in &f.x.minor {
            let x = f.px(v, f.y.lo)[0];
            if x > r.x0 + 0.5 && x < r.x1 - 0.5 {
                scene.line([x, r.y0], [x, r.y1], GRID_MINOR, 1.0);
            }
        }
        for &v in &f.x.ticks {
            let x = f.px(v, f.y.lo)[0];
            if x > r.x0 + 0.5 && x < r.x1 - 0.5 {
                scene.line([x, r.y0], [x, r.y1], GRID, 1.0);
            }
        }
    }
}

/// Axis box, ticks, tick labels, axis labels and title, over the data.
pub(crate) fn draw_frame(scene: &mut Scene, f: &Frame, st: &Style, labels: &Labels) {
    let r = f.plot;
    scene.rect_outline(r.x0, r.y0, r.w(), r.h(), AXIS, 1.0);
    draw_axes(scene, f, st, labels);
}

/// Like [`draw_frame`] with only the left and bottom axis lines (bar charts).
pub(crate) fn draw_open_frame(scene: &mut Scene, f: &Frame, st: &Style, labels: &Labels) {
    let r = f.plot;
    scene.stroke(vec![[r.x0, r.y0], [r.x0, r.y1], [r.x1, r.y1]], AXIS, 1.0);
    draw_axes(scene, f, st, labels);
}

fn draw_axes(scene: &mut Scene, f: &Frame, st: &Style, labels: &Labels) {
    let r = f.plot;
    for (v, label) in f.x.ticks.iter().zip(&f.x.labels) {
        let x = f.px(*v, f.y.lo)[0];
        if !(r.x0 - 0.5..=r.x1 + 0.5).contains(&x) {
            continue;
        }
        scene.line([x, r.y1], [x, r.y1 + st.tick_len], AXIS, 1.0);
        scene.text(
            [x, r.y1 + st.tick_len + st.pad * 0.6],
            st.tick_fs,
            Anchor::Middle,
            VAlign::Top,
            false,
            INK,
            1.0,
            label,
        );
    }
    for (v, label) in f.y.ticks.iter().zip(&f.y.labels) {
        let y = f.px(f.x.lo, *v)[1];
        if !(r.y0 - 0.5..=r.y1 + 0.5).contains(&y) {
            continue;
        }
        scene.line([r.x0 - st.tick_len, y], [r.x0, y], AXIS, 1.0);
        scene.text(
            [r.x0 - st.tick_len - st.pad * 0.6, y],
            st.tick_fs,
            Anchor::End,
            VAlign::Middle,
            false,
            INK,
            1.0,
            label,
        );
    }
    if !labels.x_label.is_empty() {
        let y = r.y1
            + st.tick_len
            + st.pad * 0.6
            + font::cap_height(st.tick_fs)
            + st.pad * 0.9
            + font::cap_height(st.fs);
        scene.text(
            [(r.x0 + r.x1) / 2.0, y],
            st.fs,
            Anchor::Middle,
            VAlign::Baseline,
            false,
            INK,
            1.0,
            labels.x_label,
        );
    }
    if !labels.y_label.is_empty() {
        scene.text(
            [st.pad + font::cap_height(st.fs), (r.y0 + r.y1) / 2.0],
            st.fs,
            Anchor::Middle,
            VAlign::Baseline,
            true,
            INK,
            1.0,
            labels.y_label,
        );
    }
    draw_title(scene, st, labels.title, (r.x0 + r.x1) / 2.0);
}

pub(crate) fn draw_title(scene: &mut Scene, st: &Style, title: &str, cx: f64) {
    if !title.is_empty() {
        scene.text(
            [cx, st.pad],
            st.title_fs,
            Anchor::Middle,
            VAlign::Top,
            false,
            INK,
            1.45,
            title,
        );
    }
}

/// A note in the middle of an empty plot.
pub(crate) fn draw_no_data(scene: &mut Scene, r: Rect, st: &Style, text: &str) {
    scene.text(
        [(r.x0 + r.x1) / 2.0, (r.y0 + r.y1) / 2.0],
        st.fs,
        Anchor::Middle,
        VAlign::Middle,
        false,
        AXIS,
        1.0,
        text,
    );
}

/// What a legend entry shows beside its label.
#[derive(Debug, Clone)]
pub(crate) enum Swatch {
    Line {
        color: Color,
        dashed: bool,
        band: bool,
    },
    Points(Color),
    Block(Color),
}

#[derive(Debug, Clone)]
pub(crate) struct LegendEntry {
    pub label: String,
    pub swatch: Swatch,
}

/// Width and height of a legend box.
pub(crate) fn legend_size(entries: &[LegendEntry], st: &Style) -> (f64, f64) {
    let text_w = entries
        .iter()
        .map(|e| font::text_width(&e.label, st.fs))
        .fold(0.0, f64::max);
    let w = st.pad + st.fs * 2.2 + st.pad + text_w + st.pad;
    let h = st.pad * 0.8 * 2.0 + entries.len() as f64 * st.fs * 1.45;
    (w, h)
}

/// Draws a legend with its top-left corner at `at`.
pub(crate) fn draw_legend(scene: &mut Scene, at: P, entries: &[LegendEntry], st: &Style) {
    let (w, h) = legend_size(entries, st);
    scene.rect(at[0], at[1], w, h, WHITE.with_alpha(0.92));
    scene.rect_outline(at[0], at[1], w, h, Color::rgb(0xc8, 0xc8, 0xc8), 1.0);
    let sw = st.fs * 2.2;
    for (i, e) in entries.iter().enumerate() {
        let cy = at[1] + st.pad * 0.8 + (i as f64 + 0.5) * st.fs * 1.45;
        let x0 = at[0] + st.pad;
        match e.swatch {
            Swatch::Line {
                color,
                dashed,
                band,
            } => {
                if band {
                    scene.rect(
                        x0,
                        cy - st.fs * 0.4,
                        sw,
                        st.fs * 0.8,
                        color.with_alpha(BAND_ALPHA),
                    );
                }
                let pts = vec![[x0, cy], [x0 + sw, cy]];
                if dashed {
                    scene.dashed(pts, color, st.lw, dash_pattern(st.lw));
                } else {
                    scene.stroke(pts, color, st.lw);
                }
            }
            Swatch::Points(color) => {
                scene.circle([x0 + sw / 2.0, cy], marker_radius(st), color);
            }
            Swatch::Block(color) => {
                scene.rect(x0, cy - st.fs * 0.45, sw, st.fs * 0.9, color);
            }
        }
        scene.text(
            [x0 + sw + st.pad, cy],
            st.fs,
            Anchor::Start,
            VAlign::Middle,
            false,
            INK,
            1.0,
            &e.label,
        );
    }
}

/// Top-left corner for a legend of `size` inside `r` that covers none of `samples`:
/// tried in the corners (top right first), then half-way along the sides, then the centre.
pub(crate) fn legend_inside(r: Rect, size: (f64, f64), samples: &[P], st: &Style) -> Option<P> {
    let inset = st.pad * 0.8;
    if size.0 + 2.0 * inset > r.w() || size.1 + 2.0 * inset > r.h() {
        return None;
    }
    let (right, left) = (r.x1 - inset - size.0, r.x0 + inset);
    let (top, bottom) = (r.y0 + inset, r.y1 - inset - size.1);
    let (mid_x, mid_y) = ((r.x0 + r.x1 - size.0) / 2.0, (r.y0 + r.y1 - size.1) / 2.0);
    let corners = [
        [right, top],
        [left, top],
        [right, bottom],
        [left, bottom],
        [right, mid_y],
        [left, mid_y],
        [mid_x, top],
        [mid_x, bottom],
        [mid_x, mid_y],
    ];
    let margin = st.lw * 2.0;
    corners.into_iter().find(|c| {
        let b = Rect {
            x0: c[0] - margin,
            y0: c[1] - margin,
            x1: c[0] + size.0 + margin,
            y1: c[1] + size.1 + margin,
        };
        !samples.iter().any(|p| b.contains(*p))
    })
}

/// Points every ≤ 3 px along a polyline in pixels (for legend placement).
pub(crate) fn sample_polyline(pts: &[P], out: &mut Vec<P>) {
    for w in pts.windows(2) {
        let (a, b) = (w[0], w[1]);
        let len = ((b[0] - a[0]).powi(2) + (b[1] - a[1]).powi(2)).sqrt();
        if !len.is_finite() {
            continue;
        }
        let n = ((len / 3.0).ceil() as usize).clamp(1, 10_000);
        for k in 0..=n {
            let t = k as f64 / n as f64;
            out.push([a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])]);
        }
    }
    if pts.len() == 1 {
        out.push(pts[0]);
    }
}

/// Opacity of uncertainty bands.
pub(crate) const BAND_ALPHA: f64 = 0.22;

/// Dash and gap lengths for dashed data lines of width `lw`.
pub(crate) fn dash_pattern(lw: f64) -> (f64, f64) {
    (lw * 3.0, lw * 2.5)
}

/// Radius of point markers.
pub(crate) fn marker_radius(st: &Style) -> f64 {
    st.lw * 1.7
}
