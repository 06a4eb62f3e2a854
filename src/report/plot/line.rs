//! Line plots: several series against one x axis, linear or logarithmic y.

use super::axes::{
    self, Axis, BAND_ALPHA, Frame, Labels, LegendEntry, Style, Swatch, dash_pattern, marker_radius,
    sample_polyline,
};
use super::scene::{Color, P, Scene, clip_polygon, clip_polyline};
use super::{drawable, palette};

/// How a series is drawn.
#[derive(Debug, Clone, PartialEq)]
pub enum SeriesStyle {
    /// A solid line.
    Line,
    /// A solid line over a shaded band between `(lower, upper)` (e.g. ± 2 standard errors),
    /// one value per x.
    LineWithBand(Vec<f64>, Vec<f64>),
    /// A dashed line (references, limits).
    Dashed,
    /// Markers only (measurements).
    Points,
}

/// One curve: `y[i]` at `x[i]`. Extra values in the longer of the two are ignored.
#[derive(Debug, Clone, PartialEq)]
pub struct Series {
    /// Legend text; series with an empty name get no legend entry.
    pub name: String,
    /// Abscissae.
    pub x: Vec<f64>,
    /// Ordinates.
    pub y: Vec<f64>,
    /// How it is drawn.
    pub style: SeriesStyle,
    /// Colour; `None` takes the next palette colour.
    pub color: Option<Color>,
}

impl Series {
    /// A solid line.
    pub fn line(name: impl Into<String>, x: Vec<f64>, y: Vec<f64>) -> Self {
        Self::styled(name, x, y, SeriesStyle::Line)
    }

    /// A dashed line.
    pub fn dashed(name: impl Into<String>, x: Vec<f64>, y: Vec<f64>) -> Self {
        Self::styled(name, x, y, SeriesStyle::Dashed)
    }

    /// Markers only.
    pub fn points(name: impl Into<String>, x: Vec<f64>, y: Vec<f64>) -> Self {
        Self::styled(name, x, y, SeriesStyle::Points)
    }

    /// A solid line with a shaded band from `lower` to `upper`.
    pub fn with_band(
        name: impl Into<String>,
        x: Vec<f64>,
        y: Vec<f64>,
        lower: Vec<f64>,
        upper: Vec<f64>,
    ) -> Self {
        Self::styled(name, x, y, SeriesStyle::LineWithBand(lower, upper))
    }

    /// Any style.
    pub fn styled(name: impl Into<String>, x: Vec<f64>, y: Vec<f64>, style: SeriesStyle) -> Self {
        Self {
            name: name.into(),
            x,
            y,
            style,
            color: None,
        }
    }

    /// Sets the colour.
    pub fn color(mut self, color: Color) -> Self {
        self.color = Some(color);
        self
    }

    /// Finite (x, y) values, including band limits, for the automatic range.
    fn extent(&self, log_y: bool, xs: &mut Vec<f64>, ys: &mut Vec<f64>) {
        let n = self.x.len().min(self.y.len());
        let ok_y = |v: f64| v.is_finite() && (!log_y || v > 0.0);
        for i in 0..n {
            let (x, y) = (self.x[i], self.y[i]);
            if x.is_finite() && ok_y(y) {
                xs.push(x);
                ys.push(y);
            }
            if let SeriesStyle::LineWithBand(lo, hi) = &self.style {
                for b in [lo.get(i), hi.get(i)].into_iter().flatten() {
                    if x.is_finite() && ok_y(*b) {
                        ys.push(*b);
                    }
                }
            }
        }
    }
}

/// A line plot with legend, axes, nice ticks and grid.
///
/// ```
/// use lightfold::report::{LinePlot, Series};
/// let plot = LinePlot::new("Reflectance", "wavelength (nm)", "R")
///     .series(Series::line("front", vec![400.0, 800.0, 1200.0], vec![0.1, 0.05, 0.3]))
///     .y_range(0.0, 1.0);
/// let svg = plot.to_svg(640, 400);
/// assert!(svg.starts_with("<svg"));
/// ```
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LinePlot {
    /// Title above the plot (may be empty).
    pub title: String,
    /// x-axis label with unit, e.g. `wavelength (nm)`.
    pub x_label: String,
    /// y-axis label with unit.
    pub y_label: String,
    /// The curves, drawn in order (bands first, then lines, then markers).
    pub series: Vec<Series>,
    /// Fixed x range; `None` spans the data exactly.
    pub x_range: Option<(f64, f64)>,
    /// Fixed y range; `None` fits the data, widened to nice numbers.
    pub y_range: Option<(f64, f64)>,
    /// Logarithmic y axis (non-positive values are not drawn).
    pub log_y: bool,
}

