//! Stacked areas: parts of a whole vs x (e.g. reflectance, absorptance in each film and in
//! the silicon, transmission, stacked to 1 vs wavelength), with optional lines on top.

use super::axes::{self, Axis, Labels, LegendEntry, Style, Swatch, dash_pattern};
use super::line::{Series, SeriesStyle, min_max, series_px};
use super::scene::{Color, P, Scene, WHITE, clip_polygon, clip_polyline};
use super::{drawable, palette};

/// One stacked part: a value per x of the plot.
#[derive(Debug, Clone, PartialEq)]
pub struct Layer {
    /// Legend text.
    pub name: String,
    /// One value per x (NaN counts as 0 in the stack).
    pub values: Vec<f64>,
    /// Colour; `None` takes a light tint of the next palette colour.
    pub color: Option<Color>,
}

impl Layer {
    /// A layer with an automatic colour.
    pub fn new(name: impl Into<String>, values: Vec<f64>) -> Self {
        Self {
            name: name.into(),
            values,
            color: None,
        }
    }

    /// Sets the colour.
    pub fn color(mut self, color: Color) -> Self {
        self.color = Some(color);
        self
    }
}

/// Layers stacked from the bottom (`layers[0]`) up, vs a shared `x`; legend at the right,
/// listed top layer first so it reads like the picture.
///
/// Values are expected ≥ 0; a negative value is drawn as given (its band folds back).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct StackedArea {
    /// Title above the plot.
    pub title: String,
    /// x-axis label with unit.
    pub x_label: String,
    /// y-axis label with unit.
    pub y_label: String,
    /// Shared abscissae.
    pub x: Vec<f64>,
    /// The parts, bottom first.
    pub layers: Vec<Layer>,
    /// Lines drawn over the stack (e.g. a limit), also in the legend.
    pub overlay: Vec<Series>,
    /// Fixed x range; `None` fits the data.
    pub x_range: Option<(f64, f64)>,
    /// Fixed y range; `None` runs from 0 to the (nice) largest total.
    pub y_range: Option<(f64, f64)>,
}

impl StackedArea {
    /// An empty stack over `x`.
    pub fn new(
        title: impl Into<String>,
        x_label: impl Into<String>,
        y_label: impl Into<String>,
        x: Vec<f64>,
    ) -> Self {
        Self {
            title: title.into(),
            x_label: x_label.into(),
            y_label: y_label.into(),
            x,
            ..Self::default()
        }
    }

    /// Adds a layer on top.
    pub fn layer(mut self, layer: Layer) -> Self {
        self.layers.push(layer);
        self
    }

    /// Adds a line over the stack.
    pub fn overlay(mut self, s: Series) -> Self {
        self.overlay.push(s);
        self
    }

    /// Fixes the y range.
    pub fn y_range(mut self, lo: f64, hi: f64) -> Self {
        self.y_range = Some((lo, hi));
        self
    }

    /// Fixes the x range.
    pub fn x_range(mut self, lo: f64, hi: f64) -> Self {
        self.x_range = Some((lo, hi));
        self
    }

    fn layer_color(&self, i: usize) -> Color {
        self.layers[i]
            .color
            .unwrap_or_else(|| palette(i).lerp(WHITE, 0.3))
    }

    fn overlay_color(&self, i: usize) -> Color {
        self.overlay[i]
            .color
            .unwrap_or_else(|| Color::rgb(0x22, 0x22, 0x22).lerp(palette(i + 1), 0.3 * i as f64))
    }

    /// Cumulative sums: `cum[k][i]` is the top of layer k at `x[i]`.
    fn cumulative(&self) -> Vec<Vec<f64>> {
        let n = self.x.len();
        let mut acc = vec![0.0; n];
        self.layers
            .iter()
            .map(|l| {
                for (i, a) in acc.iter_mut().enumerate() {
                    let v = l.values.get(i).copied().unwrap_or(f64::NAN);
                    if v.is_finite() {
                        *a += v;
                    }
                }
                acc.clone()
            })
            .collect()
    }

