//! `lightfold materials`: list the built-in library, or show one material's n, k and
//! α = 4πk/λ at chosen wavelengths. Thin: parsing and printing only.

use super::Failure;
use lightfold::optics::absorption_coefficient_per_cm;
use lightfold::optics::materials::{self, ALIASES, Material};
use serde_json::{Value, json};
use std::io::Write;

/// Largest number of wavelengths one call may ask for (guards against `1:1e9:1e-3`).
const MAX_WAVELENGTHS: usize = 100_000;

/// List the material library, or show one material's n, k and α.
#[derive(clap::Args)]
pub struct MaterialsArgs {
    /// Material to show: a library id or alias (e.g. `si`, `sinx-n2.09-vogt2015`), a CSV file
    /// `wavelength_nm,n,k` (path containing `/` or ending in `.csv`), or a constant index
    /// such as `2.05+0.001i`. Without it, the library is listed.
    pub material: Option<String>,

    /// Wavelengths in nm: values and ranges separated by commas, e.g. `400,600,800` or
    /// `300:1200:100` (start:stop:step, stop included). Default: every 100 nm of the data.
    #[arg(long, short = 'w', value_name = "NM")]
    pub wavelengths: Option<String>,

    /// Print machine-readable JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: MaterialsArgs) -> Result<(), Failure> {
    let out = match args.material.as_deref() {
        None => {
            if args.wavelengths.is_some() {
                return Err(Failure::BadInput(
                    "--wavelengths needs a material\n  fix: e.g. `lightfold materials si --wavelengths 400,600,800`"
                        .into(),
                ));
            }
            if args.json { list_json()? } else { list_text() }
        }
        Some(spec) => {
            let material =
                materials::resolve(spec).map_err(|e| Failure::BadInput(e.to_string()))?;
            let wavelengths = match args.wavelengths.as_deref() {
                Some(text) => parse_wavelengths(text).map_err(Failure::BadInput)?,
                None => default_grid(&material),
            };
            let rows = evaluate(&material, &wavelengths)?;
            if args.json {
                show_json(&material, &rows)?
            } else {
                show_text(&material, &rows)
            }
        }
    };
    let mut stdout = std::io::stdout().lock();
    stdout
        .write_all(out.as_bytes())
        .and_then(|_| stdout.flush())
        .map_err(|e| Failure::Internal(format!("cannot write to standard output: {e}")))
}

/// One output row: wavelength_nm, n, k, α in cm⁻¹.
struct Row {
    wavelength_nm: f64,
    n: f64,
    k: f64,
    alpha_per_cm: f64,
}

fn evaluate(material: &Material, wavelengths: &[f64]) -> Result<Vec<Row>, Failure> {
    wavelengths
        .iter()
        .map(|&wl| {
            let index = material
                .index_at(wl)
                .map_err(|e| Failure::BadInput(e.to_string()))?;
            Ok(Row {
                wavelength_nm: wl,
                n: index.re,
                k: index.im,
                alpha_per_cm: absorption_coefficient_per_cm(index.im, wl),
            })
        })
        .collect()
}

/// Parse `400,600,800`, `300:1200:100` or a mix; every value > 0 and finite.
fn parse_wavelengths(text: &str) -> Result<Vec<f64>, String> {
    let help =
        "expected: wavelengths in nm as `400,600,800` or `start:stop:step` such as `300:1200:100`";
    let number = |t: &str| -> Result<f64, String> {
        let t = t.trim();
        match t.parse::<f64>() {
            Ok(v) if v.is_finite() && v > 0.0 => Ok(v),
            _ => Err(format!(
                "--wavelengths: `{t}` is not a positive wavelength in nm\n  {help}"
            )),
        }
    };
    let mut out = Vec::new();
    for item in text.split(',') {
        let parts: Vec<&str> = item.split(':').collect();
        match parts.as_slice() {
            [one] => out.push(number(one)?),
            [start, stop, step] => {
                let (start, stop, step) = (number(start)?, number(stop)?, number(step)?);
                if stop < start {
                    return Err(format!(
                        "--wavelengths: range `{}` ends ({stop} nm) before it starts ({start} nm)\n  {help}",
                        item.trim()
                    ));
                }
                // Points start + i·step up to stop, with slack for round-off in (stop−start)/step.
                let count = ((stop - start) / step + 1e-9).floor() + 1.0;
                if count > MAX_WAVELENGTHS as f64 || out.len() + count as usize > MAX_WAVELENGTHS {
                    return Err(format!(
                        "--wavelengths: `{}` asks for more than {MAX_WAVELENGTHS} wavelengths\n  fix: use a larger step",
                        item.trim()
                    ));
                }
                out.extend((0..count as usize).map(|i| start + i as f64 * step));
            }
            _ => {
                return Err(format!(
                    "--wavelengths: cannot read `{}`\n  {help}",
                    item.trim()
                ));
            }
        }
    }
    if out.len() > MAX_WAVELENGTHS {
        return Err(format!(
            "--wavelengths: more than {MAX_WAVELENGTHS} wavelengths"
        ));
    }
    Ok(out)
}

/// Every 100 nm inside the material's range, capped at 300–2500 nm for unbounded models;
/// the two range ends if that leaves fewer than two points.
fn default_grid(material: &Material) -> Vec<f64> {
    let (lo, hi) = material.range_nm();
    let (lo_c, hi_c) = if hi.is_infinite() {
        (300.0, 1200.0)
    } else {
        (lo, hi.min(2500.0))
    };
    let first = (lo_c / 100.0).ceil() as i64;
    let last = (hi_c / 100.0).floor() as i64;
    let grid: Vec<f64> = (first..=last).map(|i| i as f64 * 100.0).collect();
    if grid.len() >= 2 {
        grid
    } else {
        vec![lo_c, hi_c]
    }
}

