//! `lightfold run [SCENARIO] [-o DIR]`: run a scenario (or the embedded demo) and write the
//! results folder.

use super::Failure;
use crate::cli::progress::Bar;
use lightfold::report::ResultsDir;
use lightfold::scenario::Scenario;
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct RunArgs {
    /// Scenario file (TOML; see docs/scenario.md). Without it, the embedded demo runs.
    scenario: Option<PathBuf>,
    /// Results folder (default: results-<scenario name>, or a fresh numbered one for the demo).
    #[arg(short, long)]
    output: Option<PathBuf>,
    /// Replace files in an existing, non-empty results folder.
    #[arg(long)]
    force: bool,
    /// Print summary.json on stdout.
    #[arg(long)]
    json: bool,
    /// No progress bar.
    #[arg(long)]
    quiet: bool,
}

/// A folder name that does not exist yet: `base`, `base-2`, `base-3`, …
fn fresh(base: &str) -> PathBuf {
    let mut p = PathBuf::from(base);
    let mut k = 2;
    while p.exists() {
        p = PathBuf::from(format!("{base}-{k}"));
        k += 1;
    }
    p
}

pub fn run(args: RunArgs) -> Result<(), Failure> {
    let scenario = match &args.scenario {
        Some(path) => Scenario::from_file(path).map_err(|e| Failure::BadInput(e.to_string()))?,
        None => Scenario::demo(),
    };
    let out = match (&args.output, &args.scenario) {
        (Some(o), _) => o.clone(),
        (None, None) => fresh("results-demo"),
        (None, Some(_)) => PathBuf::from(format!("results-{}", slug(&scenario.name))),
    };
    // Refuse an existing results folder before any work is done.
    let dir = ResultsDir::create(&out, args.force).map_err(|e| Failure::BadInput(e.to_string()))?;
    let n = scenario.light.wavelengths.len() as u64;
    let bar = Bar::new(n, "wavelengths", args.quiet || args.json);
    let result = lightfold::simulate::run(&scenario, &|done, _| bar.set(done as u64)).map_err(
        |e| match e {
            lightfold::simulate::RunError::Input(m) => Failure::BadInput(m),
            lightfold::simulate::RunError::Internal(m) => Failure::Internal(m),
        },
    )?;
    bar.finish();
    let sources = material_sources(&scenario);
    lightfold::report::run_report::write_run(
        &dir,
        &result,
        &scenario.text,
        &sources,
        scenario.output.plots,
    )
    .map_err(|e| Failure::Internal(e.to_string()))?;
    if args.json {
        let s = lightfold::report::run_report::summary_json(&result);
        println!(
            "{}",
            serde_json::to_string_pretty(&s).map_err(|e| Failure::Internal(e.to_string()))?
        );
    } else {
        let a = result.absorber_current();
        println!(
            "{}: {} wavelengths, {} rays, {:.1} s",
            result.scenario,
            result.wavelengths.len(),
            result.rays_total,
            result.wall_time_s
        );
        // Matrix mode: the solver's binning error estimate beside the Monte Carlo σ.
        let binning = |b: Option<f64>| b.map_or(String::new(), |b| format!(", binning ±{b:.3}"));
        println!(
            "  photocurrent in {:<28} {:>8.3} ± {:.3}{} mA/cm²",
            a.name,
            lightfold::report::shown(a.j_ma_cm2, 3),
            a.std_error_ma_cm2,
            binning(a.binning_error_ma_cm2)
        );
        for l in &result.losses {
            println!(
                "  {:<43} {:>8.3} ± {:.3}{} mA/cm²",
                l.name,
                lightfold::report::shown(l.j_ma_cm2, 3),
                l.std_error_ma_cm2,
                binning(l.binning_error_ma_cm2)
            );
        }
        if let Some(b) = &result.binning {
            println!(
                "  matrix mode: {} × {} bins; binning error from {} coarser solve(s) (docs/results.md)",
                b.bins[0],
                b.bins[1],
                b.coarse_bins.len()
            );
        }
        println!(
            "  {:<43} {:>8.3} mA/cm²",
            "A = 1 over the grid", result.max_current_ma_cm2
        );
        println!(
            "  weighted reflectance {:.4}; Lambertian (TY) {:.3}, exact {:.3} mA/cm²",
            result.weighted_reflectance,
            result.limits.tiedje_yablonovitch_ma_cm2,
            result.limits.lambertian_exact_ma_cm2
        );
        println!(
            "results in {}/ (open report.html); engineering estimates, not certified measurements",
            out.display()
        );
    }
    Ok(())
}

fn slug(name: &str) -> String {
    let s: String = name
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' {
                c.to_ascii_lowercase()
            } else {
                '-'
            }
        })
        .collect();
    if s.is_empty() { "scenario".into() } else { s }
}

/// Material citations for the report's provenance section.
fn material_sources(s: &Scenario) -> Vec<(String, String)> {
    let mut out: Vec<(String, String)> = Vec::new();
    let mut add = |m: &lightfold::optics::materials::Material| {
        if !out.iter().any(|(k, _)| k == m.id()) {
            out.push((m.id().to_string(), m.source().to_string()));
        }
    };
    add(&s.above.material);
    add(&s.below.material);
    for l in s.layers() {
        add(&l.material);
    }
    for i in s.interfaces() {
        for c in &i.coating {
            add(&c.material);
        }
    }
    out
}
