//! A heat map over directions of one hemisphere: polar angle θ from the surface normal ×
//! azimuth φ, drawn as a disc whose radius is ∝ sin θ (equal-étendue look: for an isotropic
//! radiance, equal areas of the disc carry equal power), with a colour bar.
//!
//! Orientation: θ = 0° at the centre, 90° at the rim; φ = 0° points right and grows
//! anticlockwise. Colour map: viridis (S. van der Walt & N. Smith, matplotlib, 2015),
//! approximated by linear interpolation between ten sRGB stops (stop values from memory).

use super::axes::{self, Axis, Style};
use super::font;
use super::scene::{AXIS, Anchor, Color, INK, P, Scene, VAlign, WHITE};
use super::ticks::tick_labels;
use super::{drawable, ticks};

/// Viridis at 0, 1/9, …, 1.
const VIRIDIS: [Color; 10] = [
    Color::rgb(0x44, 0x01, 0x54),
    Color::rgb(0x48, 0x28, 0x78),
    Color::rgb(0x3e, 0x49, 0x89),
    Color::rgb(0x31, 0x68, 0x8e),
    Color::rgb(0x26, 0x82, 0x8e),
    Color::rgb(0x1f, 0x9e, 0x89),
    Color::rgb(0x35, 0xb7, 0x79),
    Color::rgb(0x6e, 0xce, 0x58),
    Color::rgb(0xb5, 0xde, 0x2b),
    Color::rgb(0xfd, 0xe7, 0x25),
];

/// Colour for cells without a value.
const NO_DATA: Color = Color::rgb(0xd9, 0xd9, 0xd9);

/// The colour map at `t` in [0, 1] (clamped).
pub(crate) fn viridis(t: f64) -> Color {
    let t = if t.is_finite() {
        t.clamp(0.0, 1.0)
    } else {
        0.0
    };
    let x = t * (VIRIDIS.len() - 1) as f64;
    let i = (x.floor() as usize).min(VIRIDIS.len() - 2);
    VIRIDIS[i].lerp(VIRIDIS[i + 1], x - i as f64)
}

/// Values on angular bins: `values[i][j]` belongs to θ in
/// [`theta_edges_deg[i]`, `theta_edges_deg[i+1]`] and φ in [`phi_edges_deg[j]`,
/// `phi_edges_deg[j+1]`]. Only the φ range given is drawn (a reduced, symmetric set of bins
/// shows as a sector). Edges must increase; θ edges lie in [0°, 90°].
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PolarMap {
    /// Title above the map.
    pub title: String,
    /// Colour-bar label with unit.
    pub value_label: String,
    /// Polar bin edges in degrees, increasing, within [0, 90].
    pub theta_edges_deg: Vec<f64>,
    /// Azimuthal bin edges in degrees, increasing (e.g. 0 … 360).
    pub phi_edges_deg: Vec<f64>,
    /// `values[i][j]` for polar bin i and azimuthal bin j; NaN draws a grey cell.
    pub values: Vec<Vec<f64>>,
    /// Fixed colour range; `None` spans the finite values.
    pub range: Option<(f64, f64)>,
    /// Logarithmic colour scale (non-positive values are grey).
    pub log_scale: bool,
}

impl PolarMap {
    /// A map of `values[θ bin][φ bin]` on the given bin edges (degrees).
    pub fn new(
        title: impl Into<String>,
        value_label: impl Into<String>,
        theta_edges_deg: Vec<f64>,
        phi_edges_deg: Vec<f64>,
        values: Vec<Vec<f64>>,
    ) -> Self {
        Self {
            title: title.into(),
            value_label: value_label.into(),
            theta_edges_deg,
            phi_edges_deg,
            values,
            range: None,
            log_scale: false,
        }
    }

    /// Fixes the colour range.
    pub fn range(mut self, lo: f64, hi: f64) -> Self {
        self.range = Some((lo, hi));
        self
    }

    /// Sets a logarithmic colour scale.
    pub fn log_scale(mut self, on: bool) -> Self {
        self.log_scale = on;
        self
    }

