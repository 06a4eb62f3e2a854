//! Subcommands of the binary. Each file parses its arguments, calls the library and prints.

pub mod check;
pub mod compare;
pub mod film;
pub mod limit;
pub mod materials;
pub mod matrices;
pub mod progress;
pub mod run;
pub mod surface;
pub mod sweep;

/// Why a command failed, mapped to the process exit code.
#[derive(Debug, thiserror::Error)]
pub enum Failure {
    /// The user's input is wrong: exit code 1. The message says what to do.
    #[error("{0}")]
    BadInput(String),
    /// A bug or an environment failure (disk full…): exit code 2.
    #[error("internal failure: {0}")]
    Internal(String),
}

impl Failure {
    pub fn exit_code(&self) -> u8 {
        match self {
            Failure::BadInput(_) => 1,
            Failure::Internal(_) => 2,
        }
    }
}
