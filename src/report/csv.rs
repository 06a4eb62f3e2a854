//! CSV text: `#` comment lines (provenance, assumptions), one header row whose cells carry
//! units, then data rows.
//!
//! Invariant: every float is written in Rust's shortest round-trip form (`{:?}`), so reading
//! it back gives the same `f64` bit for bit; NaN is `NaN`, infinities `inf` / `-inf` (numpy
//! and pandas read both). Cells are quoted per RFC 4180 (Y. Shafranovich, IETF, 2005) when
//! they contain a comma, a quote or a line break. Lines end in `\n`.

use super::ReportError;

/// A header column: a name and its unit (empty for a pure number such as a fraction).
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    /// What the column holds, e.g. `wavelength`.
    pub name: String,
    /// Its unit, e.g. `nm`, `mA/cm²`; empty for dimensionless values.
    pub unit: String,
}

impl Column {
    /// A column `name` in `unit` (use `""` for dimensionless values).
    pub fn new(name: impl Into<String>, unit: impl Into<String>) -> Self {
        Self {
            name: name.into(),
            unit: unit.into(),
        }
    }

    /// The header cell: `name (unit)`, or `name` when the unit is empty.
    pub fn header_cell(&self) -> String {
        if self.unit.is_empty() {
            self.name.clone()
        } else {
            format!("{} ({})", self.name, self.unit)
        }
    }
}

/// One CSV cell.
#[derive(Debug, Clone, PartialEq)]
pub enum Cell {
    /// A float, written in shortest round-trip form.
    Num(f64),
    /// An integer.
    Int(i64),
    /// Text, quoted when needed.
    Text(String),
}

impl From<f64> for Cell {
    fn from(v: f64) -> Self {
        Cell::Num(v)
    }
}
impl From<i64> for Cell {
    fn from(v: i64) -> Self {
        Cell::Int(v)
    }
}
impl From<usize> for Cell {
    fn from(v: usize) -> Self {
        Cell::Int(i64::try_from(v).unwrap_or(i64::MAX))
    }
}
impl From<&str> for Cell {
    fn from(v: &str) -> Self {
        Cell::Text(v.to_string())
    }
}
impl From<String> for Cell {
    fn from(v: String) -> Self {
        Cell::Text(v)
    }
}

/// Builds CSV text in memory; write it with [`super::ResultsDir::write_text`].
///
/// ```
/// use lightfold::report::{Column, CsvWriter};
/// let mut csv = CsvWriter::new(&[Column::new("wavelength", "nm"), Column::new("reflectance", "")]);
/// csv.comment("seed = 42");
/// csv.row_f64(&[600.0, 0.1]).unwrap();
/// assert_eq!(csv.finish(), "# seed = 42\nwavelength (nm),reflectance\n600.0,0.1\n");
/// ```
#[derive(Debug, Clone)]
pub struct CsvWriter {
    comments: String,
    header: String,
    body: String,
    n_cols: usize,
    n_rows: usize,
}

impl CsvWriter {
    /// A writer with the given header columns.
    pub fn new(columns: &[Column]) -> Self {
        let cells: Vec<String> = columns.iter().map(|c| quote(&c.header_cell())).collect();
        Self {
            comments: String::new(),
            header: cells.join(",") + "\n",
            body: String::new(),
            n_cols: columns.len(),
            n_rows: 0,
        }
    }

    /// Adds a comment; each line of `text` becomes one `# ` line. Comments are placed
    /// before the header, in the order given, whenever they are added.
    pub fn comment(&mut self, text: &str) -> &mut Self {
        for line in text.lines() {
            self.comments.push('#');
            if !line.is_empty() {
                self.comments.push(' ');
                self.comments.push_str(line);
            }
            self.comments.push('\n');
        }
        if text.is_empty() {
            self.comments.push_str("#\n");
        }
        self
    }

    /// Adds a row of floats. Errors if the row's length differs from the header's.
    pub fn row_f64(&mut self, values: &[f64]) -> Result<&mut Self, ReportError> {
        self.check_width(values.len())?;
        let cells: Vec<String> = values.iter().map(|v| format_f64(*v)).collect();
        self.push_row(&cells);
        Ok(self)
    }

    /// Adds a row of mixed cells. Errors if the row's length differs from the header's.
    pub fn row(&mut self, cells: &[Cell]) -> Result<&mut Self, ReportError> {
        self.check_width(cells.len())?;
        let cells: Vec<String> = cells
            .iter()
            .map(|c| match c {
                Cell::Num(v) => format_f64(*v),
                Cell::Int(i) => i.to_string(),
                Cell::Text(t) => quote(t),
            })
            .collect();
        self.push_row(&cells);
        Ok(self)
    }

    /// Adds one row per index from equally long columns (`columns[j][i]` is row i, column j).
    /// Errors if the number of columns differs from the header's; a short column ends the
    /// table at its length (all columns are cut to the shortest).
    pub fn columns_f64(&mut self, columns: &[&[f64]]) -> Result<&mut Self, ReportError> {
        self.check_width(columns.len())?;
        let n = columns.iter().map(|c| c.len()).min().unwrap_or(0);
        for i in 0..n {
            let cells: Vec<String> = columns.iter().map(|c| format_f64(c[i])).collect();
            self.push_row(&cells);
        }
        Ok(self)
    }

    /// Number of data rows so far.
    pub fn n_rows(&self) -> usize {
        self.n_rows
    }

    /// The finished text: comments, header, rows.
    pub fn finish(&self) -> String {
        let mut s =
            String::with_capacity(self.comments.len() + self.header.len() + self.body.len());
        s.push_str(&self.comments);
        s.push_str(&self.header);
        s.push_str(&self.body);
        s
    }

    fn check_width(&self, got: usize) -> Result<(), ReportError> {
        if got != self.n_cols {
            return Err(ReportError::CsvRowWidth {
                row: self.n_rows + 1,
                expected: self.n_cols,
                got,
            });
        }
        Ok(())
    }

    fn push_row(&mut self, cells: &[String]) {
        self.body.push_str(&cells.join(","));
        self.body.push('\n');
        self.n_rows += 1;
    }
}

/// A float in shortest round-trip form: `0.1`, `600.0`, `1e-7`, `NaN`, `inf`, `-inf`.
pub fn format_f64(v: f64) -> String {
    format!("{v:?}")
}

/// A text cell, quoted per RFC 4180 when it holds a comma, a quote or a line break.
fn quote(text: &str) -> String {
    if text.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quoting_follows_rfc_4180() {
        assert_eq!(quote("plain"), "plain");
        assert_eq!(quote("a,b"), "\"a,b\"");
        assert_eq!(quote("say \"hi\""), "\"say \"\"hi\"\"\"");
        assert_eq!(quote("two\nlines"), "\"two\nlines\"");
    }

    #[test]
    fn empty_comment_is_a_bare_hash() {
        let mut w = CsvWriter::new(&[Column::new("x", "")]);
        w.comment("");
        assert_eq!(w.finish(), "#\nx\n");
    }
}
