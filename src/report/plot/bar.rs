//! Horizontal bar charts with value labels (e.g. a current-loss breakdown in mA/cm²); with
//! several groups, the bars of one category sit side by side (comparing designs).

use super::axes::{self, Axis, Frame, Labels, LegendEntry, Style, Swatch};
use super::font;
use super::line::min_max;
use super::scene::{AXIS, Anchor, Color, INK, Rect, Scene, VAlign};
use super::{drawable, palette};

/// One set of bars: a value (and optional standard error) per category.
#[derive(Debug, Clone, PartialEq)]
pub struct BarGroup {
    /// Legend text (shown when there are several groups).
    pub name: String,
    /// One value per category; NaN draws no bar and the label "n/a".
    pub values: Vec<f64>,
    /// Optional uncertainty per category (drawn as a whisker, labelled "± e").
    pub errors: Option<Vec<f64>>,
    /// Colour; `None` takes the next palette colour.
    pub color: Option<Color>,
}

impl BarGroup {
    /// A group without uncertainties.
    pub fn new(name: impl Into<String>, values: Vec<f64>) -> Self {
        Self {
            name: name.into(),
            values,
            errors: None,
            color: None,
        }
    }

    /// Adds uncertainties (e.g. one standard error), one per category.
    pub fn errors(mut self, errors: Vec<f64>) -> Self {
        self.errors = Some(errors);
        self
    }

    /// Sets the colour.
    pub fn color(mut self, color: Color) -> Self {
        self.color = Some(color);
        self
    }

    fn error(&self, i: usize) -> Option<f64> {
        self.errors
            .as_ref()
            .and_then(|e| e.get(i).copied())
            .filter(|e| e.is_finite() && *e > 0.0)
    }
}

/// Horizontal bars: categories top to bottom, values along x, a label at each bar's end.
///
/// ```
/// use lightfold::report::{BarChart, BarGroup};
/// let chart = BarChart::new("Current losses", "current density (mA/cm²)",
///     vec!["front reflection".into(), "escape".into()])
///     .group(BarGroup::new("textured", vec![1.2, 0.8]));
/// assert!(chart.to_png(480, 240).starts_with(b"\x89PNG"));
/// ```
#[derive(Debug, Clone, Default, PartialEq)]
pub struct BarChart {
    /// Title above the chart.
    pub title: String,
    /// Value-axis label with unit.
    pub value_label: String,
    /// Category names, top to bottom.
    pub categories: Vec<String>,
    /// One group for a plain chart, several to compare designs.
    pub groups: Vec<BarGroup>,
    /// Decimals in the value labels.
    pub decimals: usize,
    /// Fixed value range; `None` spans 0 and all values (with their uncertainties).
    pub value_range: Option<(f64, f64)>,
}

impl BarChart {
    /// An empty chart (2 decimals in the labels).
    pub fn new(
        title: impl Into<String>,
        value_label: impl Into<String>,
        categories: Vec<String>,
    ) -> Self {
        Self {
            title: title.into(),
            value_label: value_label.into(),
            categories,
            groups: Vec::new(),
            decimals: 2,
            value_range: None,
        }
    }

    /// Adds a group of bars.
    pub fn group(mut self, g: BarGroup) -> Self {
        self.groups.push(g);
        self
    }

    /// Sets the number of decimals in value labels.
    pub fn decimals(mut self, d: usize) -> Self {
        self.decimals = d;
        self
    }

    /// Fixes the value range.
    pub fn value_range(mut self, lo: f64, hi: f64) -> Self {
        self.value_range = Some((lo, hi));
        self
    }

    fn color_of(&self, g: usize) -> Color {
        self.groups[g].color.unwrap_or_else(|| palette(g))
    }

    fn label(&self, g: usize, i: usize) -> String {
        let d = self.decimals;
        let v = self.groups[g].values.get(i).copied().unwrap_or(f64::NAN);
        if !v.is_finite() {
            return "n/a".to_string();
        }
        let s = match self.groups[g].error(i) {
            Some(e) => format!("{v:.d$} ± {e:.d$}"),
            None => format!("{v:.d$}"),
        };
        s.replace('-', "−")
    }

