//! Wavelength grids: the wavelengths a simulation is run at, in nm.
//! Invariant: at least one value, all finite, > 0 and strictly increasing.

use super::SpectrumError;

/// Most points a grid may hold; guards against a typo such as a step of `1e-9` nm.
pub const MAX_GRID_POINTS: usize = 1_000_000;

/// Tolerance, relative to the step, within which `stop` counts as landing on a step.
const STOP_TOL_REL: f64 = 1e-9;

/// Wavelengths in nm, strictly increasing, each finite and > 0; never empty.
#[derive(Debug, Clone, PartialEq)]
pub struct WavelengthGrid {
    values_nm: Vec<f64>,
}

impl WavelengthGrid {
    /// Evenly spaced grid `start_nm, start_nm + step_nm, …` up to `stop_nm`.
    ///
    /// * `start_nm` – first wavelength, > 0 nm.
    /// * `stop_nm` – last wavelength, ≥ `start_nm`; included when it lies within 1e-9 of a
    ///   step of a grid point (then it is stored exactly as given), otherwise the grid ends
    ///   at the last step below it.
    /// * `step_nm` – spacing, > 0 nm.
    ///
    /// Points are computed as `start + i·step` (no accumulated round-off). Errors when a value
    /// is not finite or out of range, or when the grid would exceed [`MAX_GRID_POINTS`].
    pub fn range(start_nm: f64, stop_nm: f64, step_nm: f64) -> Result<Self, SpectrumError> {
        let input = format!("{start_nm}:{stop_nm}:{step_nm}");
        let fail = |problem: String, expected: &str, fix: &str| SpectrumError::Grid {
            input: format!("`{input}`"),
            problem,
            expected: expected.to_string(),
            fix: fix.to_string(),
        };
        if !(start_nm.is_finite() && stop_nm.is_finite() && step_nm.is_finite()) {
            return Err(fail(
                "start, stop and step must be finite numbers".into(),
                "start:stop:step in nm, e.g. 300:1200:10",
                "give finite wavelengths in nm",
            ));
        }
        if start_nm <= 0.0 {
            return Err(fail(
                format!("start {start_nm} nm is not positive"),
                "a start wavelength > 0 nm",
                "start at a positive wavelength, e.g. 300",
            ));
        }
        if step_nm <= 0.0 {
            return Err(fail(
                format!("step {step_nm} nm is not positive"),
                "a step > 0 nm",
                "use a positive step, e.g. 10",
            ));
        }
        if stop_nm < start_nm {
            return Err(fail(
                format!("stop {stop_nm} nm is below start {start_nm} nm"),
                "stop ≥ start",
                "swap start and stop",
            ));
        }
        // Number of whole steps, counting a stop within STOP_TOL_REL of a step as reached.
        let steps_f = (stop_nm - start_nm) / step_nm;
        let steps_floor = (steps_f + STOP_TOL_REL).floor();
        if steps_floor + 1.0 > MAX_GRID_POINTS as f64 {
            return Err(fail(
                format!("it would hold {} points", steps_floor + 1.0),
                &format!("at most {MAX_GRID_POINTS} points"),
                "use a larger step or a narrower range",
            ));
        }
        let steps = steps_floor as usize;
        let lands_on_stop = (steps_f - steps_floor).abs() <= STOP_TOL_REL;
        let mut values_nm: Vec<f64> = (0..=steps).map(|i| start_nm + i as f64 * step_nm).collect();
        if lands_on_stop {
            values_nm[steps] = stop_nm;
        }
        Self::checked(values_nm, format!("`{input}`"))
    }

    /// Grid from explicit wavelengths in nm: non-empty, each finite and > 0, strictly
    /// increasing. Errors name the first offending position (0-based) and value.
    pub fn list(values_nm: Vec<f64>) -> Result<Self, SpectrumError> {
        let input = format!("list of {} values", values_nm.len());
        Self::checked(values_nm, input)
    }

