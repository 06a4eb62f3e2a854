//! Plots: SVG is well-formed XML (W3C XML 1.0, via `roxmltree`), PNG decodes (PNG spec,
//! ISO/IEC 15948, via `image`) at the requested size with the data drawn where it belongs,
//! output is deterministic, and axis ticks follow the 1-2-5 rule (P. S. Heckbert, "Nice
//! numbers for graph labels", Graphics Gems, 1990; cases worked by hand below).

use lightfold::report::plot::ticks::{nice_step, nice_ticks, tick_labels, ticks_within};
use lightfold::report::{
    BarChart, BarGroup, Color, Layer, LinePlot, Plot, PolarMap, Series, StackedArea,
};

const RED: Color = Color::rgb(255, 0, 0);
const GREEN: Color = Color::rgb(0, 200, 0);

fn decode(png: &[u8]) -> image::RgbaImage {
    image::load_from_memory_with_format(png, image::ImageFormat::Png)
        .expect("PNG decodes")
        .to_rgba8()
}

/// Pixels within `tol` of `c` in every channel.
fn pixels_of(img: &image::RgbaImage, c: Color, tol: u8) -> Vec<(u32, u32)> {
    img.enumerate_pixels()
        .filter(|(_, _, p)| {
            p[0].abs_diff(c.r) <= tol && p[1].abs_diff(c.g) <= tol && p[2].abs_diff(c.b) <= tol
        })
        .map(|(x, y, _)| (x, y))
        .collect()
}

fn svg_is_well_formed(svg: &str, w: u32, h: u32) {
    let doc = roxmltree::Document::parse(svg).unwrap_or_else(|e| panic!("bad SVG: {e}"));
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg");
    assert_eq!(root.attribute("width"), Some(w.to_string().as_str()));
    assert_eq!(root.attribute("height"), Some(h.to_string().as_str()));
    let paths = root
        .descendants()
        .filter(|n| n.has_tag_name("path"))
        .count();
    assert!(paths > 5, "only {paths} paths");
}

fn all_plots() -> Vec<(&'static str, Box<dyn Plot>)> {
    let x: Vec<f64> = (0..50).map(|i| 300.0 + 18.0 * i as f64).collect();
    let y: Vec<f64> = x.iter().map(|v| (v / 200.0).sin().abs()).collect();
    vec![
        (
            "line",
            Box::new(
                LinePlot::new("Title & <tag>", "λ (nm)", "R")
                    .series(Series::line("a", x.clone(), y.clone()))
                    .series(Series::dashed(
                        "b",
                        x.clone(),
                        y.iter().map(|v| v * 0.5).collect(),
                    ))
                    .series(Series::points("c", x.clone(), y.clone()))
                    .series(Series::with_band(
                        "d",
                        x.clone(),
                        y.clone(),
                        y.iter().map(|v| v - 0.1).collect(),
                        y.iter().map(|v| v + 0.1).collect(),
                    )),
            ),
        ),
        (
            "area",
            Box::new(
                StackedArea::new("Stack", "λ (nm)", "fraction", x.clone())
                    .layer(Layer::new("A", y.clone()))
                    .layer(Layer::new("B", y.iter().map(|v| 1.0 - v).collect())),
            ),
        ),
        (
            "bars",
            Box::new(
                BarChart::new("Bars", "J (mA/cm²)", vec!["one".into(), "two".into()])
                    .group(BarGroup::new("g1", vec![1.0, -0.5]).errors(vec![0.1, 0.1]))
                    .group(BarGroup::new("g2", vec![f64::NAN, 2.0])),
            ),
        ),
        (
            "polar",
            Box::new(PolarMap::new(
                "Polar",
                "radiance",
                vec![0.0, 30.0, 60.0, 90.0],
                vec![0.0, 90.0, 180.0, 270.0, 360.0],
                vec![vec![1.0, 2.0, 3.0, 4.0]; 3],
            )),
        ),
    ]
}

#[test]
fn every_plot_gives_well_formed_svg_and_a_png_of_the_right_size() {
    for (name, plot) in all_plots() {
        let svg = plot.to_svg(640, 400);
        svg_is_well_formed(&svg, 640, 400);
        let img = decode(&plot.to_png(640, 400));
        assert_eq!(img.dimensions(), (640, 400), "{name}");
        let non_white = img.pixels().filter(|p| p.0 != [255, 255, 255, 255]).count();
        assert!(non_white > 1000, "{name}: only {non_white} drawn pixels");
    }
}

#[test]
fn output_is_deterministic() {
    for (name, plot) in all_plots() {
        assert_eq!(plot.to_svg(500, 300), plot.to_svg(500, 300), "{name}");
        assert_eq!(plot.to_png(500, 300), plot.to_png(500, 300), "{name}");
    }
}

#[test]
fn sizes_are_clamped() {
    let plot = LinePlot::new("", "", "");
    assert_eq!(decode(&plot.to_png(1, 0)).dimensions(), (64, 64));
}

