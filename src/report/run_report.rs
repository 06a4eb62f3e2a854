//! The results folder of `lightfold run`: summary.json (the contract for scripts), CSV
//! tables, plots as SVG and PNG, and one self-contained report.html. Reads a
//! `simulate::RunResult`; computes no physics beyond unit conversion and sums for display.

use super::ReportError;
use super::csv::{Column, CsvWriter};
use super::files::ResultsDir;
use super::html::Page;
use super::plot::{BarChart, BarGroup, Layer, LinePlot, Plot, PolarMap, Series, StackedArea};
use crate::simulate::RunResult;
use serde_json::json;

/// Version of the summary.json layout (documented in docs/results.md).
pub const SUMMARY_FORMAT_VERSION: u32 = 1;
/// Plot size in pixels.
const W: u32 = 900;
const H: u32 = 520;

/// The machine-readable summary (also printed by `run --json`).
pub fn summary_json(r: &RunResult) -> serde_json::Value {
    json!({
        "format": "lightfold-summary",
        "format_version": SUMMARY_FORMAT_VERSION,
        "scenario": r.scenario,
        "lightfold_version": r.version,
        "mode": r.mode,
        "seed": r.seed,
        "spectrum": r.spectrum,
        "wavelength_range_nm": [r.wavelengths.first().map(|w| w.wavelength_nm), r.wavelengths.last().map(|w| w.wavelength_nm)],
        "absorber": {"name": r.absorber_name, "thickness_um": r.absorber_thickness_um},
        "photocurrents_ma_cm2": r.currents,
        "max_current_ma_cm2": r.max_current_ma_cm2,
        "weighted_reflectance": {"value": r.weighted_reflectance, "band_nm": r.weighting_band_nm, "weighting": "photon flux of the scenario spectrum"},
        "losses_ma_cm2": r.losses,
        "lambertian_references_ma_cm2": {
            "tiedje_yablonovitch": r.limits.tiedje_yablonovitch_ma_cm2,
            "lambertian_exact": r.limits.lambertian_exact_ma_cm2,
            "single_pass": r.limits.single_pass_ma_cm2,
            "double_pass": r.limits.double_pass_ma_cm2,
            "max_to_band_gap": r.limits.max_to_gap_ma_cm2,
        },
        "binning_error": r.binning,
        "energy_audit_max_error": r.energy_error_max,
        "rays_traced": r.rays_total,
        "rays_lost": r.lost_rays_total,
        "rays_event_limited": r.event_limited_rays_total,
        "wall_time_s": r.wall_time_s,
        "assumptions": r.assumptions,
        "note": super::html::ESTIMATE_NOTE,
    })
}

fn spectra_csv(r: &RunResult) -> Result<String, ReportError> {
    let mut cols = vec![
        Column::new("wavelength", "nm"),
        Column::new("reflectance", ""),
        Column::new("reflectance_se", ""),
        Column::new("escape", ""),
        Column::new("escape_se", ""),
        Column::new("transmittance", ""),
        Column::new("transmittance_se", ""),
    ];
    for n in &r.layer_names {
        cols.push(Column::new(format!("A {n}"), ""));
        cols.push(Column::new(format!("A {n} se"), ""));
    }
    for names in &r.film_names {
        for n in names {
            cols.push(Column::new(format!("A {n}"), ""));
            cols.push(Column::new(format!("A {n} se"), ""));
        }
    }
    // Matrix mode: the solver's binning error estimate of every figure, after the others.
    let binning = r.binning.is_some();
    if binning {
        for n in [
            "reflectance_binning",
            "escape_binning",
            "transmittance_binning",
        ] {
            cols.push(Column::new(n, ""));
        }
        for n in &r.layer_names {
            cols.push(Column::new(format!("A {n} binning"), ""));
        }
        for names in &r.film_names {
            for n in names {
                cols.push(Column::new(format!("A {n} binning"), ""));
            }
        }
    }
    let mut w = CsvWriter::new(&cols);
    w.comment(&format!(
        "lightfold {} scenario {} seed {}: fractions of incident power, se = standard error{}",
        r.version,
        r.scenario,
        r.seed,
        if binning {
            ", binning = the matrix solver's binning error estimate (docs/results.md)"
        } else {
            ""
        }
    ));
    w.comment(&format!("transmittance = {}", r.exit_name));
    for wl in &r.wavelengths {
        let mut row = vec![
            wl.wavelength_nm,
            wl.reflectance.value,
            wl.reflectance.std_error,
            wl.escape.value,
            wl.escape.std_error,
            wl.transmittance.value,
            wl.transmittance.std_error,
        ];
        for l in &wl.layers {
            row.extend([l.value, l.std_error]);
        }
        for f in wl.films.iter().flatten() {
            row.extend([f.value, f.std_error]);
        }
        if binning {
            let b = wl.binning_error.as_ref();
            let n_cols = 3 + r.layer_names.len() + r.film_names.iter().flatten().count();
            match b {
                Some(b) => {
                    row.extend([b.reflectance, b.escape, b.transmittance]);
                    row.extend(&b.thick_absorptance);
                    row.extend(b.film_absorptance.iter().flatten());
                }
                None => row.extend(std::iter::repeat_n(f64::NAN, n_cols)),
            }
        }
        w.row_f64(&row)?;
    }
    Ok(w.finish())
}

