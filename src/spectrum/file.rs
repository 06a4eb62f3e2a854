//! Reader for two-column spectrum tables (the embedded ASTM G173-03 files and user files).
//!
//! Format, one record per line:
//!
//! ```text
//! # provenance: source, standard, edition, units      <- optional `#` lines, kept verbatim
//! wavelength_nm,irradiance_W_m2_nm                     <- unit header (case-insensitive)
//! 280,4.7309E-23
//! 280.5,1.2307E-21
//! ```
//!
//! * Unit header: first column `wavelength_nm`; second column `irradiance_W_m2_nm`
//!   (spectral irradiance, W m⁻² nm⁻¹) or `photon_flux_m2_s_nm` (spectral photon flux,
//!   photons m⁻² s⁻¹ nm⁻¹, converted on reading to irradiance E = Φ·hc/λ).
//! * Fields are comma-separated; spaces around them, blank lines, `\r\n` line ends and a
//!   UTF-8 byte-order mark are accepted. `#` lines may appear anywhere; those before the
//!   unit header form the provenance.
//! * Rows: wavelengths finite, > 0 and strictly increasing; values finite and ≥ 0; at least
//!   two rows.

use std::path::Path;

use super::{PLANCK_J_S, SPEED_OF_LIGHT_M_S, SpectrumError};

/// Accepted unit headers, as shown in error messages.
pub const ACCEPTED_HEADERS: &str =
    "`wavelength_nm,irradiance_W_m2_nm` or `wavelength_nm,photon_flux_m2_s_nm`";

/// What the second column holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Quantity {
    /// W m⁻² nm⁻¹.
    Irradiance,
    /// photons m⁻² s⁻¹ nm⁻¹.
    PhotonFlux,
}

/// A parsed table: provenance lines and the spectrum in W m⁻² nm⁻¹.
#[derive(Debug)]
pub(crate) struct Table {
    pub provenance: String,
    pub wavelength_nm: Vec<f64>,
    pub irradiance_w_m2_nm: Vec<f64>,
}

/// Parses `text` read from `file` (the path is used in error messages only).
pub(crate) fn parse_table(text: &str, file: &Path) -> Result<Table, SpectrumError> {
    let fail = |line: usize, problem: String, expected: &str, fix: &str| SpectrumError::File {
        file: file.to_path_buf(),
        line,
        problem,
        expected: expected.to_string(),
        fix: fix.to_string(),
    };
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);

    let mut provenance: Vec<&str> = Vec::new();
    let mut quantity: Option<Quantity> = None;
    let mut wavelength_nm = Vec::new();
    let mut values = Vec::new();
    let mut last_line = 0;

    for (index, raw) in text.lines().enumerate() {
        let line = index + 1;
        last_line = line;
        let trimmed = raw.trim();
        if trimmed.is_empty() {
            continue;
        }
        if trimmed.starts_with('#') {
            if quantity.is_none() {
                provenance.push(trimmed);
            }
            continue;
        }
        let fields: Vec<&str> = trimmed.split(',').map(str::trim).collect();

        // Unit header: the first line that is neither blank nor a comment.
        let Some(q) = quantity else {
            quantity = Some(header_quantity(&fields).map_err(|(problem, fix)| {
                fail(
                    line,
                    problem,
                    &format!("a unit header, {ACCEPTED_HEADERS}"),
                    &fix,
                )
            })?);
            continue;
        };

        // Data row
        if fields.len() != 2 {
            return Err(fail(
                line,
                format!("{} fields in `{trimmed}`", fields.len()),
                "two comma-separated numbers: wavelength in nm, value",
                "keep exactly two columns; put notes on `#` lines",
            ));
        }
        let wl = number(fields[0]).ok_or_else(|| {
            fail(
                line,
                format!("wavelength `{}` is not a finite number", fields[0]),
                "a finite number in nm",
                "write plain numbers without units, with `.` as decimal mark",
            )
        })?;
        let value = number(fields[1]).ok_or_else(|| {
            fail(
                line,
                format!("value `{}` is not a finite number", fields[1]),
                "a finite number in the unit of the header",
                "write plain numbers without units, with `.` as decimal mark",
            )
        })?;
        if wl <= 0.0 {
            return Err(fail(
                line,
                format!("wavelength {wl} nm is not positive"),
                "wavelengths > 0 nm",
                "check the column order (wavelength first) and the unit (nm)",
            ));
        }
        let prev = wavelength_nm.last().copied().unwrap_or(0.0);
        if wl <= prev {
            return Err(fail(
                line,
                format!("wavelength {wl} nm does not exceed the previous row's {prev} nm"),
                "strictly increasing wavelengths",
                "sort the rows by wavelength and remove duplicates",
            ));
        }
        if value < 0.0 {
            let what = match q {
                Quantity::Irradiance => "irradiance",
                Quantity::PhotonFlux => "photon flux",
            };
            return Err(fail(
                line,
                format!("{what} {value} at {wl} nm is negative"),
                &format!("{what} ≥ 0"),
                "clip measurement noise below zero to 0",
            ));
        }
        wavelength_nm.push(wl);
        values.push(value);
    }

    let Some(q) = quantity else {
        return Err(fail(
            last_line.max(1),
            "no unit header and no data".into(),
            &format!("a unit header, {ACCEPTED_HEADERS}, then at least two data rows"),
            "check that this is a spectrum file",
        ));
    };
    if wavelength_nm.len() < 2 {
        return Err(fail(
            last_line,
            format!("only {} data row(s)", wavelength_nm.len()),
            "at least two data rows (a spectrum is interpolated between points)",
            "add data rows below the unit header",
        ));
    }

    let irradiance_w_m2_nm = match q {
        Quantity::Irradiance => values,
        // E = Φ·hc/λ, λ in m.
        Quantity::PhotonFlux => wavelength_nm
            .iter()
            .zip(&values)
            .map(|(&wl, &phi)| phi * PLANCK_J_S * SPEED_OF_LIGHT_M_S / (wl * 1e-9))
            .collect(),
    };
    Ok(Table {
        provenance: provenance.join("\n"),
        wavelength_nm,
        irradiance_w_m2_nm,
    })
}