#[test]
fn a_horizontal_series_is_drawn_as_one_horizontal_band_of_pixels() {
    let plot = LinePlot::new("", "x", "y")
        .series(Series::line("", vec![0.0, 10.0], vec![5.0, 5.0]).color(RED))
        .x_range(0.0, 10.0)
        .y_range(0.0, 10.0);
    let img = decode(&plot.to_png(600, 400));
    let red = pixels_of(&img, RED, 40);
    assert!(!red.is_empty(), "series not drawn");
    let (ys_min, ys_max) = red
        .iter()
        .fold((u32::MAX, 0), |(a, b), &(_, y)| (a.min(y), b.max(y)));
    assert!(ys_max - ys_min <= 4, "line spans rows {ys_min}..{ys_max}");
    let (xs_min, xs_max) = red
        .iter()
        .fold((u32::MAX, 0), |(a, b), &(x, _)| (a.min(x), b.max(x)));
    assert!(xs_max - xs_min > 400, "line only {xs_min}..{xs_max}");
    // y = 5 of 0..10 sits half-way between the y pixels of the 0 and 10 grid lines, which
    // are the top and bottom of the plot box; the box's vertical middle is near the
    // picture's middle give or take the title/label margins.
    let mid = (ys_min + ys_max) / 2;
    assert!((150..250).contains(&mid), "line at row {mid}");
}

#[test]
fn points_out_of_range_and_nan_are_not_drawn() {
    let plot = LinePlot::new("", "", "")
        .series(Series::points("", vec![5.0, 50.0, f64::NAN], vec![5.0, 5.0, 5.0]).color(RED))
        .x_range(0.0, 10.0)
        .y_range(0.0, 10.0);
    let img = decode(&plot.to_png(400, 300));
    let red = pixels_of(&img, RED, 40);
    assert!(!red.is_empty());
    let width = red.iter().map(|p| p.0).max().unwrap() - red.iter().map(|p| p.0).min().unwrap();
    assert!(width < 15, "more than one marker drawn ({width} px wide)");
}

#[test]
fn log_axis_skips_non_positive_values_and_labels_decades() {
    let plot = LinePlot::new("", "depth (µm)", "G (cm⁻³s⁻¹)")
        .series(Series::line(
            "",
            vec![0.0, 1.0, 2.0, 3.0],
            vec![1e20, 0.0, -1.0, 1e17],
        ))
        .log_y(true);
    let svg = plot.to_svg(500, 300);
    svg_is_well_formed(&svg, 500, 300);
    assert!(svg.contains("aria-label=\"10¹⁷\""), "decade label missing");
    assert!(svg.contains("aria-label=\"10²⁰\""), "decade label missing");
}

#[test]
fn empty_and_ragged_data_draw_without_panicking() {
    let empty = LinePlot::new("nothing", "x", "y");
    assert!(empty.to_svg(300, 200).contains("aria-label=\"no data\""));
    let ragged = LinePlot::new("", "", "")
        .series(Series::line("r", vec![1.0, 2.0, 3.0], vec![1.0]))
        .series(Series::with_band(
            "b",
            vec![1.0, 2.0],
            vec![1.0, 2.0],
            vec![],
            vec![3.0],
        ));
    decode(&ragged.to_png(300, 200));
    let bad_polar = PolarMap::new("", "", vec![0.0, 120.0], vec![10.0, 5.0], vec![]);
    assert!(bad_polar.to_svg(300, 300).contains("no valid bins"));
    let no_bars = BarChart::new("", "", vec![]);
    decode(&no_bars.to_png(300, 200));
    let no_layers = StackedArea::new("", "", "", vec![]);
    decode(&no_layers.to_png(300, 200));
}

#[test]
fn stacked_layers_are_drawn_bottom_up() {
    let x = vec![0.0, 1.0, 2.0];
    let plot = StackedArea::new("", "", "", x)
        .layer(Layer::new("bottom", vec![0.5; 3]).color(RED))
        .layer(Layer::new("top", vec![0.5; 3]).color(GREEN));
    let img = decode(&plot.to_png(500, 400));
    let mean_y =
        |px: &[(u32, u32)]| px.iter().map(|p| f64::from(p.1)).sum::<f64>() / px.len() as f64;
    let (red, green) = (pixels_of(&img, RED, 10), pixels_of(&img, GREEN, 10));
    assert!(red.len() > 10_000 && green.len() > 10_000);
    assert!(
        mean_y(&red) > mean_y(&green) + 50.0,
        "bottom layer is not below"
    );
    // Equal layers cover equal areas (legend swatches add a few pixels to each).
    let ratio = red.len() as f64 / green.len() as f64;
    assert!((ratio - 1.0).abs() < 0.05, "areas differ: ratio {ratio}");
}