fn losses_csv(r: &RunResult) -> Result<String, ReportError> {
    let mut w = CsvWriter::new(&[
        Column::new("item", ""),
        Column::new("current", "mA/cm2"),
        Column::new("std_error", "mA/cm2"),
    ]);
    w.comment("photon flux of each loss (and the absorber's collected current) as current density over the wavelength grid");
    use super::csv::Cell;
    let a = r.absorber_current();
    w.row(&[
        Cell::Text(format!("absorbed in {}", a.name)),
        Cell::Num(a.j_ma_cm2),
        Cell::Num(a.std_error_ma_cm2),
    ])?;
    for l in &r.losses {
        w.row(&[
            Cell::Text(l.name.clone()),
            Cell::Num(l.j_ma_cm2),
            Cell::Num(l.std_error_ma_cm2),
        ])?;
    }
    w.row(&[
        Cell::Text("total (A = 1 over the grid)".into()),
        Cell::Num(r.max_current_ma_cm2),
        Cell::Num(0.0),
    ])?;
    Ok(w.finish())
}

fn generation_csv(r: &RunResult) -> Result<String, ReportError> {
    let mut w = CsvWriter::new(&[
        Column::new("depth", "um"),
        Column::new("generation", "cm-3 s-1"),
    ]);
    w.comment(&format!("photogeneration in {} under {}; depth at bin centres, from the absorber's top base plane (negative: inside texture peaks)", r.absorber_name, r.spectrum));
    for (b, g) in r.generation_cm3_s.iter().enumerate() {
        let z = 0.5 * (r.profile_edges_um[b] + r.profile_edges_um[b + 1]);
        w.row_f64(&[z, *g])?;
    }
    Ok(w.finish())
}

fn path_length_csv(r: &RunResult) -> Result<String, ReportError> {
    let mut w = CsvWriter::new(&[
        Column::new("wavelength", "nm"),
        Column::new("path_length_enhancement", ""),
        Column::new("four_n_squared", ""),
        Column::new("absorptance", ""),
        Column::new("tiedje_yablonovitch", ""),
        Column::new("lambertian_exact", ""),
        Column::new("single_pass", ""),
        Column::new("double_pass", ""),
    ]);
    w.comment("Z = -ln(1 - A/(1 - R_front))/(alpha W); references for the same wafer thickness and material");
    for wl in &r.wavelengths {
        let l = &wl.limits;
        w.row_f64(&[
            wl.wavelength_nm,
            wl.path_length_enhancement.unwrap_or(f64::NAN),
            4.0 * l.n * l.n,
            wl.layers[r.absorber].value,
            l.tiedje_yablonovitch,
            l.lambertian_exact,
            l.single_pass,
            l.double_pass,
        ])?;
    }
    Ok(w.finish())
}

