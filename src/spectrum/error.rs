//! Errors of the `spectrum` module. Each says what was wrong, where, what was expected and
//! how to fix it (STYLE.md §4).

use std::path::PathBuf;

/// Everything that can go wrong when choosing, reading or integrating a spectrum.
#[derive(Debug, thiserror::Error)]
pub enum SpectrumError {
    /// A built-in spectrum id that does not exist.
    #[error(
        "unknown built-in spectrum `{id}`\n  expected: one of {valid} (case-insensitive)\n  \
         fix: use one of those ids, or give a two-column spectrum file"
    )]
    UnknownBuiltin {
        /// The id as given.
        id: String,
        /// The valid ids, comma-separated.
        valid: String,
    },

    /// A spectrum file that cannot be read at all.
    #[error("{}: cannot read spectrum file: {source}\n  fix: check the path and the file's permissions", file.display())]
    Read {
        /// The file as given.
        file: PathBuf,
        /// The operating-system error.
        source: std::io::Error,
    },

    /// A spectrum file with bad content; `line` is 1-based.
    #[error("{}:{line}: {problem}\n  expected: {expected}\n  fix: {fix}", file.display())]
    File {
        /// The file as given.
        file: PathBuf,
        /// 1-based line number of the problem.
        line: usize,
        /// What is wrong.
        problem: String,
        /// What the reader expected.
        expected: String,
        /// How to fix it.
        fix: String,
    },

    /// A wavelength grid that cannot be built.
    #[error("wavelength grid {input}: {problem}\n  expected: {expected}\n  fix: {fix}")]
    Grid {
        /// The grid as given (text or a short description).
        input: String,
        /// What is wrong.
        problem: String,
        /// What was expected.
        expected: String,
        /// How to fix it.
        fix: String,
    },

    /// A curve, band or argument passed to an integral that cannot be used.
    #[error("{what}: {problem}\n  expected: {expected}\n  fix: {fix}")]
    Input {
        /// The argument concerned (`absorptance`, `band_nm`, ...).
        what: String,
        /// What is wrong.
        problem: String,
        /// What was expected.
        expected: String,
        /// How to fix it.
        fix: String,
    },
}

impl SpectrumError {
    /// Shorthand for [`SpectrumError::Input`].
    pub(crate) fn input(
        what: &str,
        problem: impl Into<String>,
        expected: impl Into<String>,
        fix: impl Into<String>,
    ) -> Self {
        SpectrumError::Input {
            what: what.to_string(),
            problem: problem.into(),
            expected: expected.into(),
            fix: fix.into(),
        }
    }
}
