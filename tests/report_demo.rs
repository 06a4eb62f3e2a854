//! A demo results folder made from synthetic curves (smooth made-up shapes, not physics),
//! for looking at the plots and for the browser check `tests/browser/check_report.sh`.
//!
//! Run: `cargo test --test report_demo -- --ignored` (writes to `target/report-demo/`, or to
//! the folder in `LIGHTFOLD_REPORT_DEMO_DIR`).

use std::path::PathBuf;

use lightfold::report::html::Page;
use lightfold::report::{
    BarChart, BarGroup, Column, CsvWriter, Layer, LinePlot, PolarMap, ResultsDir, Series,
    StackedArea,
};

fn demo_dir() -> PathBuf {
    std::env::var_os("LIGHTFOLD_REPORT_DEMO_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target/report-demo"))
}

fn logistic(x: f64) -> f64 {
    1.0 / (1.0 + (-x).exp())
}

#[test]
#[ignore = "writes a demo report folder for manual and browser checks"]
fn write_demo_report() {
    let dir = ResultsDir::create(&demo_dir(), true).unwrap();

    // Synthetic spectra: smooth shapes only.
    let wl: Vec<f64> = (0..=90).map(|i| 300.0 + 10.0 * i as f64).collect();
    let r: Vec<f64> = wl
        .iter()
        .map(|&l| {
            0.015
                + 0.09 * (-((l - 330.0) / 45.0).powi(2)).exp()
                + 0.32 * logistic((l - 1060.0) / 35.0)
        })
        .collect();
    let a_film: Vec<f64> = wl
        .iter()
        .map(|&l| 0.12 * (-(l - 300.0) / 35.0).exp())
        .collect();
    let a_rear: Vec<f64> = wl
        .iter()
        .map(|&l| 0.05 * logistic((l - 1000.0) / 30.0))
        .collect();
    let t: Vec<f64> = wl
        .iter()
        .map(|&l| 0.03 * logistic((l - 1120.0) / 20.0))
        .collect();
    let a_si: Vec<f64> = (0..wl.len())
        .map(|i| 1.0 - r[i] - a_film[i] - a_rear[i] - t[i])
        .collect();
    let se: Vec<f64> = wl
        .iter()
        .map(|&l| 0.004 + 0.01 * logistic((l - 1000.0) / 40.0))
        .collect();
    let lo: Vec<f64> = a_si.iter().zip(&se).map(|(a, s)| a - 2.0 * s).collect();
    let hi: Vec<f64> = a_si.iter().zip(&se).map(|(a, s)| a + 2.0 * s).collect();
    let lambertian: Vec<f64> = wl
        .iter()
        .map(|&l| 0.985 - 0.6 * logistic((l - 1110.0) / 40.0))
        .collect();
    let wl_meas: Vec<f64> = (0..=17).map(|i| 350.0 + 50.0 * i as f64).collect();
    let r_meas: Vec<f64> = wl_meas
        .iter()
        .map(|&l| {
            0.02 + 0.09 * (-((l - 330.0) / 45.0).powi(2)).exp()
                + 0.31 * logistic((l - 1065.0) / 35.0)
        })
        .collect();

    let spectrum = LinePlot::new(
        "Where the light goes (synthetic demo data)",
        "wavelength λ (nm)",
        "fraction of incident photons",
    )
    .series(Series::with_band(
        "absorbed in Si (±2σ)",
        wl.clone(),
        a_si.clone(),
        lo,
        hi,
    ))
    .series(Series::line("reflected", wl.clone(), r.clone()))
    .series(Series::dashed(
        "Lambertian reference",
        wl.clone(),
        lambertian.clone(),
    ))
    .series(Series::points("measured R", wl_meas, r_meas))
    .y_range(0.0, 1.0);

    let stack = StackedArea::new(
        "Spectral breakdown (synthetic demo data)",
        "wavelength λ (nm)",
        "fraction of incident photons",
        wl.clone(),
    )
    .layer(Layer::new("absorbed in Si", a_si.clone()))
    .layer(Layer::new("absorbed in SiNₓ film", a_film.clone()))
    .layer(Layer::new("absorbed at rear", a_rear.clone()))
    .layer(Layer::new("transmitted", t.clone()))
    .layer(Layer::new("reflected + escaped", r.clone()))
    .overlay(Series::dashed("4n² limit", wl.clone(), lambertian));

    let categories: Vec<String> = [
        "front reflection",
        "escape through front",
        "parasitic: SiNₓ",
        "parasitic: rear metal",
        "transmission",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    let losses = BarChart::new(
        "Current losses vs 46.3 mA/cm² (synthetic)",
        "current density (mA/cm²)",
        categories.clone(),
    )
    .group(
        BarGroup::new("design A", vec![1.42, 0.87, 0.31, 0.55, 0.12])
            .errors(vec![0.02, 0.03, 0.01, 0.02, 0.01]),
    );
    let grouped = BarChart::new(
        "Three designs compared (synthetic)",
        "current density (mA/cm²)",
        categories,
    )
    .group(BarGroup::new(
        "upright pyramids",
        vec![1.42, 0.87, 0.31, 0.55, 0.12],
    ))
    .group(BarGroup::new(
        "inverted pyramids",
        vec![1.10, 0.95, 0.29, 0.61, 0.10],
    ))
    .group(BarGroup::new(
        "planar + ARC",
        vec![2.95, 0.21, 0.33, 0.40, 0.35],
    ))
    .decimals(2);

    // Directions inside the wafer: 10 polar bins equal in sin²θ, 36 azimuthal bins.
    let n_t = 10;
    let theta_edges: Vec<f64> = (0..=n_t)
        .map(|i| ((i as f64 / n_t as f64).sqrt()).asin().to_degrees())
        .collect();
    let phi_edges: Vec<f64> = (0..=36).map(|j| 10.0 * j as f64).collect();
    let values: Vec<Vec<f64>> = (0..n_t)
        .map(|i| {
            let th = 0.5 * (theta_edges[i] + theta_edges[i + 1]);
            (0..36)
                .map(|j| {
                    let ph = (10.0 * j as f64 + 5.0).to_radians();
                    let lobe = (-((th - 42.0) / 8.0).powi(2)).exp();
                    0.2 + lobe * (0.6 + 0.4 * (4.0 * ph).cos())
                })
                .collect()
        })
        .collect();
    let polar = PolarMap::new(
        "Light entering the wafer at 800 nm (synthetic)",
        "radiance (a.u.)",
        theta_edges,
        phi_edges,
        values,
    );

    let depth: Vec<f64> = (0..=100).map(|i| 1.8 * i as f64).collect();
    let g: Vec<f64> = depth
        .iter()
        .map(|&z| 3e22 * (-z / 0.8).exp() + 4e20 * (-z / 60.0).exp())
        .collect();
    let generation = LinePlot::new(
        "Generation profile (synthetic)",
        "depth z (µm)",
        "G (cm⁻³s⁻¹)",
    )
    .series(Series::line("", depth.clone(), g.clone()))
    .log_y(true);

    let plots: [(&str, &str, &dyn lightfold::report::Plot, u32, u32); 6] = [
        ("spectrum", "Fractions vs wavelength.", &spectrum, 820, 480),
        (
            "breakdown",
            "Stacked to 1 at every wavelength.",
            &stack,
            820,
            440,
        ),
        (
            "losses",
            "Loss breakdown with standard errors.",
            &losses,
            820,
            300,
        ),
        (
            "designs",
            "Grouped bars: one colour per design.",
            &grouped,
            820,
            420,
        ),
        ("angles", "Equal-étendue polar map.", &polar, 640, 520),
        ("generation", "Logarithmic y axis.", &generation, 820, 420),
    ];
    let mut page = Page::new("lightfold report — synthetic demo <not physics>");
    page.paragraph(
        "This page is made from synthetic curves to show every plot type; none of the numbers \
         is a simulation result. Text with <angle brackets> & ampersands is escaped.",
    )
    .key_values(
        "Summary (synthetic)",
        [
            ("Jsc, silicon (mA/cm²)", "41.23 ± 0.05"),
            ("Lambertian limit (mA/cm²)", "43.10"),
            ("rays traced", "1 200 000"),
            ("energy balance |R+A+T−1|", "3e-16"),
        ],
    );
    for (name, caption, plot, w, h) in plots {
        page.heading(caption);
        page.figure(name, caption, plot, w, h);
        dir.write_plot(name, plot, w, h).unwrap();
    }

    // CSV and JSON next to the report.
    let mut csv = CsvWriter::new(&[
        Column::new("wavelength", "nm"),
        Column::new("reflectance", ""),
        Column::new("absorptance_si", ""),
    ]);
    csv.comment("synthetic demo data, not physics")
        .comment("made by tests/report_demo.rs");
    csv.columns_f64(&[&wl, &r, &a_si]).unwrap();
    dir.write_text("spectrum.csv", &csv.finish()).unwrap();
    #[derive(serde::Serialize)]
    struct Summary {
        note: &'static str,
        jsc_ma_cm2: f64,
    }
    dir.write_json(
        "summary.json",
        &Summary {
            note: "synthetic demo",
            jsc_ma_cm2: 41.23,
        },
    )
    .unwrap();

    page.table(
        "First rows of spectrum.csv",
        vec!["wavelength (nm)".into(), "R".into(), "A(Si)".into()],
        (0..5)
            .map(|i| {
                vec![
                    format!("{:.0}", wl[i]),
                    format!("{:.4}", r[i]),
                    format!("{:.4}", a_si[i]),
                ]
            })
            .collect(),
    )
    .files(
        "Files",
        [
            ("summary.json", "headline numbers"),
            ("spectrum.csv", "R and A vs wavelength"),
            ("spectrum.png", "the first figure as a picture"),
        ],
    )
    .provenance(
        "program",
        format!("lightfold {}", env!("CARGO_PKG_VERSION")),
    )
    .provenance("data", "synthetic (tests/report_demo.rs)");
    let path = dir.write_text("report.html", &page.render()).unwrap();
    println!("demo report: {}", path.display());
}