fn plots(r: &RunResult) -> Vec<(&'static str, String, Box<dyn Plot>)> {
    let x: Vec<f64> = r.wavelengths.iter().map(|w| w.wavelength_nm).collect();
    let col = |f: &dyn Fn(&crate::simulate::WavelengthResult) -> f64| -> Vec<f64> {
        r.wavelengths.iter().map(f).collect()
    };
    let mut area = StackedArea::new(
        "Where the light goes",
        "wavelength (nm)",
        "fraction of incident power",
        x.clone(),
    );
    area = area.layer(Layer::new(
        format!("A {}", r.layer_names[r.absorber]),
        col(&|w| w.layers[r.absorber].value),
    ));
    for (l, n) in r.layer_names.iter().enumerate() {
        if l != r.absorber {
            area = area.layer(Layer::new(format!("A {n}"), col(&|w| w.layers[l].value)));
        }
    }
    for (i, names) in r.film_names.iter().enumerate() {
        for (k, n) in names.iter().enumerate() {
            area = area.layer(Layer::new(format!("A {n}"), col(&|w| w.films[i][k].value)));
        }
    }
    area = area.layer(Layer::new(
        r.exit_name.clone(),
        col(&|w| w.transmittance.value),
    ));
    area = area.layer(Layer::new("escape", col(&|w| w.escape.value)));
    area = area.layer(Layer::new(
        "front reflection",
        col(&|w| w.reflectance.value - w.escape.value),
    ));
    area = area.y_range(0.0, 1.0);

    let mut cats = vec![format!("absorbed in {}", r.absorber_name)];
    let mut vals = vec![r.absorber_current().j_ma_cm2];
    let mut errs = vec![r.absorber_current().std_error_ma_cm2];
    for l in &r.losses {
        cats.push(l.name.clone());
        vals.push(l.j_ma_cm2);
        errs.push(l.std_error_ma_cm2);
    }
    let bars = BarChart::new("Photon budget", "mA/cm²", cats)
        .group(BarGroup::new("this design", vals).errors(errs));

    let z: Vec<(f64, f64)> = r
        .wavelengths
        .iter()
        .filter_map(|w| w.path_length_enhancement.map(|z| (w.wavelength_nm, z)))
        .collect();
    let four_n2 = col(&|w| 4.0 * w.limits.n * w.limits.n);
    let path = LinePlot::new("Path-length enhancement", "wavelength (nm)", "Z")
        .series(Series::line(
            "Z of this design",
            z.iter().map(|p| p.0).collect(),
            z.iter().map(|p| p.1).collect(),
        ))
        .series(Series::dashed(
            "4n² (Lambertian, weak absorption)",
            x.clone(),
            four_n2,
        ))
        .log_y(true);

    let depth: Vec<f64> = (0..r.generation_cm3_s.len())
        .map(|b| 0.5 * (r.profile_edges_um[b] + r.profile_edges_um[b + 1]))
        .collect();
    let generation = LinePlot::new(
        format!("Photogeneration in {}", r.absorber_name),
        "depth (µm)",
        "G (cm⁻³ s⁻¹)",
    )
    .series(Series::line("G(z)", depth, r.generation_cm3_s.clone()))
    .log_y(true);

    let (np, na) = (r.entering_polar_bins, r.entering_azimuth_bins);
    let theta: Vec<f64> = (0..=np).map(|i| 90.0 * i as f64 / np as f64).collect();
    let phi: Vec<f64> = (0..=na).map(|i| 360.0 * i as f64 / na as f64).collect();
    let values: Vec<Vec<f64>> = (0..np)
        .map(|p| r.entering_map[p * na..(p + 1) * na].to_vec())
        .collect();
    let polar = PolarMap::new(
        format!("Light entering {}", r.absorber_name),
        "photon flux (cm⁻² s⁻¹) per bin",
        theta,
        phi,
        values,
    );

    vec![
        (
            "spectrum",
            "Absorptance, transmittance and reflectance, stacked".into(),
            Box::new(area),
        ),
        (
            "losses",
            "Loss breakdown as current density".into(),
            Box::new(bars),
        ),
        (
            "path_length",
            "Path-length enhancement against the Lambertian 4n²".into(),
            Box::new(path),
        ),
        (
            "generation",
            "Photogeneration profile".into(),
            Box::new(generation),
        ),
        (
            "entering",
            "Direction of the light entering the absorber (polar angle 0–90° as radius ∝ sin θ)"
                .into(),
            Box::new(polar),
        ),
    ]
}

