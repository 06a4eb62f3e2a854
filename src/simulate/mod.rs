//! Runs a validated scenario over its wavelength grid and gathers what the engineer asks for:
//! reflectance, escape, absorptance per thick layer and per film, transmittance, the
//! photocurrent of every absorber, the loss breakdown, the generation profile, path-length
//! enhancement and the Lambertian references.
//!
//! Sits between `scenario` (which builds the input) and `report` (which writes it out): it
//! turns a `Scenario` into per-wavelength optical models (`tracer::WaferModel` in direct
//! mode, `wafer` matrices in matrix mode) and integrates them against the spectrum.
//! Invariant: for every wavelength R + ΣA + T (+ abandoned) = 1 to round-off in the accounting.

mod direct;
pub mod matrix;
mod result;

pub use matrix::MatrixCache;
pub use result::{BINNING_METHOD, BinningSummary, Current, Loss, RunResult, WavelengthResult};

use crate::scenario::{Mode, Scenario};

/// Errors while running a (validated) scenario.
#[derive(Debug, thiserror::Error)]
pub enum RunError {
    /// Input that validation let through but the optics cannot use (a bug in validation,
    /// reported with what to fix).
    #[error("{0}")]
    Input(String),
    /// An internal failure (thread pool, numerics).
    #[error("internal failure: {0}")]
    Internal(String),
}

/// Progress callback: (finished wavelengths, total).
pub type Progress<'a> = &'a (dyn Fn(usize, usize) + Sync);

/// Runs `scenario` and returns its results. Uses `scenario.solver.threads` threads when set
/// (results do not depend on it).
pub fn run(scenario: &Scenario, progress: Progress) -> Result<RunResult, RunError> {
    run_with_cache(scenario, progress, None)
}

/// [`run`] with a [`MatrixCache`] for matrix mode (ignored in direct mode): runs of the same
/// process that share interfaces (e.g. the points of a thickness sweep) build their
/// matrices once. Results are the same with and without the cache.
pub fn run_with_cache(
    scenario: &Scenario,
    progress: Progress,
    cache: Option<&MatrixCache>,
) -> Result<RunResult, RunError> {
    let started = std::time::Instant::now();
    let work = || match scenario.solver.mode {
        Mode::Direct => direct::run(scenario, progress),
        Mode::Matrix => matrix::run_cached(scenario, progress, None, cache),
    };
    let mut result = match scenario.solver.threads {
        Some(n) => rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .map_err(|e| RunError::Internal(format!("thread pool: {e}")))?
            .install(work)?,
        None => work()?,
    };
    result.wall_time_s = started.elapsed().as_secs_f64();
    Ok(result)
}
