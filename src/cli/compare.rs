//! `lightfold compare A.toml B.toml …`: run several designs and put them side by side: one
//! table, overlay plots and an HTML page — "which texture and coating gives more current".

use super::Failure;
use crate::cli::progress::Bar;
use lightfold::report::csv::Cell;
use lightfold::report::html::Page;
use lightfold::report::{BarChart, BarGroup, Column, CsvWriter, LinePlot, ResultsDir, Series};
use lightfold::scenario::Scenario;
use lightfold::simulate::RunResult;
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct CompareArgs {
    /// Scenario files to compare (two or more).
    #[arg(required = true, num_args = 2..)]
    scenarios: Vec<PathBuf>,
    /// Output folder for the table, plots and compare.html.
    #[arg(short, long, default_value = "results-compare")]
    output: PathBuf,
    /// Replace files in an existing, non-empty output folder.
    #[arg(long)]
    force: bool,
    /// Print the comparison as JSON on stdout.
    #[arg(long)]
    json: bool,
    /// No progress bar.
    #[arg(long)]
    quiet: bool,
}

/// Loss groups that every design has, for a like-for-like bar chart.
const GROUPS: [&str; 6] = [
    "absorber",
    "front reflection",
    "escape",
    "films",
    "other layers",
    "exit medium",
];

fn grouped(r: &RunResult) -> [f64; 6] {
    let mut g = [r.absorber_current().j_ma_cm2, 0.0, 0.0, 0.0, 0.0, 0.0];
    let films: Vec<&String> = r.film_names.iter().flatten().collect();
    for l in &r.losses {
        let k = if l.name == "front reflection" {
            1
        } else if l.name.starts_with("escape") {
            2
        } else if films.contains(&&l.name) {
            3
        } else if l.name == r.exit_name {
            5
        } else {
            4
        };
        g[k] += l.j_ma_cm2;
    }
    g
}

