//! `lightfold sweep SCENARIO --vary KEY=START:STOP:STEPS …`: a grid over numeric scenario keys.
//! Each finished point is written at once (atomically) to `points/`, so a rerun skips it and a
//! run killed at any moment loses no finished point; `--shard K/N` runs the points p with
//! p mod N = K − 1, and `lightfold merge` gathers shard folders into one table. In matrix mode
//! the points share one `simulate::MatrixCache` (up to 1 GiB): interfaces that do not change
//! between points are traced once.

use super::Failure;
use crate::cli::progress::Bar;
use lightfold::report::csv::Cell;
use lightfold::report::{Column, CsvWriter, LinePlot, Series};
use lightfold::scenario::{Scenario, set_number};
use serde_json::{Value, json};
use std::path::{Path, PathBuf};

#[derive(clap::Args)]
pub struct SweepArgs {
    /// Base scenario file.
    scenario: PathBuf,
    /// KEY=START:STOP:STEPS, e.g. stack.wafer.thickness_um=80:200:7 (repeatable: a grid).
    #[arg(long = "vary", required = true)]
    vary: Vec<String>,
    /// Output folder (resumable: finished points are kept and skipped).
    #[arg(short, long, default_value = "results-sweep")]
    output: PathBuf,
    /// Run only shard K of N (1-based), e.g. 2/4, for sharing a sweep between machines.
    #[arg(long)]
    shard: Option<String>,
    /// Print the table as JSON on stdout.
    #[arg(long)]
    json: bool,
    /// No progress bar.
    #[arg(long)]
    quiet: bool,
}

#[derive(clap::Args)]
pub struct MergeArgs {
    /// Shard folders written by `lightfold sweep --shard`.
    #[arg(required = true)]
    folders: Vec<PathBuf>,
    /// Folder for the merged points and table.
    #[arg(short, long, default_value = "results-sweep")]
    output: PathBuf,
}

struct Axis {
    key: String,
    values: Vec<f64>,
}

fn parse_vary(text: &str) -> Result<Axis, Failure> {
    let bad = |why: &str| {
        Failure::BadInput(format!(
            "--vary {text}: {why}\n  expected: KEY=START:STOP:STEPS, e.g. stack.wafer.thickness_um=80:200:7\n  fix: `lightfold check` lists the stack; keys are documented in docs/scenario.md"
        ))
    };
    let (key, range) = text.split_once('=').ok_or_else(|| bad("no `=`"))?;
    let parts: Vec<&str> = range.split(':').collect();
    if parts.len() != 3 {
        return Err(bad("the range needs three fields"));
    }
    let start: f64 = parts[0]
        .trim()
        .parse()
        .map_err(|_| bad("START is not a number"))?;
    let stop: f64 = parts[1]
        .trim()
        .parse()
        .map_err(|_| bad("STOP is not a number"))?;
    let steps: usize = parts[2]
        .trim()
        .parse()
        .map_err(|_| bad("STEPS is not a whole number"))?;
    if !(start.is_finite() && stop.is_finite()) || steps == 0 || steps > 10_000 {
        return Err(bad("STEPS must be 1 to 10000 and the ends finite"));
    }
    let values = if steps == 1 {
        vec![start]
    } else {
        (0..steps)
            .map(|i| start + (stop - start) * i as f64 / (steps - 1) as f64)
            .collect()
    };
    Ok(Axis {
        key: key.trim().to_string(),
        values,
    })
}

fn parse_shard(text: &str) -> Result<(usize, usize), Failure> {
    let bad = || {
        Failure::BadInput(format!(
            "--shard {text}: expected K/N with 1 ≤ K ≤ N, e.g. 2/4"
        ))
    };
    let (k, n) = text.split_once('/').ok_or_else(bad)?;
    let (k, n): (usize, usize) = (
        k.trim().parse().map_err(|_| bad())?,
        n.trim().parse().map_err(|_| bad())?,
    );
    if k == 0 || n == 0 || k > n {
        return Err(bad());
    }
    Ok((k, n))
}

