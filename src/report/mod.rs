//! Results on disk and on screen: atomic files, CSV and JSON, plots (SVG and PNG from one
//! drawing) and a self-contained HTML report.
//!
//! Invariant: this module reads results and computes no physics; every number it shows was
//! handed to it. A file it writes is complete or absent (see [`write_atomic`]).
//! Not here: what goes into a report (the `run`, `compare` and `sweep` commands decide).
//!
//! * [`files`]: [`write_atomic`], [`write_atomic_with`], [`ResultsDir`].
//! * [`csv`]: [`CsvWriter`], full-precision floats, units in the header, `#` comments.
//! * [`plot`]: [`LinePlot`], [`StackedArea`], [`BarChart`], [`PolarMap`], drawn by our own
//!   renderer (stroke font included) to SVG and PNG.
//! * [`html`]: [`html::Page`], one self-contained report file.

pub mod csv;
pub mod files;
pub mod html;
pub mod plot;
pub mod run_report;

use std::path::PathBuf;

pub use csv::{Cell, Column, CsvWriter};
pub use files::{ResultsDir, write_atomic, write_atomic_with};
pub use plot::{
    BarChart, BarGroup, Color, Layer, LinePlot, Plot, PolarMap, Series, SeriesStyle, StackedArea,
};

/// Everything that can go wrong while writing results.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    /// The results folder exists and holds files, and `force` was not given.
    #[error(
        "{}: results folder exists and is not empty\n  expected: a new or empty folder\n  \
         fix: choose another folder, empty this one, or pass --force to overwrite files in it",
        path.display()
    )]
    FolderNotEmpty {
        /// The folder as given.
        path: PathBuf,
    },

    /// The results path exists but is a file (or something else that is not a folder).
    #[error(
        "{}: exists and is not a folder\n  expected: a folder for the results\n  \
         fix: choose another path for the results",
        path.display()
    )]
    NotAFolder {
        /// The path as given.
        path: PathBuf,
    },

    /// A file name that would leave the results folder, or names no file.
    #[error(
        "bad results file name `{name}`: {reason}\n  expected: a relative path inside the \
         results folder, such as `summary.json` or `plots/spectrum.svg`\n  \
         fix: this is a bug in the caller; report it"
    )]
    BadFileName {
        /// The name as given.
        name: String,
        /// Why it was refused.
        reason: String,
    },

    /// An operating-system error while creating, listing or writing.
    #[error("{}: cannot {action}: {source}\n  fix: check free space and permissions", path.display())]
    Io {
        /// The file or folder concerned.
        path: PathBuf,
        /// What was being done, e.g. "write".
        action: &'static str,
        /// The operating-system error.
        source: std::io::Error,
    },

    /// A value that cannot be written as JSON (e.g. a map with non-string keys).
    #[error("{what}: cannot write as JSON: {source}\n  fix: this is a bug in lightfold; report it")]
    Json {
        /// What was being written (usually the file name).
        what: String,
        /// The serializer's error.
        source: serde_json::Error,
    },

    /// A CSV row whose number of cells differs from the header.
    #[error(
        "CSV data row {row}: {got} cells\n  expected: {expected} cells, one per header column\n  \
         fix: this is a bug in the caller; report it"
    )]
    CsvRowWidth {
        /// 1-based data row number.
        row: usize,
        /// Cells in the header.
        expected: usize,
        /// Cells in the row.
        got: usize,
    },
}

/// Pretty-printed JSON of `value`, ending in a newline; `what` names it in errors.
///
/// Floats are written by `serde_json` in shortest round-trip form; NaN and infinities, which
/// JSON cannot hold, become `null` (callers that need them must say so in the data).
pub fn to_json_pretty<T: serde::Serialize + ?Sized>(
    what: &str,
    value: &T,
) -> Result<String, ReportError> {
    let mut text = serde_json::to_string_pretty(value).map_err(|source| ReportError::Json {
        what: what.to_string(),
        source,
    })?;
    text.push('\n');
    Ok(text)
}

/// `v` for display with `decimals` decimals: a value that rounds to zero there is shown as
/// 0, not as "-0.000" (a tiny negative film absorptance comes from the angle tables'
/// interpolation error, bounded by 1e-5; the data files keep the value as computed).
pub fn shown(v: f64, decimals: i32) -> f64 {
    if v.abs() < 0.5 * 10f64.powi(-decimals) {
        0.0
    } else {
        v
    }
}

#[cfg(test)]
mod shown_tests {
    use super::shown;

    #[test]
    fn values_that_round_to_zero_are_shown_as_zero_not_minus_zero() {
        assert_eq!(format!("{:.5}", shown(-3e-9, 5)), "0.00000");
        assert_eq!(format!("{:.3}", shown(-0.0, 3)), "0.000");
        // Anything visible at that precision keeps its sign.
        assert_eq!(format!("{:.3}", shown(-0.002, 3)), "-0.002");
        assert_eq!(format!("{:.5}", shown(0.012_34, 5)), "0.01234");
    }
}