impl LinePlot {
    /// An empty plot with title and axis labels.
    pub fn new(
        title: impl Into<String>,
        x_label: impl Into<String>,
        y_label: impl Into<String>,
    ) -> Self {
        Self {
            title: title.into(),
            x_label: x_label.into(),
            y_label: y_label.into(),
            ..Self::default()
        }
    }

    /// Adds a series.
    pub fn series(mut self, s: Series) -> Self {
        self.series.push(s);
        self
    }

    /// Fixes the x range.
    pub fn x_range(mut self, lo: f64, hi: f64) -> Self {
        self.x_range = Some((lo, hi));
        self
    }

    /// Fixes the y range.
    pub fn y_range(mut self, lo: f64, hi: f64) -> Self {
        self.y_range = Some((lo, hi));
        self
    }

    /// Sets a logarithmic y axis.
    pub fn log_y(mut self, on: bool) -> Self {
        self.log_y = on;
        self
    }

    fn color_of(&self, i: usize) -> Color {
        self.series[i].color.unwrap_or_else(|| palette(i))
    }

    pub(crate) fn scene(&self, width: u32, height: u32) -> Scene {
        let mut scene = Scene::new(width, height, &self.title);
        let st = Style::for_size(scene.width, scene.height);
        let labels = Labels {
            title: &self.title,
            x_label: &self.x_label,
            y_label: &self.y_label,
        };
        let (mut xs, mut ys) = (Vec::new(), Vec::new());
        for s in &self.series {
            s.extent(self.log_y, &mut xs, &mut ys);
        }
        let has_data = !xs.is_empty();
        let x_fit = min_max(&xs);
        let y_fit = min_max(&ys);
        let log_y = self.log_y;
        let (x_range, y_range) = (self.x_range, self.y_range);
        let make_x = move |t: usize| match x_range {
            Some((a, b)) => Axis::linear(a, b, true, t),
            None => Axis::linear(x_fit.0, x_fit.1, true, t),
        };
        let make_y = move |t: usize| match (y_range, log_y) {
            (Some((a, b)), false) => Axis::linear(a, b, true, t),
            (None, false) => Axis::linear(y_fit.0, y_fit.1, false, t),
            (Some((a, b)), true) => Axis::log(a, b, true, t),
            (None, true) => Axis::log(y_fit.0, y_fit.1, false, t),
        };

        // Legend inside if a corner is free of data, else to the right of the plot.
        let entries = self.legend_entries();
        let mut frame = axes::layout(
            scene.width,
            scene.height,
            &st,
            &labels,
            0.0,
            &make_x,
            &make_y,
        );
        let mut legend_at = None;
        if !entries.is_empty() {
            let size = axes::legend_size(&entries, &st);
            let samples = self.samples(&frame);
            legend_at = axes::legend_inside(frame.plot, size, &samples, &st);
            if legend_at.is_none() {
                frame = axes::layout(
                    scene.width,
                    scene.height,
                    &st,
                    &labels,
                    size.0 + st.pad,
                    &make_x,
                    &make_y,
                );
                legend_at = Some([frame.plot.x1 + st.pad * 1.5, frame.plot.y0]);
            }
        }

        axes::draw_grid(&mut scene, &frame, true, true);
        self.draw_data(&mut scene, &frame, &st);
        if !has_data {
            axes::draw_no_data(&mut scene, frame.plot, &st, "no data");
        }
        axes::draw_frame(&mut scene, &frame, &st, &labels);
        if let Some(at) = legend_at {
            axes::draw_legend(&mut scene, at, &entries, &st);
        }
        scene
    }

    fn legend_entries(&self) -> Vec<LegendEntry> {
        self.series
            .iter()
            .enumerate()
            .filter(|(_, s)| !s.name.is_empty())
            .map(|(i, s)| {
                let color = self.color_of(i);
                let swatch = match s.style {
                    SeriesStyle::Line => Swatch::Line {
                        color,
                        dashed: false,
                        band: false,
                    },
                    SeriesStyle::LineWithBand(..) => Swatch::Line {
                        color,
                        dashed: false,
                        band: true,
                    },
                    SeriesStyle::Dashed => Swatch::Line {
                        color,
                        dashed: true,
                        band: false,
                    },
                    SeriesStyle::Points => Swatch::Points(color),
                };
                LegendEntry {
                    label: s.name.clone(),
                    swatch,
                }
            })
            .collect()
    }