/// Values of every axis at grid point `p` (last axis fastest).
fn point_values(axes: &[Axis], mut p: usize) -> Vec<f64> {
    let mut v = vec![0.0; axes.len()];
    for (i, a) in axes.iter().enumerate().rev() {
        v[i] = a.values[p % a.values.len()];
        p /= a.values.len();
    }
    v
}

fn point_file(dir: &Path, p: usize) -> PathBuf {
    dir.join("points").join(format!("point-{p:06}.json"))
}

pub fn run(args: SweepArgs) -> Result<(), Failure> {
    let text = std::fs::read_to_string(&args.scenario)
        .map_err(|e| Failure::BadInput(format!("{}: cannot read: {e}", args.scenario.display())))?;
    // The base scenario must be valid on its own.
    Scenario::from_file(&args.scenario).map_err(|e| Failure::BadInput(e.to_string()))?;
    let axes = args
        .vary
        .iter()
        .map(|v| parse_vary(v))
        .collect::<Result<Vec<_>, _>>()?;
    let folder = args.scenario.parent().map(Path::to_path_buf);
    // Check every key and point before any work: a key that does not exist is an input error.
    let total: usize = axes.iter().map(|a| a.values.len()).product();
    let (k, n) = match &args.shard {
        Some(s) => parse_shard(s)?,
        None => (1, 1),
    };
    let mut texts = Vec::new();
    for p in (0..total).filter(|p| p % n == k - 1) {
        let mut t = text.clone();
        for (a, v) in axes.iter().zip(point_values(&axes, p)) {
            t = set_number(&t, folder.as_deref(), &a.key, v)
                .map_err(|e| Failure::BadInput(e.to_string()))?;
        }
        Scenario::from_str(&t, &args.scenario)
            .map_err(|e| Failure::BadInput(format!("sweep point {p}: {e}")))?;
        texts.push((p, t));
    }
    std::fs::create_dir_all(args.output.join("points"))
        .map_err(|e| Failure::BadInput(format!("{}: cannot create: {e}", args.output.display())))?;
    let bar = Bar::new(texts.len() as u64, "sweep points", args.quiet || args.json);
    // Matrix mode: interface matrices do not depend on thick-layer thicknesses, so points that
    // share interfaces (a thickness sweep) trace them once.
    let cache = lightfold::simulate::MatrixCache::default();
    for (p, t) in &texts {
        let file = point_file(&args.output, *p);
        if file.is_file() {
            bar.inc();
            continue; // finished in an earlier run
        }
        let s =
            Scenario::from_str(t, &args.scenario).map_err(|e| Failure::BadInput(e.to_string()))?;
        let r = lightfold::simulate::run_with_cache(&s, &|_, _| {}, Some(&cache))
            .map_err(|e| Failure::Internal(e.to_string()))?;
        let values = point_values(&axes, *p);
        let doc = json!({
            "point": p,
            "keys": axes.iter().map(|a| a.key.clone()).collect::<Vec<_>>(),
            "values": values,
            "summary": lightfold::report::run_report::summary_json(&r),
        });
        let bytes =
            serde_json::to_vec_pretty(&doc).map_err(|e| Failure::Internal(e.to_string()))?;
        lightfold::report::write_atomic(&file, &bytes)
            .map_err(|e| Failure::Internal(format!("{}: {e}", file.display())))?;
        bar.inc();
    }
    bar.finish();
    table(&args.output, total, args.json)
}