fn range_text(material: &Material) -> String {
    let (lo, hi) = material.range_nm();
    if hi.is_infinite() {
        "any".to_string()
    } else {
        format!("{lo}–{hi}")
    }
}

fn range_json(material: &Material) -> Value {
    let (lo, hi) = material.range_nm();
    if hi.is_infinite() {
        Value::Null
    } else {
        json!([lo, hi])
    }
}

fn list_text() -> String {
    let lib = materials::library();
    let cols: Vec<[String; 4]> = lib
        .iter()
        .map(|m| {
            [
                m.id().to_string(),
                range_text(m),
                m.name().to_string(),
                m.short_source().to_string(),
            ]
        })
        .collect();
    let header = ["id", "range_nm", "name", "source"];
    let width = |c: usize| {
        cols.iter()
            .map(|r| r[c].chars().count())
            .chain([header[c].len()])
            .max()
            .unwrap_or(0)
    };
    let (w0, w1, w2) = (width(0), width(1), width(2));
    let pad = |s: &str, w: usize| format!("{s}{}", " ".repeat(w.saturating_sub(s.chars().count())));
    let mut out = String::new();
    out += &format!(
        "{}  {}  {}  {}\n",
        pad(header[0], w0),
        pad(header[1], w1),
        pad(header[2], w2),
        header[3]
    );
    for r in &cols {
        out += &format!(
            "{}  {}  {}  {}\n",
            pad(&r[0], w0),
            pad(&r[1], w1),
            pad(&r[2], w2),
            r[3]
        );
    }
    let aliases: Vec<String> = ALIASES
        .iter()
        .map(|(a, id)| format!("{a} → {id}"))
        .collect();
    out += &format!("\naliases: {}\n", aliases.join(", "));
    out += "Full citation and n, k: `lightfold materials ID`. Wherever a material is expected \
            you may also give a CSV file (wavelength_nm,n,k) or a constant index such as \
            2.05+0.001i.\n";
    out
}

fn list_json() -> Result<String, Failure> {
    let list: Vec<Value> = materials::library()
        .iter()
        .map(|m| {
            json!({
                "id": m.id(),
                "name": m.name(),
                "source": m.source(),
                "short_source": m.short_source(),
                "model": m.model().kind(),
                "range_nm": range_json(m),
                "absorbing": m.is_absorbing_anywhere(),
            })
        })
        .collect();
    let aliases: serde_json::Map<String, Value> = ALIASES
        .iter()
        .map(|(a, id)| (a.to_string(), json!(id)))
        .collect();
    to_json(&json!({ "materials": list, "aliases": aliases }))
}

fn show_text(material: &Material, rows: &[Row]) -> String {
    let mut out = format!(
        "{}: {}\nsource: {}\nmodel: {}, valid {} nm\n\n",
        material.id(),
        material.name(),
        material.source(),
        material.model().kind(),
        range_text(material)
    );
    out += &format!(
        "{:>14}  {:>9}  {:>11}  {:>11}\n",
        "wavelength_nm", "n", "k", "alpha_cm-1"
    );
    for r in rows {
        out += &format!(
            "{:>14}  {:>9.5}  {:>11}  {:>11}\n",
            r.wavelength_nm,
            r.n,
            sci(r.k),
            sci(r.alpha_per_cm)
        );
    }
    out
}

/// Scientific notation with a signed two-digit exponent, e.g. `5.4113e-03`.
fn sci(x: f64) -> String {
    let text = format!("{x:.4e}");
    match text.split_once('e') {
        Some((mantissa, exp)) => {
            let e: i32 = exp.parse().unwrap_or(0);
            let sign = if e < 0 { '-' } else { '+' };
            format!("{mantissa}e{sign}{:02}", e.abs())
        }
        None => text,
    }
}

fn show_json(material: &Material, rows: &[Row]) -> Result<String, Failure> {
    let points: Vec<Value> = rows
        .iter()
        .map(|r| json!({ "wavelength_nm": r.wavelength_nm, "n": r.n, "k": r.k, "alpha_per_cm": r.alpha_per_cm }))
        .collect();
    to_json(&json!({
        "id": material.id(),
        "name": material.name(),
        "source": material.source(),
        "model": material.model().kind(),
        "range_nm": range_json(material),
        "points": points,
    }))
}

fn to_json(value: &Value) -> Result<String, Failure> {
    serde_json::to_string_pretty(value)
        .map(|s| s + "\n")
        .map_err(|e| Failure::Internal(format!("cannot write JSON: {e}")))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wavelength_lists_and_ranges() {
        assert_eq!(
            parse_wavelengths("400,600,800").unwrap(),
            vec![400.0, 600.0, 800.0]
        );
        let r = parse_wavelengths("300:1200:100").unwrap();
        assert_eq!(r.len(), 10);
        assert_eq!(*r.last().unwrap(), 1200.0);
        assert_eq!(parse_wavelengths("0.3:0.5:0.1").unwrap().len(), 3);
        assert!(parse_wavelengths("300:200:10").is_err());
        assert!(parse_wavelengths("300:400:0").is_err());
        assert!(parse_wavelengths("300:400").is_err());
        assert!(parse_wavelengths("abc").is_err());
        assert!(parse_wavelengths("1:1e9:1").is_err());
    }

    #[test]
    fn scientific_format_has_signed_exponent() {
        assert_eq!(sci(5.4113e-3), "5.4113e-03");
        assert_eq!(sci(850.0), "8.5000e+02");
        assert_eq!(sci(0.0), "0.0000e+00");
    }
}