    /// Parses a grid from text, wavelengths in nm, whitespace ignored:
    ///
    /// * `"300:1200:10"` – `start:stop:step`, as [`WavelengthGrid::range`];
    /// * `"500,600,700"` – a list, as [`WavelengthGrid::list`];
    /// * `"600"` – one wavelength.
    pub fn parse(text: &str) -> Result<Self, SpectrumError> {
        let quoted = format!("`{text}`");
        let fail = |problem: String, fix: &str| SpectrumError::Grid {
            input: quoted.clone(),
            problem,
            expected: "`start:stop:step` (e.g. `300:1200:10`), a comma list (e.g. \
                       `500,600,700`) or one wavelength (e.g. `600`), all in nm"
                .to_string(),
            fix: fix.to_string(),
        };
        let number = |field: &str, role: &str| -> Result<f64, SpectrumError> {
            let field = field.trim();
            field.parse::<f64>().map_err(|_| {
                if field.is_empty() {
                    fail(format!("{role} is empty"), "write a number in nm there")
                } else {
                    fail(
                        format!("{role} `{field}` is not a number"),
                        "write plain numbers in nm, without units",
                    )
                }
            })
        };
        let text_trim = text.trim();
        if text_trim.is_empty() {
            return Err(fail("it is empty".into(), "give e.g. `300:1200:10`"));
        }
        if text_trim.contains(':') {
            let parts: Vec<&str> = text_trim.split(':').collect();
            if parts.len() != 3 {
                return Err(fail(
                    format!("{} colon-separated fields", parts.len()),
                    "give start, stop and step, e.g. `300:1200:10`",
                ));
            }
            let start = number(parts[0], "start")?;
            let stop = number(parts[1], "stop")?;
            let step = number(parts[2], "step")?;
            return Self::range(start, stop, step);
        }
        let values = text_trim
            .split(',')
            .enumerate()
            .map(|(i, field)| number(field, &format!("value {}", i + 1)))
            .collect::<Result<Vec<f64>, _>>()?;
        Self::checked(values, quoted.clone())
    }

    /// The wavelengths in nm.
    pub fn as_slice(&self) -> &[f64] {
        &self.values_nm
    }

    /// Number of wavelengths (≥ 1).
    pub fn len(&self) -> usize {
        self.values_nm.len()
    }

    /// Always `false`: a grid holds at least one wavelength.
    pub fn is_empty(&self) -> bool {
        self.values_nm.is_empty()
    }

    /// First and last wavelength in nm.
    pub fn bounds_nm(&self) -> (f64, f64) {
        (self.values_nm[0], self.values_nm[self.values_nm.len() - 1])
    }

    /// Validates the invariant; `input` describes the grid in error messages.
    fn checked(values_nm: Vec<f64>, input: String) -> Result<Self, SpectrumError> {
        let fail = |problem: String, fix: &str| SpectrumError::Grid {
            input: input.clone(),
            problem,
            expected: "at least one wavelength; each finite, > 0 nm and larger than the one \
                       before"
                .to_string(),
            fix: fix.to_string(),
        };
        if values_nm.is_empty() {
            return Err(fail(
                "it holds no wavelength".into(),
                "give at least one wavelength",
            ));
        }
        if values_nm.len() > MAX_GRID_POINTS {
            return Err(fail(
                format!(
                    "it holds {} points, more than {MAX_GRID_POINTS}",
                    values_nm.len()
                ),
                "use fewer wavelengths",
            ));
        }
        for (i, &v) in values_nm.iter().enumerate() {
            if !v.is_finite() || v <= 0.0 {
                return Err(fail(
                    format!("value {} is {v} nm", i + 1),
                    "use finite, positive wavelengths in nm",
                ));
            }
            if i > 0 && v <= values_nm[i - 1] {
                return Err(fail(
                    format!(
                        "value {} ({v} nm) does not exceed value {} ({} nm)",
                        i + 1,
                        i,
                        values_nm[i - 1]
                    ),
                    "sort the wavelengths and remove duplicates",
                ));
            }
        }
        Ok(WavelengthGrid { values_nm })
    }
}

