//! `lightfold check SCENARIO [--json]`: validate a scenario without running it. Prints a
//! short summary of the stack and settings, or every problem (exit code 1).

use super::Failure;
use lightfold::scenario::{Scenario, ScenarioError};
use serde_json::json;
use std::io::Write;
use std::path::PathBuf;

/// Validate a scenario file and summarise it.
#[derive(clap::Args)]
pub struct CheckArgs {
    /// The scenario file (TOML; see docs/scenario.md).
    pub scenario: PathBuf,

    /// Print machine-readable JSON (the summary, or the list of problems).
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: CheckArgs) -> Result<(), Failure> {
    let outcome = Scenario::from_file(&args.scenario);
    let text = match (&outcome, args.json) {
        (Ok(s), false) => format!("{}ok: no problems found\n", s.summary()),
        (Ok(s), true) => json_text(&json!({ "ok": true, "scenario": s.summary_json() }))?,
        (Err(e), true) => {
            let problems: Vec<serde_json::Value> = match e {
                ScenarioError::Invalid { problems, .. } => problems
                    .iter()
                    .map(|p| {
                        json!({
                            "file": p.file.display().to_string(),
                            "line": p.line,
                            "column": p.col,
                            "problem": p.problem,
                            "expected": p.expected,
                            "fix": p.fix,
                        })
                    })
                    .collect(),
                other => vec![json!({
                    "file": args.scenario.display().to_string(),
                    "line": 0,
                    "column": 0,
                    "problem": other.to_string(),
                    "expected": "",
                    "fix": "",
                })],
            };
            json_text(&json!({ "ok": false, "problems": problems }))?
        }
        (Err(_), false) => String::new(),
    };
    let mut stdout = std::io::stdout().lock();
    stdout
        .write_all(text.as_bytes())
        .and_then(|_| stdout.flush())
        .map_err(|e| Failure::Internal(format!("cannot write to standard output: {e}")))?;
    match outcome {
        Ok(_) => Ok(()),
        Err(e) if args.json => Err(Failure::BadInput(format!(
            "{}: {} problem(s), listed in the JSON output",
            args.scenario.display(),
            e.problems().len().max(1)
        ))),
        Err(e) => Err(Failure::BadInput(e.to_string())),
    }
}

fn json_text(v: &serde_json::Value) -> Result<String, Failure> {
    serde_json::to_string_pretty(v)
        .map(|s| s + "\n")
        .map_err(|e| Failure::Internal(format!("cannot format JSON: {e}")))
}
