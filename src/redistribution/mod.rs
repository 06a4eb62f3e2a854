//! Angular bins and redistribution matrices of one interface at one wavelength: analytic
//! builders (specular planar, ideal Lambertian), a Monte Carlo accumulator for the surface
//! tracer, audits (energy, reciprocity) and the NPY + JSON exchange format.
//!
//! Invariant: every column of an interface's R, T and A sums to 1 up to the stored energy
//! audit; bins are the same in every medium (each in its own local angles). Not here: how
//! interfaces combine with thick layers (`wafer`), how rays are traced (`tracer`).
//!
//! Conventions: [`bins`] (directions → bin index, étendue), [`matrix`] (normalisation,
//! reciprocity relation), [`tally`] (how the tracer fills a [`MatrixTally`]), [`io`] (files).

pub mod bins;
pub mod dense;
pub mod io;
pub mod matrix;
pub mod npy;
pub mod quad;
pub mod tally;
pub mod traced;

pub use bins::{AngleBins, BinError, Hemisphere};
pub use dense::Matrix;
pub use matrix::{
    Audit, InterfaceMatrices, InterfaceResponse, InterfaceSetup, MediumInfo, Side, SideMatrices,
};
pub use tally::{ColumnBatch, MatrixTally};

use std::path::{Path, PathBuf};

/// Errors of the redistribution module.
#[derive(Debug, thiserror::Error)]
pub enum MatrixError {
    #[error(transparent)]
    Bins(#[from] BinError),
    #[error("interface set-up: {problem}\n  expected: {expected}\n  fix: {fix}")]
    Setup {
        problem: String,
        expected: String,
        fix: String,
    },
    #[error(
        "interface response from {side:?} at {angle_deg:.4}°: {problem}\n  fix: the response must give fractions R, T and one absorptance per film layer summing to 1"
    )]
    Response {
        side: Side,
        angle_deg: f64,
        problem: String,
    },
    #[error("matrix tally: {problem}\n  fix: {fix}")]
    Tally { problem: String, fix: String },
    #[error("{}: cannot read: {source}", path.display())]
    Read {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("{}: cannot write: {source}", path.display())]
    Write {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("{}: {problem}\n  expected: {expected}\n  fix: {fix}", path.display())]
    Format {
        path: PathBuf,
        problem: String,
        expected: String,
        fix: String,
    },
}

impl MatrixError {
    pub(crate) fn setup(problem: impl Into<String>, expected: &str, fix: &str) -> Self {
        MatrixError::Setup {
            problem: problem.into(),
            expected: expected.into(),
            fix: fix.into(),
        }
    }
    pub(crate) fn format(
        path: &Path,
        problem: impl Into<String>,
        expected: &str,
        fix: &str,
    ) -> Self {
        MatrixError::Format {
            path: path.to_path_buf(),
            problem: problem.into(),
            expected: expected.into(),
            fix: fix.into(),
        }
    }
}