/// Writes sweep.csv (and a plot over the first key) from the finished points in `dir`.
fn table(dir: &Path, total: usize, json_out: bool) -> Result<(), Failure> {
    let mut points: Vec<Value> = Vec::new();
    let read = std::fs::read_dir(dir.join("points"))
        .map_err(|e| Failure::BadInput(format!("{}: {e}", dir.display())))?;
    let mut files: Vec<PathBuf> = read
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "json"))
        .collect();
    files.sort();
    for f in files {
        let text = std::fs::read_to_string(&f)
            .map_err(|e| Failure::BadInput(format!("{}: {e}", f.display())))?;
        points.push(
            serde_json::from_str(&text).map_err(|e| {
                Failure::BadInput(format!("{}: not a sweep point: {e}", f.display()))
            })?,
        );
    }
    let Some(first) = points.first() else {
        return Err(Failure::BadInput(format!(
            "{}: no finished sweep points",
            dir.display()
        )));
    };
    let keys: Vec<String> = first["keys"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(|k| k.as_str().map(String::from))
        .collect();
    let mut cols: Vec<Column> = keys.iter().map(|k| Column::new(k.clone(), "")).collect();
    cols.extend([
        Column::new("J_absorber", "mA/cm2"),
        Column::new("J_absorber_se", "mA/cm2"),
        Column::new("weighted_reflectance", ""),
    ]);
    let mut csv = CsvWriter::new(&cols);
    csv.comment(&format!(
        "lightfold sweep: {} of {} points finished; engineering estimates",
        points.len(),
        total
    ));
    let (mut x, mut y) = (Vec::new(), Vec::new());
    for p in &points {
        let s = &p["summary"];
        let j = s["photocurrents_ma_cm2"][0]["j_ma_cm2"]
            .as_f64()
            .unwrap_or(f64::NAN);
        let se = s["photocurrents_ma_cm2"][0]["std_error_ma_cm2"]
            .as_f64()
            .unwrap_or(f64::NAN);
        let rw = s["weighted_reflectance"]["value"]
            .as_f64()
            .unwrap_or(f64::NAN);
        let vals: Vec<f64> = p["values"]
            .as_array()
            .into_iter()
            .flatten()
            .filter_map(Value::as_f64)
            .collect();
        let mut cells: Vec<Cell> = vals.iter().map(|v| Cell::Num(*v)).collect();
        cells.extend([Cell::Num(j), Cell::Num(se), Cell::Num(rw)]);
        csv.row(&cells)
            .map_err(|e| Failure::Internal(e.to_string()))?;
        x.push(vals.first().copied().unwrap_or(f64::NAN));
        y.push(j);
    }
    let w = |name: &str, bytes: &[u8]| {
        lightfold::report::write_atomic(&dir.join(name), bytes)
            .map_err(|e| Failure::Internal(format!("{name}: {e}")))
    };
    w("sweep.csv", csv.finish().as_bytes())?;
    let plot = LinePlot::new(
        "Sweep",
        keys.first().cloned().unwrap_or_default(),
        "J absorber (mA/cm²)",
    )
    .series(Series::points("points", x, y));
    w("sweep.svg", plot.to_svg(900, 520).as_bytes())?;
    w("sweep.png", &plot.to_png(900, 520))?;
    if json_out {
        println!(
            "{}",
            serde_json::to_string_pretty(&points).map_err(|e| Failure::Internal(e.to_string()))?
        );
    } else {
        println!(
            "{} of {total} points finished; table in {}/sweep.csv",
            points.len(),
            dir.display()
        );
    }
    Ok(())
}

pub fn merge(args: MergeArgs) -> Result<(), Failure> {
    std::fs::create_dir_all(args.output.join("points"))
        .map_err(|e| Failure::BadInput(format!("{}: {e}", args.output.display())))?;
    let mut total = 0;
    for f in &args.folders {
        let read = std::fs::read_dir(f.join("points"))
            .map_err(|e| Failure::BadInput(format!("{}: not a sweep folder: {e}", f.display())))?;
        for e in read.filter_map(Result::ok) {
            let src = e.path();
            if src.extension().is_some_and(|x| x == "json") {
                let bytes = std::fs::read(&src)
                    .map_err(|e| Failure::BadInput(format!("{}: {e}", src.display())))?;
                let dst = args.output.join("points").join(e.file_name());
                if dst != src {
                    lightfold::report::write_atomic(&dst, &bytes)
                        .map_err(|e| Failure::Internal(e.to_string()))?;
                }
                total += 1;
            }
        }
    }
    table(&args.output, total, false)
}