pub fn run(args: CompareArgs) -> Result<(), Failure> {
    // Validate every scenario before any work is done.
    let scenarios = args
        .scenarios
        .iter()
        .map(|p| Scenario::from_file(p).map_err(|e| Failure::BadInput(e.to_string())))
        .collect::<Result<Vec<_>, _>>()?;
    let dir = ResultsDir::create(&args.output, args.force)
        .map_err(|e| Failure::BadInput(e.to_string()))?;
    let bar = Bar::new(scenarios.len() as u64, "designs", args.quiet || args.json);
    let mut results = Vec::new();
    for s in &scenarios {
        let r = lightfold::simulate::run(s, &|_, _| {}).map_err(|e| match e {
            lightfold::simulate::RunError::Input(m) => {
                Failure::BadInput(format!("{}: {m}", s.name))
            }
            lightfold::simulate::RunError::Internal(m) => Failure::Internal(m),
        })?;
        results.push(r);
        bar.inc();
    }
    bar.finish();
    let internal = |e: lightfold::report::ReportError| Failure::Internal(e.to_string());

    // Table
    let mut cols = vec![
        Column::new("design", ""),
        Column::new("J_absorber", "mA/cm2"),
        Column::new("J_absorber_se", "mA/cm2"),
        Column::new("weighted_reflectance", ""),
    ];
    cols.extend(GROUPS[1..].iter().map(|g| Column::new(*g, "mA/cm2")));
    cols.push(Column::new("lambertian_ty", "mA/cm2"));
    let mut csv = CsvWriter::new(&cols);
    csv.comment("lightfold compare: photocurrent of each design's absorber and its losses as current density; engineering estimates");
    let mut rows = Vec::new();
    for r in &results {
        let a = r.absorber_current();
        let g = grouped(r);
        let mut cells = vec![
            Cell::Text(r.scenario.clone()),
            Cell::Num(a.j_ma_cm2),
            Cell::Num(a.std_error_ma_cm2),
            Cell::Num(r.weighted_reflectance),
        ];
        cells.extend(g[1..].iter().map(|v| Cell::Num(*v)));
        cells.push(Cell::Num(r.limits.tiedje_yablonovitch_ma_cm2));
        csv.row(&cells).map_err(internal)?;
        let mut row = vec![
            r.scenario.clone(),
            format!("{:.3} ± {:.3}", a.j_ma_cm2, a.std_error_ma_cm2),
            format!("{:.4}", r.weighted_reflectance),
        ];
        row.extend(g[1..].iter().map(|v| format!("{v:.3}")));
        row.push(format!("{:.3}", r.limits.tiedje_yablonovitch_ma_cm2));
        rows.push(row);
    }
    dir.write_text("compare.csv", &csv.finish())
        .map_err(internal)?;

    // Plots
    let mut absorptance = LinePlot::new(
        "Absorptance of each design's absorber",
        "wavelength (nm)",
        "absorptance",
    );
    let mut reflectance = LinePlot::new("Total reflectance", "wavelength (nm)", "reflectance");
    for r in &results {
        let x: Vec<f64> = r.wavelengths.iter().map(|w| w.wavelength_nm).collect();
        absorptance = absorptance.series(Series::line(
            r.scenario.clone(),
            x.clone(),
            r.wavelengths
                .iter()
                .map(|w| w.layers[r.absorber].value)
                .collect(),
        ));
        reflectance = reflectance.series(Series::line(
            r.scenario.clone(),
            x,
            r.wavelengths.iter().map(|w| w.reflectance.value).collect(),
        ));
    }
    let mut bars = BarChart::new(
        "Photon budget by design",
        "mA/cm²",
        GROUPS.iter().map(|s| s.to_string()).collect(),
    );
    for r in &results {
        bars = bars.group(BarGroup::new(r.scenario.clone(), grouped(r).to_vec()));
    }
    let mut page = Page::new("lightfold: design comparison");
    page.paragraph(lightfold::report::html::ESTIMATE_NOTE);
    let mut header: Vec<String> = vec![
        "design".into(),
        "J absorber (mA/cm²)".into(),
        "weighted R".into(),
    ];
    header.extend(GROUPS[1..].iter().map(|g| format!("{g} (mA/cm²)")));
    header.push("Lambertian TY (mA/cm²)".into());
    page.table("Designs side by side", header, rows.clone());
    for (stem, caption, plot) in [
        (
            "compare_absorptance",
            "Absorptance in the absorber",
            &absorptance as &dyn lightfold::report::Plot,
        ),
        ("compare_reflectance", "Total reflectance", &reflectance),
        ("compare_losses", "Photon budget", &bars),
    ] {
        dir.write_plot(stem, plot, 900, 520).map_err(internal)?;
        page.figure(stem, caption, plot, 900, 520);
    }
    for r in &results {
        page.provenance(
            r.scenario.clone(),
            format!(
                "seed {}, {} rays, mode {}, lightfold {}",
                r.seed, r.rays_total, r.mode, r.version
            ),
        );
    }
    dir.write_text("compare.html", &page.render())
        .map_err(internal)?;

    if args.json {
        let doc: Vec<serde_json::Value> = results
            .iter()
            .map(|r| {
                let g = grouped(r);
                serde_json::json!({
                    "scenario": r.scenario,
                    "photocurrent_ma_cm2": r.absorber_current().j_ma_cm2,
                    "std_error_ma_cm2": r.absorber_current().std_error_ma_cm2,
                    "weighted_reflectance": r.weighted_reflectance,
                    "losses_ma_cm2": GROUPS[1..].iter().zip(&g[1..]).map(|(k, v)| (k.to_string(), *v)).collect::<std::collections::BTreeMap<_, _>>(),
                    "lambertian_ty_ma_cm2": r.limits.tiedje_yablonovitch_ma_cm2,
                })
            })
            .collect();
        println!(
            "{}",
            serde_json::to_string_pretty(&doc).map_err(|e| Failure::Internal(e.to_string()))?
        );
    } else {
        println!(
            "{:<36} {:>17} {:>10} {:>9} {:>9} {:>9}",
            "design", "J (mA/cm²)", "weighted R", "front R", "escape", "films"
        );
        for r in &results {
            let g = grouped(r);
            let a = r.absorber_current();
            println!(
                "{:<36} {:>9.3} ± {:.3} {:>10.4} {:>9.3} {:>9.3} {:>9.3}",
                r.scenario,
                a.j_ma_cm2,
                a.std_error_ma_cm2,
                r.weighted_reflectance,
                lightfold::report::shown(g[1], 3),
                lightfold::report::shown(g[2], 3),
                lightfold::report::shown(g[3], 3)
            );
        }
        println!(
            "table, plots and compare.html in {}/; engineering estimates, not certified measurements",
            args.output.display()
        );
    }
    Ok(())
}