#[test]
fn bar_lengths_are_proportional_to_values() {
    let chart = BarChart::new("", "", vec!["long".into(), "short".into()])
        .group(BarGroup::new("", vec![4.0, 2.0]).color(RED))
        .value_range(0.0, 5.0);
    let img = decode(&chart.to_png(600, 300));
    let red = pixels_of(&img, RED, 10);
    // Split the red pixels into the upper and the lower bar; compare their widths.
    let mid = (red.iter().map(|p| p.1).min().unwrap() + red.iter().map(|p| p.1).max().unwrap()) / 2;
    let width = |upper: bool| {
        let xs: Vec<u32> = red
            .iter()
            .filter(|p| (p.1 < mid) == upper)
            .map(|p| p.0)
            .collect();
        f64::from(xs.iter().max().unwrap() - xs.iter().min().unwrap() + 1)
    };
    let ratio = width(true) / width(false);
    assert!((ratio - 2.0).abs() < 0.04, "bar ratio {ratio}, expected 2");
}

#[test]
fn polar_map_colours_follow_the_values() {
    // One cell at the top of the range (viridis yellow), the rest at the bottom (purple).
    let map = PolarMap::new(
        "",
        "",
        vec![0.0, 45.0, 90.0],
        vec![0.0, 180.0, 360.0],
        vec![vec![0.0, 0.0], vec![1.0, 0.0]],
    )
    .range(0.0, 1.0);
    let img = decode(&map.to_png(500, 400));
    let yellow = pixels_of(&img, Color::rgb(0xfd, 0xe7, 0x25), 6);
    let purple = pixels_of(&img, Color::rgb(0x44, 0x01, 0x54), 6);
    assert!(yellow.len() > 2000 && purple.len() > 2000);
    // The yellow cell is the outer ring for φ in 0–180°, i.e. the upper half of the disc.
    let disc: Vec<&(u32, u32)> = yellow.iter().filter(|p| p.0 < 380).collect();
    let purple_disc: Vec<&(u32, u32)> = purple.iter().filter(|p| p.0 < 380).collect();
    let mean = |v: &[&(u32, u32)]| v.iter().map(|p| f64::from(p.1)).sum::<f64>() / v.len() as f64;
    assert!(
        mean(&disc) + 30.0 < mean(&purple_disc),
        "yellow cell not in the upper half"
    );
}

#[test]
fn nice_steps_follow_the_1_2_5_rule() {
    // (raw step, expected) with Heckbert's rounding at 1.5, 3 and 7.
    for (raw, expected) in [
        (0.2, 0.2),
        (0.14, 0.1),
        (0.16, 0.2),
        (2.775, 2.0),
        (3.2, 5.0),
        (6.9, 5.0),
        (7.1, 10.0),
        (111.1, 100.0),
        (4.4e-7, 5e-7),
    ] {
        let s = nice_step(raw).value();
        assert!(
            (s - expected).abs() <= 1e-12 * expected,
            "{raw} → {s}, expected {expected}"
        );
    }
}

#[test]
fn nice_ticks_on_worked_cases() {
    // [0, 1], 6 ticks: step 1/5 = 0.2 exactly.
    let t = nice_ticks(0.0, 1.0, 6);
    assert_eq!(t.values, [0.0, 0.2, 0.4, 0.6, 0.8, 1.0]);
    assert_eq!(t.range, (0.0, 1.0));
    // [-3.2, 7.9], 5 ticks: raw step 11.1/4 = 2.775 → 2; widened to [-4, 8].
    let t = nice_ticks(-3.2, 7.9, 5);
    assert_eq!(t.values, [-4.0, -2.0, 0.0, 2.0, 4.0, 6.0, 8.0]);
    // [300, 1200] nm, 10 ticks: raw 100 → 100.
    let t = nice_ticks(300.0, 1200.0, 10);
    assert_eq!(t.values.len(), 10);
    assert_eq!((t.values[0], t.values[9]), (300.0, 1200.0));
    // Decimal steps are exact: 0.1 × 3 is written 0.3, not 0.30000000000000004.
    let t = nice_ticks(0.0, 0.5, 6);
    assert_eq!(t.values[3], 0.3);
    // A total a hair above 1 (rounding in R + A + T) does not add a tick.
    assert_eq!(nice_ticks(0.0, 1.0 + 1e-12, 6).range, (0.0, 1.0));
    // Fixed range: ticks inside only.
    let t = ticks_within(0.05, 0.97, 6);
    assert_eq!(t.values, [0.2, 0.4, 0.6, 0.8]);
    assert_eq!(t.range, (0.05, 0.97));
    // A zero-width range is widened, not divided by zero.
    let t = nice_ticks(2.0, 2.0, 5);
    assert!(t.values.len() >= 2 && t.range.0 < 2.0 && t.range.1 > 2.0);
}

#[test]
fn tick_labels_use_the_decimals_of_the_step_and_a_true_minus() {
    let t = nice_ticks(-0.5, 0.5, 5);
    assert_eq!(
        tick_labels(&t.values, t.step),
        ["−0.6", "−0.4", "−0.2", "0", "0.2", "0.4", "0.6"]
    );
    let t = nice_ticks(0.0, 3e-5, 4);
    assert_eq!(
        tick_labels(&t.values, t.step),
        ["0", "10⁻⁵", "2×10⁻⁵", "3×10⁻⁵"]
    );
    let t = nice_ticks(300.0, 1200.0, 5);
    assert_eq!(tick_labels(&t.values, t.step)[0], "200");
}