    pub(crate) fn scene(&self, width: u32, height: u32) -> Scene {
        let mut scene = Scene::new(width, height, &self.title);
        let st = Style::for_size(scene.width, scene.height);
        let (w, h) = (scene.width, scene.height);
        let n_cat = self.categories.len();
        let n_g = self.groups.len();

        // Value range: 0, every value and value ± error.
        let mut vals = vec![0.0];
        for g in &self.groups {
            for (i, &v) in g.values.iter().enumerate().take(n_cat) {
                vals.push(v);
                if let Some(e) = g.error(i) {
                    vals.push(v - e);
                    vals.push(v + e);
                }
            }
        }
        let fit = min_max(&vals);
        let fixed = self.value_range;
        let make_x = move |t: usize| match fixed {
            Some((a, b)) => Axis::linear(a, b, true, t),
            None => Axis::linear(fit.0, fit.1, false, t),
        };

        // Layout: category names left, value labels and legend right.
        let cat_w = self
            .categories
            .iter()
            .map(|c| font::text_width(c, st.fs))
            .fold(0.0, f64::max)
            .min(w * 0.45);
        let mut label_w: f64 = 0.0;
        for g in 0..n_g {
            for i in 0..n_cat {
                label_w = label_w.max(font::text_width(&self.label(g, i), st.tick_fs));
            }
        }
        let entries: Vec<LegendEntry> = if n_g > 1 {
            (0..n_g)
                .map(|g| LegendEntry {
                    label: self.groups[g].name.clone(),
                    swatch: Swatch::Block(self.color_of(g)),
                })
                .collect()
        } else {
            Vec::new()
        };
        let legend_w = if entries.is_empty() {
            0.0
        } else {
            axes::legend_size(&entries, &st).0 + st.pad * 1.5
        };
        let top = if self.title.is_empty() {
            st.pad * 1.5
        } else {
            st.pad + font::cap_height(st.title_fs) + st.pad * 1.6
        };
        let mut bottom = st.tick_len + st.pad * 0.6 + font::cap_height(st.tick_fs) + st.pad;
        if !self.value_label.is_empty() {
            bottom += font::cap_height(st.fs) + st.pad * 0.9;
        }
        let left = st.pad + cat_w + st.pad;
        let right = st.pad * 1.5 + label_w + st.pad + legend_w;
        let plot = Rect {
            x0: left,
            y0: top,
            x1: (w - right).max(left + 10.0),
            y1: (h - bottom).max(top + 10.0),
        };
        let x = axes::fit_x_axis(plot.w(), &st, &make_x);
        let frame = Frame {
            plot,
            x,
            y: Axis {
                lo: 0.0,
                hi: 1.0,
                log: false,
                ticks: Vec::new(),
                labels: Vec::new(),
                minor: Vec::new(),
            },
        };
        axes::draw_grid(&mut scene, &frame, true, false);

        // Bars: each category gets a band; bars fill 75 % of it, at most 2.4 font sizes each.
        let band = plot.h() / n_cat.max(1) as f64;
        let bar_h = (band * 0.75 / n_g.max(1) as f64).min(st.fs * 2.4);
        let x_of = |v: f64| frame.px(v, 0.0)[0];
        let x_zero = x_of(0.0).clamp(plot.x0, plot.x1);
        for i in 0..n_cat {
            let centre = plot.y0 + (i as f64 + 0.5) * band;
            let group_top = centre - bar_h * n_g as f64 / 2.0;
            for g in 0..n_g {
                let y = group_top + g as f64 * bar_h;
                let cy = y + bar_h / 2.0;
                let v = self.groups[g].values.get(i).copied().unwrap_or(f64::NAN);
                let mut end = x_zero;
                if v.is_finite() {
                    let xv = x_of(v).clamp(plot.x0, plot.x1);
                    let (a, b) = (x_zero.min(xv), x_zero.max(xv));
                    scene.rect(a, y + bar_h * 0.08, b - a, bar_h * 0.84, self.color_of(g));
                    end = xv;
                    if let Some(e) = self.groups[g].error(i) {
                        let (lo, hi) = (
                            x_of(v - e).clamp(plot.x0, plot.x1),
                            x_of(v + e).clamp(plot.x0, plot.x1),
                        );
                        let cap = bar_h * 0.25;
                        scene.line([lo, cy], [hi, cy], INK, 1.2);
                        scene.line([lo, cy - cap], [lo, cy + cap], INK, 1.2);
                        scene.line([hi, cy - cap], [hi, cy + cap], INK, 1.2);
                        end = if v >= 0.0 { hi } else { lo };
                    }
                }
                let negative = v.is_finite() && v < 0.0;
                let (tx, anchor) = if negative {
                    (end - st.pad * 0.6, Anchor::End)
                } else {
                    (end + st.pad * 0.6, Anchor::Start)
                };
                scene.text(
                    [tx, cy],
                    st.tick_fs,
                    anchor,
                    VAlign::Middle,
                    false,
                    INK,
                    1.0,
                    &self.label(g, i),
                );
            }
            scene.text(
                [plot.x0 - st.pad, centre],
                st.fs,
                Anchor::End,
                VAlign::Middle,
                false,
                INK,
                1.0,
                &self.categories[i],
            );
        }
        if frame.x.lo < 0.0 && frame.x.hi > 0.0 {
            scene.line([x_zero, plot.y0], [x_zero, plot.y1], AXIS, 1.0);
        }
        if n_cat == 0 || n_g == 0 {
            axes::draw_no_data(&mut scene, plot, &st, "no data");
        }
        let labels = Labels {
            title: &self.title,
            x_label: &self.value_label,
            y_label: "",
        };
        axes::draw_open_frame(&mut scene, &frame, &st, &labels);
        if !entries.is_empty() {
            axes::draw_legend(
                &mut scene,
                [w - legend_w + st.pad * 0.5, plot.y0],
                &entries,
                &st,
            );
        }
        scene
    }
}

drawable!(BarChart);
