//! Reader for n, k tables: the built-in `data/nk/*.csv` files and users' own files.
//!
//! Format (one row per wavelength):
//! ```text
//! # material: my SiNx film          (optional: becomes the material's name)
//! # reference: A. Author, J. 1, 2 (2024)   (optional: becomes its source)
//! wavelength_nm,n,k                 (optional header; if present exactly these columns)
//! 300,2.10,0.012
//! 310,2.09,0.010   # a comment after the data
//! ```
//! `#` starts a comment anywhere on a line; blank lines are skipped; fields are separated by
//! commas (spaces around them are allowed). Wavelengths in vacuum, nm, strictly increasing;
//! n > 0; k ≥ 0 (N = n + ik). At least two rows. Errors name file:line.

use super::MaterialError;
use super::models::Table;
use std::path::Path;

/// A parsed file: the table plus the optional `# material:` and `# reference:` headers.
#[derive(Debug)]
pub(crate) struct ParsedFile {
    pub table: Table,
    pub name: Option<String>,
    pub reference: Option<String>,
}

const EXPECTED_ROW: &str =
    "three comma-separated numbers `wavelength_nm,n,k`, e.g. `600,3.94,0.0199`";

fn bad(path: &Path, line: usize, problem: String, expected: &str, fix: &str) -> MaterialError {
    MaterialError::BadFile {
        path: path.to_path_buf(),
        line,
        problem,
        expected: expected.to_string(),
        fix: fix.to_string(),
    }
}

/// Parse the text of an n, k file; `path` is used in error messages only.
pub(crate) fn parse(text: &str, path: &Path) -> Result<ParsedFile, MaterialError> {
    let mut rows: Vec<(f64, f64, f64)> = Vec::new();
    let mut name = None;
    let mut reference = None;
    let mut seen_content = false;
    let mut last_line = 0;

    for (idx, raw) in text.lines().enumerate() {
        let line_no = idx + 1;
        last_line = line_no;
        let (content, comment) = match raw.find('#') {
            Some(pos) => (&raw[..pos], Some(&raw[pos + 1..])),
            None => (raw, None),
        };
        // Header comments give name and source.
        if let (Some(c), true) = (comment, content.trim().is_empty()) {
            let c = c.trim();
            if let Some(v) = c.strip_prefix("material:") {
                name.get_or_insert_with(|| v.trim().to_string());
            } else if let Some(v) = c.strip_prefix("reference:") {
                reference.get_or_insert_with(|| v.trim().to_string());
            }
        }
        let content = content.trim();
        if content.is_empty() {
            continue;
        }
        let fields: Vec<&str> = content.split(',').map(str::trim).collect();

        // An optional column header, only as the first content line.
        if !seen_content && fields[0].parse::<f64>().is_err() {
            seen_content = true;
            check_header(&fields, path, line_no)?;
            continue;
        }
        seen_content = true;

        if fields.len() != 3 {
            return Err(bad(
                path,
                line_no,
                format!("found {} field(s) in `{content}`", fields.len()),
                EXPECTED_ROW,
                "write one wavelength per line as wavelength_nm,n,k (k = 0 for a transparent medium)",
            ));
        }
        let mut values = [0.0; 3];
        for (i, (field, column)) in fields.iter().zip(["wavelength_nm", "n", "k"]).enumerate() {
            values[i] = match field.parse::<f64>() {
                Ok(v) if v.is_finite() => v,
                _ => {
                    return Err(bad(
                        path,
                        line_no,
                        format!("{column} `{field}` is not a finite number"),
                        EXPECTED_ROW,
                        "use a plain decimal number such as 3.94 or 1.2e-3",
                    ));
                }
            }
        }
        let [wl, n, k] = values;
        if wl <= 0.0 {
            return Err(bad(
                path,
                line_no,
                format!("wavelength {wl} nm is not positive"),
                "a vacuum wavelength in nm, > 0",
                "check the first column; it must be the wavelength in nm",
            ));
        }
        if n <= 0.0 {
            return Err(bad(
                path,
                line_no,
                format!("n = {n} is not positive"),
                "n > 0",
                "check the second column; it must be the real part n of N = n + ik",
            ));
        }
        if k < 0.0 {
            return Err(bad(
                path,
                line_no,
                format!("k = {k} is negative"),
                "k ≥ 0 (lightfold writes N = n + ik with k ≥ 0 for absorption)",
                "if your data use the convention N = n − ik, drop the minus sign of k",
            ));
        }
        let previous = rows.last().map(|r| r.0);
        if let Some(prev) = previous.filter(|&prev| wl <= prev) {
            return Err(bad(
                path,
                line_no,
                format!("wavelength {wl} nm does not increase (previous row: {prev} nm)"),
                "wavelengths in strictly increasing order, no duplicates",
                "sort the rows by wavelength and remove repeated wavelengths",
            ));
        }
        rows.push((wl, n, k));
    }

    if rows.len() < 2 {
        return Err(bad(
            path,
            last_line.max(1),
            format!("found {} data row(s)", rows.len()),
            "at least two rows wavelength_nm,n,k",
            "add rows covering the wavelengths you need; for a constant index write it \
             directly, e.g. `2.05+0.001i`",
        ));
    }
    let table = Table::new(&rows).map_err(|e| {
        bad(
            path,
            last_line,
            e.to_string(),
            EXPECTED_ROW,
            "check the data",
        )
    })?;
    Ok(ParsedFile {
        table,
        name,
        reference,
    })
}

fn check_header(fields: &[&str], path: &Path, line_no: usize) -> Result<(), MaterialError> {
    let lower: Vec<String> = fields.iter().map(|f| f.to_ascii_lowercase()).collect();
    if lower == ["wavelength_nm", "n", "k"] {
        return Ok(());
    }
    let first = lower.first().map(String::as_str).unwrap_or("");
    let fix = if first.contains("um") || first.contains("µm") || first.contains("micro") {
        "convert the wavelengths to nm (× 1000) and name the column wavelength_nm"
    } else if first.contains("ev") {
        "convert photon energy to wavelength in nm (λ = 1239.84/E) and sort by wavelength"
    } else {
        "use the header `wavelength_nm,n,k` or remove the header line"
    };
    Err(bad(
        path,
        line_no,
        format!("unexpected column header `{}`", fields.join(",")),
        "the header `wavelength_nm,n,k` (optional) followed by numeric rows",
        fix,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_header_comments_and_trailing_comments() {
        let text = "# material: test film\n# reference: nobody (2024)\n\nwavelength_nm, n, k\n\
                    400, 2.0, 0.1 # first\n500,1.9,0\n";
        let p = parse(text, Path::new("t.csv")).unwrap();
        assert_eq!(p.name.as_deref(), Some("test film"));
        assert_eq!(p.reference.as_deref(), Some("nobody (2024)"));
        assert_eq!(p.table.range_nm(), (400.0, 500.0));
    }

    #[test]
    fn micron_header_gets_a_unit_hint() {
        let err = parse("wavelength_um,n,k\n0.4,2,0\n0.5,2,0\n", Path::new("t.csv")).unwrap_err();
        let msg = err.to_string();
        assert!(
            msg.starts_with("t.csv:1:") && msg.contains("nm (× 1000)"),
            "{msg}"
        );
    }
}