    /// Pixel points of the series (for legend placement).
    fn samples(&self, f: &Frame) -> Vec<P> {
        let mut out = Vec::new();
        for s in &self.series {
            let pts = series_px(f, &s.x, &s.y);
            match s.style {
                SeriesStyle::Points => out.extend(pts.iter().filter(|p| p[0].is_finite())),
                _ => {
                    for piece in clip_polyline(&pts, f.plot) {
                        sample_polyline(&piece, &mut out);
                    }
                }
            }
            if let SeriesStyle::LineWithBand(lo, hi) = &s.style {
                let mid: Vec<f64> = lo.iter().zip(hi).map(|(a, b)| 0.5 * (a + b)).collect();
                for ys in [lo, hi, &mid] {
                    for piece in clip_polyline(&series_px(f, &s.x, ys), f.plot) {
                        sample_polyline(&piece, &mut out);
                    }
                }
            }
        }
        out
    }

    fn draw_data(&self, scene: &mut Scene, f: &Frame, st: &Style) {
        // Bands under all lines.
        for (i, s) in self.series.iter().enumerate() {
            if let SeriesStyle::LineWithBand(lo, hi) = &s.style {
                let color = self.color_of(i).with_alpha(BAND_ALPHA);
                for poly in band_polygons(f, &s.x, lo, hi) {
                    let clipped = clip_polygon(&poly, f.plot);
                    scene.fill(clipped, color);
                }
            }
        }
        for (i, s) in self.series.iter().enumerate() {
            let color = self.color_of(i);
            let pts = series_px(f, &s.x, &s.y);
            match s.style {
                SeriesStyle::Line | SeriesStyle::LineWithBand(..) => {
                    for piece in clip_polyline(&pts, f.plot) {
                        scene.stroke(piece, color, st.lw);
                    }
                }
                SeriesStyle::Dashed => {
                    for piece in clip_polyline(&pts, f.plot) {
                        scene.dashed(piece, color, st.lw, dash_pattern(st.lw));
                    }
                }
                SeriesStyle::Points => {}
            }
        }
        for (i, s) in self.series.iter().enumerate() {
            if s.style == SeriesStyle::Points {
                let color = self.color_of(i);
                for p in series_px(f, &s.x, &s.y) {
                    if p[0].is_finite() && p[1].is_finite() && f.plot.contains(p) {
                        scene.circle(p, marker_radius(st), color);
                    }
                }
            }
        }
    }
}

drawable!(LinePlot);

/// Data → pixels; points that cannot be shown become NaN (they break lines).
pub(crate) fn series_px(f: &Frame, x: &[f64], y: &[f64]) -> Vec<P> {
    x.iter()
        .zip(y)
        .map(|(&xv, &yv)| {
            if xv.is_finite() && yv.is_finite() {
                f.px(xv, yv)
            } else {
                [f64::NAN, f64::NAN]
            }
        })
        .collect()
}

/// Band polygons (one per run of finite values): upper edge forward, lower edge back. On a
/// log axis a non-positive lower limit is drawn at the bottom of the axis.
fn band_polygons(f: &Frame, x: &[f64], lo: &[f64], hi: &[f64]) -> Vec<Vec<P>> {
    let n = x.len().min(lo.len()).min(hi.len());
    let mut out = Vec::new();
    let mut upper: Vec<P> = Vec::new();
    let mut lower: Vec<P> = Vec::new();
    let mut flush = |upper: &mut Vec<P>, lower: &mut Vec<P>| {
        if upper.len() >= 2 {
            let mut poly = std::mem::take(upper);
            poly.extend(lower.drain(..).rev());
            out.push(poly);
        }
        upper.clear();
        lower.clear();
    };
    for i in 0..n {
        let l = if f.y.log && lo[i] <= 0.0 {
            f.y.lo
        } else {
            lo[i]
        };
        let (pu, pl) = (f.px(x[i], hi[i]), f.px(x[i], l));
        if pu[0].is_finite() && pu[1].is_finite() && pl[1].is_finite() {
            upper.push(pu);
            lower.push(pl);
        } else {
            flush(&mut upper, &mut lower);
        }
    }
    flush(&mut upper, &mut lower);
    out
}

/// (min, max) of finite values; (0, 1) when there are none.
pub(crate) fn min_max(v: &[f64]) -> (f64, f64) {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for &x in v {
        if x.is_finite() {
            lo = lo.min(x);
            hi = hi.max(x);
        }
    }
    if lo > hi { (0.0, 1.0) } else { (lo, hi) }
}
