//! The stack solver for thick incoherent layers coupled by interfaces (redistribution
//! matrices), its outputs (R, absorptance per thick and film layer, T, escape, path-length
//! enhancement, generation profile) and the Lambertian / 4n² references.
//!
//! Invariant: for every wavelength R + ΣA + T (+ the matrices' own unaccounted defect) = 1 to
//! round-off. Units at the API: wavelength nm, thickness µm, α cm⁻¹, generation cm⁻³ s⁻¹.
//! Not here: building interface matrices (`redistribution`, `tracer`), spectra (`spectrum`).

pub mod binning;
pub mod limits;
pub mod linalg;
pub mod special;
pub mod stack;

pub use binning::{BinningCheck, BinningError};
pub use stack::{
    LayerFluxes, SemiInfinite, SolverOptions, Stack, StackElement, StackResult, ThickLayer,
    memory_estimate_bytes,
};

/// Errors of the wafer solver.
#[derive(Debug, thiserror::Error)]
pub enum WaferError {
    #[error("stack element {position}: {problem}\n  fix: {fix}")]
    Stack {
        position: usize,
        problem: String,
        fix: String,
    },
    #[error("incident light: {problem}\n  expected: {expected}")]
    Incidence { problem: String, expected: String },
    #[error(
        "{bins} bins per hemisphere with {interfaces} interface(s) need about {:.2} GB of dense matrices, over the budget of {:.2} GB\n  fix: use fewer polar or azimuthal bins or a symmetry reduction (memory grows as bins²), or raise SolverOptions::memory_budget_bytes",
        *estimate_bytes as f64 / 1e9, *budget_bytes as f64 / 1e9
    )]
    TooManyBins {
        bins: usize,
        interfaces: usize,
        estimate_bytes: usize,
        budget_bytes: usize,
    },
    #[error(
        "at {wavelength_nm} nm the multiple-reflection system is singular at interface {interface} (bin column {column}): light in some bins never leaves nor is absorbed\n  fix: give the thick layers some absorption (k > 0) or the interfaces an escape path"
    )]
    Singular {
        wavelength_nm: f64,
        interface: usize,
        column: usize,
    },
    #[error("binning error estimate: {problem}\n  fix: {fix}")]
    Binning { problem: String, fix: String },
    #[error(
        "internal: at {wavelength_nm} nm R + ΣA + T misses 1 by {residual:e} (a lightfold bug; please report it with the stack)"
    )]
    Accounting { wavelength_nm: f64, residual: f64 },
}