/// Recognises the unit header; on failure returns (problem, fix).
fn header_quantity(fields: &[&str]) -> Result<Quantity, (String, String)> {
    let shown = fields.join(",");
    if fields.iter().any(|f| number(f).is_some()) {
        return Err((
            format!("data row `{shown}` before any unit header"),
            "add `wavelength_nm,irradiance_W_m2_nm` as the first line that is not a `#` comment"
                .into(),
        ));
    }
    if fields.len() != 2 {
        return Err((
            format!("unit header `{shown}` has {} columns", fields.len()),
            "keep exactly two columns: wavelength and one spectral quantity".into(),
        ));
    }
    let first = fields[0].to_ascii_lowercase();
    if first != "wavelength_nm" {
        return Err((
            format!("unknown first column `{}`", fields[0]),
            "name it `wavelength_nm` and give wavelengths in nm (convert µm × 1000)".into(),
        ));
    }
    match fields[1].to_ascii_lowercase().as_str() {
        "irradiance_w_m2_nm" => Ok(Quantity::Irradiance),
        "photon_flux_m2_s_nm" => Ok(Quantity::PhotonFlux),
        _ => Err((
            format!("unknown second column `{}`", fields[1]),
            "use `irradiance_W_m2_nm` (W m⁻² nm⁻¹) or `photon_flux_m2_s_nm` \
             (photons m⁻² s⁻¹ nm⁻¹) and convert the values to that unit"
                .into(),
        )),
    }
}

/// A finite number, or `None`.
fn number(field: &str) -> Option<f64> {
    field.parse::<f64>().ok().filter(|v| v.is_finite())
}

#[cfg(test)]
mod tests {
    use crate::spectrum::{Spectrum, SpectrumError};
    use std::io::Write;

    /// Writes `text` to a temporary `.csv` file and reads it as a spectrum.
    fn read(text: &str) -> (tempfile::NamedTempFile, Result<Spectrum, SpectrumError>) {
        let mut f = tempfile::Builder::new().suffix(".csv").tempfile().unwrap();
        f.write_all(text.as_bytes()).unwrap();
        f.flush().unwrap();
        let result = Spectrum::from_csv(f.path());
        (f, result)
    }

    /// Reads `text`, expects a `File` error at `line` whose message contains `needle`.
    fn expect_error(text: &str, line: usize, needle: &str) {
        let (f, result) = read(text);
        let err = result.expect_err(needle);
        let msg = err.to_string();
        match err {
            SpectrumError::File { line: got, .. } => assert_eq!(got, line, "{msg}"),
            other => panic!("expected a File error, got {other:?}"),
        }
        let location = format!("{}:{line}: ", f.path().display());
        assert!(msg.starts_with(&location), "{msg}");
        assert!(msg.contains(needle), "{msg}");
        assert!(msg.contains("expected:") && msg.contains("fix:"), "{msg}");
    }