    /// Whether the bin edges can be drawn.
    fn edges_ok(&self) -> bool {
        let inc = |e: &[f64]| e.len() >= 2 && e.windows(2).all(|w| w[1] > w[0]);
        inc(&self.theta_edges_deg)
            && inc(&self.phi_edges_deg)
            && self
                .theta_edges_deg
                .iter()
                .all(|t| (0.0..=90.0).contains(t))
            && self.phi_edges_deg.iter().all(|p| p.is_finite())
    }

    fn value(&self, i: usize, j: usize) -> f64 {
        self.values
            .get(i)
            .and_then(|r| r.get(j))
            .copied()
            .unwrap_or(f64::NAN)
    }

    pub(crate) fn scene(&self, width: u32, height: u32) -> Scene {
        let mut scene = Scene::new(width, height, &self.title);
        let st = Style::for_size(scene.width, scene.height);
        let (w, h) = (scene.width, scene.height);
        let ok = self.edges_ok();
        let (n_t, n_p) = if ok {
            (self.theta_edges_deg.len() - 1, self.phi_edges_deg.len() - 1)
        } else {
            (0, 0)
        };

        // Colour scale.
        let mut finite = Vec::new();
        for i in 0..n_t {
            for j in 0..n_p {
                let v = self.value(i, j);
                if v.is_finite() && (!self.log_scale || v > 0.0) {
                    finite.push(v);
                }
            }
        }
        let has_data = !finite.is_empty();
        let fit = super::line::min_max(&finite);

        // Layout: colour bar block at the right, disc in the rest.
        let top = if self.title.is_empty() {
            st.pad
        } else {
            st.pad + font::cap_height(st.title_fs) + st.pad * 1.6
        };
        let note_h = font::cap_height(st.tick_fs) + st.pad * 1.5;
        let bar_w = st.fs * 1.1;
        let bar_top = top + st.fs;
        let bar_h = (h - bar_top - note_h - st.fs).max(20.0);
        let target = ((bar_h / (st.fs * 3.0)) as usize).clamp(3, 8);
        let scale = match (self.range, self.log_scale) {
            (Some((a, b)), false) => Axis::linear(a, b, true, target),
            (None, false) => {
                let t = ticks::ticks_within(fit.0, fit.1, target);
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
            (Some((a, b)), true) => Axis::log(a, b, true, target),
            (None, true) => Axis::log(fit.0, fit.1, true, target),
        };
        let label_w = scale.max_label_width(st.tick_fs);
        let block_w = bar_w + st.tick_len + st.pad * 0.6 + label_w + st.pad * 1.2 + st.fs + st.pad;
        let area_w = (w - block_w - st.pad * 2.0).max(20.0);
        let area_h = (h - top - note_h).max(20.0);
        let (phi_lo, phi_hi) = if ok {
            (self.phi_edges_deg[0], self.phi_edges_deg[n_p])
        } else {
            (0.0, 360.0)
        };
        let full = phi_hi - phi_lo >= 359.999;
        // Fit the drawn sector (unit radius, y up) into the area, leaving room for labels.
        let (ux0, ux1, uy0, uy1) = sector_bounds(phi_lo, phi_hi);
        let rim_label = st.tick_fs * 2.6;
        let radius = ((area_w - 2.0 * rim_label) / (ux1 - ux0))
            .min((area_h - 2.0 * rim_label) / (uy1 - uy0))
            .max(5.0);
        let c = [
            st.pad + area_w / 2.0 - radius * (ux0 + ux1) / 2.0,
            top + area_h / 2.0 + radius * (uy0 + uy1) / 2.0,
        ];
        let at = |r: f64, phi_deg: f64| -> P {
            let a = phi_deg.to_radians();
            [c[0] + r * a.cos(), c[1] - r * a.sin()]
        };

        // Cells.
        let seam = 1.0;
        for i in 0..n_t {
            let (t0, t1) = (self.theta_edges_deg[i], self.theta_edges_deg[i + 1]);
            let (r0, r1) = (
                radius * t0.to_radians().sin(),
                radius * t1.to_radians().sin(),
            );
            for j in 0..n_p {
                let (p0, p1) = (self.phi_edges_deg[j], self.phi_edges_deg[j + 1]);
                let v = self.value(i, j);
                let f = scale.frac(v);
                let color = if f.is_finite() { viridis(f) } else { NO_DATA };
                // Arcs in steps of at most 3°, outer edge forward, inner edge back.
                let n = (((p1 - p0) / 3.0).ceil() as usize).max(1);
                let mut poly: Vec<P> = (0..=n)
                    .map(|k| at(r1, p0 + (p1 - p0) * k as f64 / n as f64))
                    .collect();
                if r0 > 0.0 {
                    poly.extend(
                        (0..=n)
                            .rev()
                            .map(|k| at(r0, p0 + (p1 - p0) * k as f64 / n as f64)),
                    );
                } else {
                    poly.push(c);
                }
                scene.fill_seamless(poly, color, seam);
            }
        }

        // Grid: rings at 30° and 60°, spokes every 45° (within the φ range), rim.
        let grid = WHITE.with_alpha(0.55);
        let arc = |r: f64| -> Vec<P> {
            let n = (((phi_hi - phi_lo) / 2.0).ceil() as usize).max(2);
            (0..=n)
                .map(|k| at(r, phi_lo + (phi_hi - phi_lo) * k as f64 / n as f64))
                .collect()
        };
        for t in [30.0_f64, 60.0] {
            scene.stroke(arc(radius * t.to_radians().sin()), grid, 1.0);
        }
        let mut spokes = Vec::new();
        let mut k = (phi_lo / 45.0).ceil() as i64;
        while (k as f64) * 45.0 <= phi_hi + 1e-9 {
            spokes.push(k as f64 * 45.0);
            k += 1;
        }
        for &p in &spokes {
            scene.line(c, at(radius, p), grid, 1.0);
        }
        let mut rim = arc(radius);
        if !full {
            rim.insert(0, c);
            rim.push(c);
        }
        scene.stroke(rim, AXIS, 1.2);

        // Azimuth labels outside the rim; θ labels along the lowest spoke.
        for &p in &spokes {
            if full && (p - phi_hi).abs() < 1e-9 {
                continue; // 360° sits on 0°
            }
            let q = at(radius + st.tick_fs * 1.4, p);
            let deg = p.rem_euclid(360.0);
            scene.text(
                q,
                st.tick_fs,
                Anchor::Middle,
                VAlign::Middle,
                false,
                INK,
                1.0,
                &format!("φ {deg:.0}°"),
            );
        }
        // θ labels: inside the disc between two spokes, or just below the first spoke of a
        // sector (outside its data).
        let label_phi = if full { -22.5 } else { phi_lo };
        let label_fs = st.tick_fs * 0.9;
        let th = font::cap_height(label_fs);
        for t in [30.0_f64, 60.0, 90.0] {
            let p = at(radius * t.to_radians().sin(), label_phi);
            let text = format!("{t:.0}°");
            let tw = font::text_width(&text, label_fs);
            let (x, y) = if full {
                (p[0] + st.pad * 0.3, p[1])
            } else {
                // Below the spoke: offset perpendicular to it, clockwise side.
                let a = (label_phi - 90.0).to_radians();
                let d = th * 0.8 + 3.0;
                (p[0] + d * a.cos() - tw / 2.0, p[1] - d * a.sin())
            };
            scene.rect(
                x - 2.0,
                y - th / 2.0 - 2.0,
                tw + 4.0,
                th + 4.0,
                WHITE.with_alpha(0.75),
            );
            scene.text(
                [x, y],
                label_fs,
                Anchor::Start,
                VAlign::Middle,
                false,
                INK,
                1.0,
                &text,
            );
        }
        scene.text(
            [st.pad + area_w / 2.0, h - st.pad],
            st.tick_fs,
            Anchor::Middle,
            VAlign::Baseline,
            false,
            AXIS,
            1.0,
            "θ from the normal: 0° at the centre, radius ∝ sin θ",
        );
        if !has_data {
            scene.text(
                c,
                st.fs,
                Anchor::Middle,
                VAlign::Middle,
                false,
                AXIS,
                1.0,
                if ok { "no data" } else { "no valid bins" },
            );
        }

        // Colour bar.
        let bx = w - block_w + st.pad * 0.5;
        let slices = 96;
        for k in 0..slices {
            let f0 = k as f64 / slices as f64;
            let y_top = bar_top + bar_h * (1.0 - (k + 1) as f64 / slices as f64);
            let color = viridis(f0 + 0.5 / slices as f64);
            // Overlap by half a pixel so no seams show between slices.
            scene.rect(bx, y_top - 0.5, bar_w, bar_h / slices as f64 + 1.0, color);
        }
        scene.rect_outline(bx, bar_top, bar_w, bar_h, AXIS, 1.0);
        for (v, label) in scale.ticks.iter().zip(&scale.labels) {
            let f = scale.frac(*v);
            if !(-1e-9..=1.0 + 1e-9).contains(&f) {
                continue;
            }
            let y = bar_top + bar_h * (1.0 - f);
            scene.line([bx + bar_w, y], [bx + bar_w + st.tick_len, y], AXIS, 1.0);
            scene.text(
                [bx + bar_w + st.tick_len + st.pad * 0.6, y],
                st.tick_fs,
                Anchor::Start,
                VAlign::Middle,
                false,
                INK,
                1.0,
                label,
            );
        }
        if !self.value_label.is_empty() {
            scene.text(
                [
                    bx + bar_w + st.tick_len + st.pad * 1.2 + label_w + font::cap_height(st.fs),
                    bar_top + bar_h / 2.0,
                ],
                st.fs,
                Anchor::Middle,
                VAlign::Baseline,
                true,
                INK,
                1.0,
                &self.value_label,
            );
        }
        axes::draw_title(&mut scene, &st, &self.title, w / 2.0);
        scene
    }
}

drawable!(PolarMap);

/// Bounding box (x0, x1, y0, y1) of the unit-radius sector from `phi_lo` to `phi_hi`
/// degrees, centre included, y up.
fn sector_bounds(phi_lo: f64, phi_hi: f64) -> (f64, f64, f64, f64) {
    if phi_hi - phi_lo >= 360.0 - 1e-9 {
        return (-1.0, 1.0, -1.0, 1.0);
    }
    let mut pts = vec![(0.0_f64, 0.0_f64)];
    for a in [phi_lo, phi_hi] {
        pts.push((a.to_radians().cos(), a.to_radians().sin()));
    }
    // Axis directions crossed by the arc.
    let mut k = (phi_lo / 90.0).ceil() as i64;
    while (k as f64) * 90.0 <= phi_hi {
        let a = (k as f64 * 90.0).to_radians();
        pts.push((a.cos(), a.sin()));
        k += 1;
    }
    let x0 = pts.iter().map(|p| p.0).fold(f64::INFINITY, f64::min);
    let x1 = pts.iter().map(|p| p.0).fold(f64::NEG_INFINITY, f64::max);
    let y0 = pts.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
    let y1 = pts.iter().map(|p| p.1).fold(f64::NEG_INFINITY, f64::max);
    // A thin sector would blow up the scale: keep at least a quarter of a radius each way.
    (x0.min(x1 - 0.25), x1, y0.min(y1 - 0.25), y1)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sector_bounds_cover_the_drawn_part() {
        assert_eq!(sector_bounds(0.0, 360.0), (-1.0, 1.0, -1.0, 1.0));
        let (x0, x1, y0, y1) = sector_bounds(0.0, 90.0);
        assert!(x0.abs() < 1e-12 && (x1 - 1.0).abs() < 1e-12);
        assert!(y0.abs() < 1e-12 && (y1 - 1.0).abs() < 1e-12);
        let (x0, x1, _, y1) = sector_bounds(0.0, 180.0);
        assert!((x0 + 1.0).abs() < 1e-12 && (x1 - 1.0).abs() < 1e-12 && (y1 - 1.0).abs() < 1e-12);
    }

    #[test]
    fn colour_map_ends_are_the_viridis_ends() {
        assert_eq!(viridis(0.0), VIRIDIS[0]);
        assert_eq!(viridis(1.0), VIRIDIS[9]);
        assert_eq!(viridis(-3.0), VIRIDIS[0]);
        assert_eq!(viridis(f64::NAN), VIRIDIS[0]);
    }
}