impl std::str::FromStr for WavelengthGrid {
    type Err = SpectrumError;

    /// Same as [`WavelengthGrid::parse`].
    fn from_str(text: &str) -> Result<Self, Self::Err> {
        WavelengthGrid::parse(text)
    }
}

impl AsRef<[f64]> for WavelengthGrid {
    fn as_ref(&self) -> &[f64] {
        &self.values_nm
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn range_includes_stop_that_lands_on_a_step() {
        let g = WavelengthGrid::range(300.0, 1200.0, 10.0).unwrap();
        assert_eq!(g.len(), 91);
        assert_eq!(g.bounds_nm(), (300.0, 1200.0));
        assert_eq!(g.as_slice()[17], 470.0);
        // 0.1 steps accumulate binary round-off; the stop is still reached and exact.
        let g = WavelengthGrid::range(400.0, 401.0, 0.1).unwrap();
        assert_eq!(g.len(), 11);
        assert_eq!(g.as_slice()[10], 401.0);
    }

    #[test]
    fn range_stops_below_a_stop_between_steps() {
        let g = WavelengthGrid::range(300.0, 1205.0, 10.0).unwrap();
        assert_eq!(g.bounds_nm(), (300.0, 1200.0));
        let g = WavelengthGrid::range(600.0, 600.0, 5.0).unwrap();
        assert_eq!(g.as_slice(), &[600.0]);
    }

    #[test]
    fn range_rejects_bad_parameters() {
        for (a, b, c) in [
            (0.0, 100.0, 1.0),
            (-5.0, 100.0, 1.0),
            (300.0, 200.0, 1.0),
            (300.0, 400.0, 0.0),
            (300.0, 400.0, -1.0),
            (f64::NAN, 400.0, 1.0),
            (300.0, f64::INFINITY, 1.0),
            (300.0, 1200.0, 1e-9),
        ] {
            let e = WavelengthGrid::range(a, b, c);
            assert!(
                matches!(e, Err(SpectrumError::Grid { .. })),
                "{a}:{b}:{c} gave {e:?}"
            );
        }
    }

    #[test]
    fn parse_accepts_the_three_forms() {
        let g = WavelengthGrid::parse(" 300 : 1200 : 10 ").unwrap();
        assert_eq!(g, WavelengthGrid::range(300.0, 1200.0, 10.0).unwrap());
        let g: WavelengthGrid = "500, 600,700".parse().unwrap();
        assert_eq!(g.as_slice(), &[500.0, 600.0, 700.0]);
        let g = WavelengthGrid::parse("632.8").unwrap();
        assert_eq!(g.as_slice(), &[632.8]);
        assert!(!g.is_empty());
    }

    #[test]
    fn parse_errors_quote_the_text_and_say_what_is_wrong() {
        let cases = [
            ("", "empty"),
            ("300:1200", "2 colon-separated fields"),
            ("300:1200:10:5", "4 colon-separated fields"),
            ("300:12OO:10", "stop `12OO` is not a number"),
            ("500,,700", "value 2 is empty"),
            ("500,600,", "value 3 is empty"),
            ("500nm", "`500nm` is not a number"),
            ("700,600", "does not exceed"),
            ("600,600", "does not exceed"),
            ("-1", "value 1 is -1 nm"),
            ("300:1200:-10", "step -10 nm is not positive"),
        ];
        for (text, needle) in cases {
            let msg = WavelengthGrid::parse(text).unwrap_err().to_string();
            assert!(msg.contains(needle), "`{text}`: {msg}");
            assert!(msg.contains("expected:") && msg.contains("fix:"), "{msg}");
        }
    }

    #[test]
    fn list_rejects_empty_and_non_finite() {
        assert!(WavelengthGrid::list(vec![]).is_err());
        assert!(WavelengthGrid::list(vec![500.0, f64::NAN]).is_err());
        assert!(WavelengthGrid::list(vec![500.0, f64::INFINITY]).is_err());
        assert_eq!(WavelengthGrid::list(vec![500.0, 501.0]).unwrap().len(), 2);
    }
}