    #[test]
    fn reads_a_file_with_comments_spaces_crlf_and_bom() {
        let text = "\u{feff}# Lab solar simulator, 2025-01-10\r\n# W m^-2 nm^-1\r\n\r\n\
                    Wavelength_nm , Irradiance_W_m2_nm\r\n400, 1.0\r\n# a note\r\n 500 ,2.5e0\r\n600,0\r\n";
        let (f, result) = read(text);
        let s = result.unwrap();
        assert_eq!(s.wavelength_nm(), &[400.0, 500.0, 600.0]);
        assert_eq!(s.irradiance_w_m2_nm(), &[1.0, 2.5, 0.0]);
        assert_eq!(
            s.provenance(),
            "# Lab solar simulator, 2025-01-10\n# W m^-2 nm^-1"
        );
        assert_eq!(s.id(), f.path().file_stem().unwrap().to_string_lossy());
    }

    #[test]
    fn photon_flux_column_is_converted_to_irradiance() {
        // E = Φ·hc/λ: 1e18 photons m⁻² s⁻¹ nm⁻¹ at 620 nm
        // = 1e18 × 1.986 445 857e-25 J m / 620e-9 m = 0.320 394 493 W m⁻² nm⁻¹.
        let (_f, result) = read("wavelength_nm,photon_flux_m2_s_nm\n620,1e18\n700,2e18\n");
        let s = result.unwrap();
        let e = s.irradiance_w_m2_nm()[0];
        assert!((e / 0.320_394_493 - 1.0).abs() < 1e-8, "E = {e}");
        // Round trip through photon_flux_at.
        assert!((s.photon_flux_at(700.0) / 2e18 - 1.0).abs() < 1e-12);
    }

    #[test]
    fn non_numeric_value_names_the_line() {
        expect_error(
            "# x\nwavelength_nm,irradiance_W_m2_nm\n400,1\n500,abc\n",
            4,
            "`abc`",
        );
        expect_error(
            "wavelength_nm,irradiance_W_m2_nm\n400,1\n5OO,1\n",
            3,
            "wavelength `5OO`",
        );
        expect_error(
            "wavelength_nm,irradiance_W_m2_nm\n400,1\n500,NaN\n",
            3,
            "`NaN`",
        );
        expect_error(
            "wavelength_nm,irradiance_W_m2_nm\n400,1\n500,inf\n",
            3,
            "`inf`",
        );
    }

    #[test]
    fn wavelengths_must_increase() {
        expect_error(
            "wavelength_nm,irradiance_W_m2_nm\n400,1\n500,1\n450,1\n",
            4,
            "450 nm does not exceed the previous row's 500 nm",
        );
        expect_error(
            "wavelength_nm,irradiance_W_m2_nm\n400,1\n400,1\n",
            3,
            "does not exceed",
        );
        expect_error(
            "wavelength_nm,irradiance_W_m2_nm\n0,1\n400,1\n",
            2,
            "not positive",
        );
    }

    #[test]
    fn negative_irradiance_is_rejected() {
        expect_error(
            "wavelength_nm,irradiance_W_m2_nm\n400,1\n500,-0.01\n",
            3,
            "irradiance -0.01 at 500 nm is negative",
        );
        expect_error(
            "wavelength_nm,photon_flux_m2_s_nm\n400,1e18\n500,-1\n",
            3,
            "photon flux -1 at 500 nm is negative",
        );
    }

    #[test]
    fn fewer_than_two_points_is_rejected() {
        expect_error(
            "wavelength_nm,irradiance_W_m2_nm\n400,1\n",
            2,
            "only 1 data row(s)",
        );
        expect_error(
            "# only a header\nwavelength_nm,irradiance_W_m2_nm\n",
            2,
            "only 0 data row(s)",
        );
        expect_error("", 1, "no unit header and no data");
    }

    #[test]
    fn unit_header_is_required_and_checked() {
        expect_error(
            "wavelength_nm,irradiance_mW_cm2_um\n400,1\n",
            1,
            "unknown second column",
        );
        expect_error(
            "wavelength_um,irradiance_W_m2_nm\n0.4,1\n",
            1,
            "unknown first column",
        );
        expect_error(
            "# no header\n400,1\n500,1\n",
            2,
            "data row `400,1` before any unit header",
        );
        expect_error(
            "wavelength_nm,irradiance_W_m2_nm,error\n",
            1,
            "has 3 columns",
        );
        expect_error(
            "wavelength_nm,irradiance_W_m2_nm\n400,1,0.1\n",
            2,
            "3 fields",
        );
    }

    #[test]
    fn missing_file_is_a_read_error_naming_the_path() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("absent.csv");
        let err = Spectrum::from_csv(&path).unwrap_err();
        assert!(matches!(err, SpectrumError::Read { .. }));
        assert!(err.to_string().contains("absent.csv"), "{err}");
    }
}
