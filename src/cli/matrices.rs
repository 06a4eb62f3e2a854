//! `lightfold matrices SCENARIO -o DIR`: build every interface's redistribution matrices at the
//! scenario's wavelengths (matrix mode), write them as NPY + JSON sidecar
//! (docs/results.md), and solve the stack with them.

use super::Failure;
use lightfold::scenario::Scenario;
use lightfold::simulate::RunError;
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct MatricesArgs {
    /// Scenario file; its [solver] bins and rays set the matrices' resolution.
    scenario: PathBuf,
    /// Output folder (must not exist or be empty).
    #[arg(short, long, default_value = "results-matrices")]
    output: PathBuf,
}

pub fn run(args: MatricesArgs) -> Result<(), Failure> {
    let scenario =
        Scenario::from_file(&args.scenario).map_err(|e| Failure::BadInput(e.to_string()))?;
    let dir = lightfold::report::ResultsDir::create(&args.output, false)
        .map_err(|e| Failure::BadInput(e.to_string()))?;
    let root = dir.path().to_path_buf();
    let sink = |name: &str, wl: f64, m: &lightfold::redistribution::InterfaceMatrices| {
        m.write(&root, &format!("{name}-{wl}nm"))
            .map(|_| ())
            .map_err(|e| RunError::Internal(e.to_string()))
    };
    let r =
        lightfold::simulate::matrix::run_with(&scenario, &|_, _| {}, Some(&sink)).map_err(|e| {
            match e {
                RunError::Input(m) => Failure::BadInput(m),
                RunError::Internal(m) => Failure::Internal(m),
            }
        })?;
    println!(
        "{} interfaces × {} wavelengths written to {}/ (NPY + JSON sidecars); absorber current with these matrices {:.3} mA/cm²",
        scenario.interfaces().count(),
        r.wavelengths.len(),
        args.output.display(),
        r.absorber_current().j_ma_cm2
    );
    Ok(())
}