/// Writes the whole results folder; every file through a temporary name and a rename.
pub fn write_run(
    dir: &ResultsDir,
    r: &RunResult,
    scenario_text: &str,
    sources: &[(String, String)],
    plots_on: bool,
) -> Result<(), ReportError> {
    let summary = summary_json(r);
    dir.write_text("spectra.csv", &spectra_csv(r)?)?;
    dir.write_text("losses.csv", &losses_csv(r)?)?;
    dir.write_text("generation.csv", &generation_csv(r)?)?;
    dir.write_text("path_length.csv", &path_length_csv(r)?)?;
    dir.write_json("results.json", r)?;
    dir.write_text("scenario.toml", scenario_text)?;

    let a = r.absorber_current();
    let mut page = Page::new(format!("lightfold: {}", r.scenario));
    page.paragraph(super::html::ESTIMATE_NOTE);
    let mut headline = vec![(
        format!("photocurrent in {}", a.name),
        match a.binning_error_ma_cm2 {
            Some(b) => format!(
                "{:.3} ± {:.3} mA/cm² (Monte Carlo σ); binning error estimate ±{b:.3} mA/cm²",
                a.j_ma_cm2, a.std_error_ma_cm2
            ),
            None => format!(
                "{:.3} ± {:.3} mA/cm²",
                super::shown(a.j_ma_cm2, 3),
                a.std_error_ma_cm2
            ),
        },
    )];
    if let Some(b) = &r.binning {
        headline.push((
            "angle bins (matrix mode)".to_string(),
            format!(
                "{} polar × {} azimuth; binning error estimated from {} coarser solve(s); largest for the absorptance {:.2e} at {} nm",
                b.bins[0],
                b.bins[1],
                b.coarse_bins.len(),
                b.max_absorber_absorptance,
                b.max_at_wavelength_nm
            ),
        ));
    }
    page.key_values(
        "Headline figures",
        headline.into_iter().chain([
            (
                "weighted reflectance".to_string(),
                format!(
                    "{:.4} ({}–{} nm, photon-flux weighted)",
                    r.weighted_reflectance, r.weighting_band_nm.0, r.weighting_band_nm.1
                ),
            ),
            (
                "Lambertian (Tiedje–Yablonovitch) for the same wafer".to_string(),
                format!("{:.3} mA/cm²", r.limits.tiedje_yablonovitch_ma_cm2),
            ),
            (
                "exact ideal Lambertian".to_string(),
                format!("{:.3} mA/cm²", r.limits.lambertian_exact_ma_cm2),
            ),
            (
                "A = 1 over the grid".to_string(),
                format!("{:.3} mA/cm²", r.max_current_ma_cm2),
            ),
            (
                "rays traced / lost".to_string(),
                format!("{} / {}", r.rays_total, r.lost_rays_total),
            ),
            (
                "energy audit, max |R+ΣA+T−1|".to_string(),
                format!("{:.1e}", r.energy_error_max),
            ),
            ("wall time".to_string(), format!("{:.2} s", r.wall_time_s)),
        ]),
    );
    let binning = r.binning.is_some();
    let row = |name: String, j: f64, se: f64, b: Option<f64>| {
        let mut v = vec![
            name,
            format!("{:.3}", super::shown(j, 3)),
            format!("{se:.3}"),
        ];
        if binning {
            v.push(b.map_or("—".into(), |b| format!("{b:.3}")));
        }
        v
    };
    let mut rows = vec![row(
        format!("absorbed in {}", a.name),
        a.j_ma_cm2,
        a.std_error_ma_cm2,
        a.binning_error_ma_cm2,
    )];
    for l in &r.losses {
        rows.push(row(
            l.name.clone(),
            l.j_ma_cm2,
            l.std_error_ma_cm2,
            l.binning_error_ma_cm2,
        ));
    }
    let mut header = vec!["item".into(), "J".into(), "σ".into()];
    if binning {
        header.push("binning error".into());
    }
    page.table("Photon budget (mA/cm²)", header, rows);
    if let Some(b) = &r.binning {
        page.paragraph(format!(
            "Matrix mode: σ is the Monte Carlo standard error, from the spread of the results \
             solved with independent replicas of the traced interfaces' matrices (0 for \
             planar-only stacks); the binning error is the solver's estimate of its angular \
             discretisation error: {}.",
            b.method
        ));
    }
    if plots_on {
        for (stem, caption, plot) in plots(r) {
            dir.write_plot(stem, plot.as_ref(), W, H)?;
            page.figure(stem, caption, plot.as_ref(), W, H);
        }
    }
    page.heading("Assumptions");
    for a in &r.assumptions {
        page.paragraph(a.clone());
    }
    page.heading("Scenario");
    page.paragraph(scenario_text.to_string());
    page.provenance("lightfold version", r.version.clone());
    page.provenance("seed", r.seed.to_string());
    page.provenance("mode", r.mode.clone());
    page.provenance(
        "spectrum",
        format!("{} (ASTM G173-03 for the built-in spectra)", r.spectrum),
    );
    for (k, v) in sources {
        page.provenance(k.clone(), v.clone());
    }
    page.files(
        "Files",
        [
            ("summary.json", "headline figures for scripts"),
            (
                "spectra.csv",
                "per-wavelength R, T, escape, absorptance per layer and film",
            ),
            ("losses.csv", "loss breakdown"),
            ("generation.csv", "generation profile for device simulators"),
            (
                "path_length.csv",
                "path-length enhancement and Lambertian references",
            ),
            ("results.json", "every number of the run"),
        ],
    );
    dir.write_text("report.html", &page.render())?;
    // Written last: its presence marks a complete results folder.
    dir.write_json("summary.json", &summary)?;
    Ok(())
}