    pub(crate) fn scene(&self, width: u32, height: u32) -> Scene {
        let mut scene = Scene::new(width, height, &self.title);
        let st = Style::for_size(scene.width, scene.height);
        let labels = Labels {
            title: &self.title,
            x_label: &self.x_label,
            y_label: &self.y_label,
        };
        let cum = self.cumulative();
        let has_data = !self.x.is_empty() && !self.layers.is_empty();

        let mut ys: Vec<f64> = vec![0.0];
        for c in &cum {
            ys.extend(c.iter().copied());
        }
        for s in &self.overlay {
            ys.extend(s.y.iter().copied());
        }
        let x_fit = min_max(&self.x);
        let y_fit = min_max(&ys);
        let (x_range, y_range) = (self.x_range, self.y_range);
        let make_x = move |t: usize| match x_range {
            Some((a, b)) => Axis::linear(a, b, true, t),
            None => Axis::linear(x_fit.0, x_fit.1, true, t),
        };
        let make_y = move |t: usize| match y_range {
            Some((a, b)) => Axis::linear(a, b, true, t),
            None => Axis::linear(y_fit.0, y_fit.1, false, t),
        };

        let entries = self.legend_entries();
        let extra = if entries.is_empty() {
            0.0
        } else {
            axes::legend_size(&entries, &st).0 + st.pad
        };
        let frame = axes::layout(
            scene.width,
            scene.height,
            &st,
            &labels,
            extra,
            &make_x,
            &make_y,
        );

        // Areas, then a thin white line on each boundary to separate neighbours.
        let zero = vec![0.0; self.x.len()];
        let mut boundaries: Vec<Vec<P>> = Vec::new();
        for (k, top) in cum.iter().enumerate() {
            let bottom = if k == 0 { &zero } else { &cum[k - 1] };
            let color = self.layer_color(k);
            let mut poly = series_px(&frame, &self.x, top);
            let back = series_px(&frame, &self.x, bottom);
            boundaries.push(poly.clone());
            poly.extend(back.into_iter().rev());
            scene.fill(clip_polygon(&poly, frame.plot), color);
        }
        for b in boundaries.iter().take(boundaries.len().saturating_sub(1)) {
            for piece in clip_polyline(b, frame.plot) {
                scene.stroke(piece, WHITE, 1.0);
            }
        }
        // Light grid lines over the areas, so levels can be read inside them.
        let r = frame.plot;
        let faint = WHITE.with_alpha(0.45);
        for &v in &frame.y.ticks {
            let y = frame.px(frame.x.lo, v)[1];
            if y > r.y0 + 0.5 && y < r.y1 - 0.5 {
                scene.line([r.x0, y], [r.x1, y], faint, 1.0);
            }
        }
        for &v in &frame.x.ticks {
            let x = frame.px(v, frame.y.lo)[0];
            if x > r.x0 + 0.5 && x < r.x1 - 0.5 {
                scene.line([x, r.y0], [x, r.y1], faint, 1.0);
            }
        }
        for (i, s) in self.overlay.iter().enumerate() {
            let color = self.overlay_color(i);
            let pts = series_px(&frame, &s.x, &s.y);
            for piece in clip_polyline(&pts, frame.plot) {
                if s.style == SeriesStyle::Dashed {
                    scene.dashed(piece, color, st.lw, dash_pattern(st.lw));
                } else {
                    scene.stroke(piece, color, st.lw);
                }
            }
        }
        if !has_data {
            axes::draw_no_data(&mut scene, frame.plot, &st, "no data");
        }
        axes::draw_frame(&mut scene, &frame, &st, &labels);
        if !entries.is_empty() {
            axes::draw_legend(
                &mut scene,
                [frame.plot.x1 + st.pad * 1.5, frame.plot.y0],
                &entries,
                &st,
            );
        }
        scene
    }

    fn legend_entries(&self) -> Vec<LegendEntry> {
        let mut e: Vec<LegendEntry> = self
            .overlay
            .iter()
            .enumerate()
            .filter(|(_, s)| !s.name.is_empty())
            .map(|(i, s)| LegendEntry {
                label: s.name.clone(),
                swatch: Swatch::Line {
                    color: self.overlay_color(i),
                    dashed: s.style == SeriesStyle::Dashed,
                    band: false,
                },
            })
            .collect();
        for (k, l) in self.layers.iter().enumerate().rev() {
            e.push(LegendEntry {
                label: l.name.clone(),
                swatch: Swatch::Block(self.layer_color(k)),
            });
        }
        e
    }
}

drawable!(StackedArea);
