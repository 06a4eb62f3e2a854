//! `lightfold film`: the coating calculator. R, T and the absorptance of every layer of a
//! coherent thin-film stack versus wavelength and angle, for s, p and unpolarised light, and
//! the AM1.5G photon-flux-weighted reflectance that ranks anti-reflection coatings.
//!
//! Parses, resolves materials, calls [`lightfold::thinfilm`], prints. All input is checked
//! and every number computed before anything is written, so bad input never leaves a file.

use super::Failure;
use lightfold::optics::Index;
use lightfold::optics::materials::{self, Material};
use lightfold::spectrum::{Spectrum, WavelengthGrid};
use lightfold::thinfilm::{FilmResponse, FilmStack, Layer};
use serde_json::json;
use std::fmt::Write as _;
use std::io::Write as _;
use std::path::{Path, PathBuf};

/// Coating response of a thin-film stack: R, T and absorptance per layer.
///
/// Light comes from the `--above` medium and meets the `--layer`s in the order given.
/// MATERIAL is a library id (`lightfold materials` lists them), a CSV file of
/// `wavelength_nm,n,k` (a path containing `/` or ending in `.csv`), or a constant complex
/// index such as `2.05+0.001i`. An absorbing incidence medium is taken by its real part.
#[derive(clap::Args, Debug)]
#[command(
    after_help = "MATERIAL is a library id or alias (`lightfold materials` lists them), \
a CSV file of wavelength_nm,n,k (a path containing `/` or ending in `.csv`), or a constant \
index n+ki such as `2.05+0.001i`. Light comes from --above and meets the layers in the order \
given. An absorbing incidence medium is taken by its real index.\n\n\
Example: lightfold film --layer sio2:10 --layer 2.0:70 --below si --wavelengths 300:1200:10"
)]
pub struct FilmArgs {
    /// Incidence medium.
    #[arg(long, value_name = "MATERIAL", default_value = "air")]
    pub above: String,
    /// A film, top to bottom, as MATERIAL:THICKNESS_NM (e.g. `sinx:75`). Repeatable.
    #[arg(long = "layer", value_name = "MATERIAL:THICKNESS_NM")]
    pub layers: Vec<String>,
    /// Exit medium (substrate), e.g. `si`.
    #[arg(long, value_name = "MATERIAL")]
    pub below: String,
    /// Wavelengths in nm: `600`, `400,600,800` or `300:1200:10` (start:stop:step).
    #[arg(long, value_name = "NM", default_value = "600")]
    pub wavelengths: String,
    /// Incidence angles in degrees, in [0, 90): `0`, `0,30,60` or `0:80:10`.
    #[arg(long, value_name = "DEG", default_value = "0")]
    pub angles: String,
    /// Polarisation shown in the table: s, p or unpolarised (which also lists R_s and R_p).
    #[arg(long, value_enum, default_value_t = Pol::Unpolarised)]
    pub pol: Pol,
    /// Also write every number (s, p and unpolarised, full precision) to this CSV file.
    #[arg(long, value_name = "FILE")]
    pub csv: Option<PathBuf>,
    /// Print JSON (full precision) instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Band of the AM1.5G photon-flux-weighted reflectance, nm, as LO:HI; reported when the
    /// wavelengths span it.
    #[arg(long, value_name = "LO:HI", default_value = "300:1200")]
    pub band: String,
}

/// Polarisation of the table.
#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum Pol {
    S,
    P,
    #[value(alias = "unpolarized", alias = "u")]
    Unpolarised,
}

/// A resolved medium with the text the user wrote.
pub(super) struct Medium {
    spec: String,
    what: String,
    pub(super) material: Material,
}

/// A film: its medium and thickness.
pub(super) struct Film {
    pub(super) medium: Medium,
    pub(super) thickness_nm: f64,
}

/// One solved (wavelength, angle) point.
struct Point {
    wavelength_nm: f64,
    angle_deg: f64,
    response: FilmResponse,
}

/// AM1.5G-weighted reflectance at one angle.
struct Weighted {
    angle_deg: f64,
    s: f64,
    p: f64,
    unpolarised: f64,
}

pub fn run(args: FilmArgs) -> Result<(), Failure> {
    // Inputs: materials, grids, band.
    let above = resolve("--above", &args.above)?;
    let below = resolve("--below", &args.below)?;
    let films = args
        .layers
        .iter()
        .enumerate()
        .map(|(i, spec)| parse_layer(i + 1, spec))
        .collect::<Result<Vec<Film>, Failure>>()?;
    let grid = WavelengthGrid::parse(&args.wavelengths)
        .map_err(|e| Failure::BadInput(format!("--wavelengths: {e}")))?;
    let angles_deg = parse_angles(&args.angles)?;
    let band_nm = parse_band(&args.band)?;
    if let Some(path) = &args.csv {
        check_output_folder(path)?;
    }

    // Solve every point.
    let mut points = Vec::with_capacity(grid.len() * angles_deg.len());
    let mut above_absorbs = false;
    for &wavelength_nm in grid.as_slice() {
        let stack = stack_at(&above, &films, &below, wavelength_nm)?;
        above_absorbs |= stack.above().im > 0.0;
        for &angle_deg in &angles_deg {
            let response = stack.solve(wavelength_nm, angle_deg.to_radians().cos());
            points.push(Point {
                wavelength_nm,
                angle_deg,
                response,
            });
        }
    }
    let weighted = weighted_reflectance(grid.as_slice(), &angles_deg, &points, band_nm)?;

    // Output.
    if let Some(path) = &args.csv {
        write_atomically(path, &csv_text(&films, &points))?;
    }
    let text = if args.json {
        json_text(
            &args,
            &above,
            &films,
            &below,
            &points,
            band_nm,
            weighted.as_deref(),
        )?
    } else {
        let view = View {
            pol: args.pol,
            above_absorbs,
            band_nm,
            grid: &grid,
        };
        table_text(&view, &above, &films, &below, &points, weighted.as_deref())
    };
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .or_else(|e| {
            if e.kind() == std::io::ErrorKind::BrokenPipe {
                Ok(())
            } else {
                Err(e)
            }
        })
        .map_err(|e| Failure::Internal(format!("cannot write to standard output: {e}")))
}

fn resolve(option: &str, spec: &str) -> Result<Medium, Failure> {
    let material = materials::resolve(spec)
        .map_err(|e| Failure::BadInput(format!("{option} `{spec}`: {e}")))?;
    Ok(Medium {
        spec: spec.to_owned(),
        what: format!("{option} `{spec}`"),
        material,
    })
}

/// `MATERIAL:THICKNESS_NM`, split at the last colon (a Windows path keeps its drive colon).
pub(super) fn parse_layer(position: usize, spec: &str) -> Result<Film, Failure> {
    let what = format!("--layer {position} (`{spec}`)");
    let Some((material, thickness)) = spec.rsplit_once(':') else {
        return Err(Failure::BadInput(format!(
            "{what}: no thickness\n  expected: MATERIAL:THICKNESS_NM, e.g. `sinx:75` or \
             `2.05+0.001i:75`\n  fix: add the film thickness in nm after a colon"
        )));
    };
    let thickness_nm: f64 = thickness.trim().parse().map_err(|_| {
        Failure::BadInput(format!(
            "{what}: thickness `{thickness}` is not a number\n  expected: MATERIAL:THICKNESS_NM \
             with the thickness in nm, e.g. `sinx:75`\n  fix: write the thickness as a plain \
             number of nm, without unit"
        ))
    })?;
    if !(thickness_nm.is_finite() && thickness_nm > 0.0) {
        return Err(Failure::BadInput(format!(
            "{what}: thickness {thickness_nm} nm is not usable\n  expected: a finite thickness \
             > 0 nm\n  fix: give a positive thickness in nm, or leave the layer out"
        )));
    }
    let material =
        materials::resolve(material).map_err(|e| Failure::BadInput(format!("{what}: {e}")))?;
    Ok(Film {
        medium: Medium {
            spec: material_spec(spec),
            what,
            material,
        },
        thickness_nm,
    })
}

fn material_spec(layer_spec: &str) -> String {
    layer_spec
        .rsplit_once(':')
        .map_or(layer_spec, |(m, _)| m)
        .to_owned()
}

/// Angles in degrees: `0`, `0,30,60` or `start:stop:step`; each in [0, 90).
pub(super) fn parse_angles(text: &str) -> Result<Vec<f64>, Failure> {
    let expected = "`0`, a comma list such as `0,30,60`, or start:stop:step such as `0:80:10`, \
                    in degrees within [0, 90)";
    let fail = |problem: String, fix: &str| {
        Failure::BadInput(format!(
            "--angles `{text}`: {problem}\n  expected: {expected}\n  fix: {fix}"
        ))
    };
    let number = |field: &str| -> Result<f64, Failure> {
        let v: f64 = field.trim().parse().map_err(|_| {
            fail(
                format!("`{}` is not a number", field.trim()),
                "write plain degrees",
            )
        })?;
        if !(v.is_finite() && (0.0..90.0).contains(&v)) {
            return Err(fail(
                format!("angle {v}° is outside [0, 90)"),
                "give incidence angles from the normal, at least 0° and below 90°",
            ));
        }
        Ok(v)
    };
    let values = if text.contains(':') {
        let parts: Vec<&str> = text.split(':').collect();
        if parts.len() != 3 {
            return Err(fail(
                format!("{} colon-separated fields", parts.len()),
                "give start:stop:step",
            ));
        }
        let (start, stop) = (number(parts[0])?, number(parts[1])?);
        let step: f64 = parts[2].trim().parse().map_err(|_| {
            fail(
                format!("step `{}` is not a number", parts[2].trim()),
                "write the step in degrees",
            )
        })?;
        if !(step.is_finite() && step > 0.0) || stop < start {
            return Err(fail(
                format!("no angles from {start}° to {stop}° in steps of {step}°"),
                "use start ≤ stop and a positive step",
            ));
        }
        let n = ((stop - start) / step + 1e-9).floor() as usize;
        if n > 100_000 {
            return Err(fail(format!("{} angles", n + 1), "use a larger step"));
        }
        (0..=n)
            .map(|i| (start + i as f64 * step).min(stop))
            .collect()
    } else {
        text.split(',')
            .map(number)
            .collect::<Result<Vec<f64>, Failure>>()?
    };
    Ok(values)
}

fn parse_band(text: &str) -> Result<(f64, f64), Failure> {
    let fail = || {
        Failure::BadInput(format!(
            "--band `{text}`: not a band\n  expected: LO:HI in nm with 0 < LO < HI, e.g. \
             `300:1200`\n  fix: give the lower and upper wavelength separated by a colon"
        ))
    };
    let (lo, hi) = text.split_once(':').ok_or_else(fail)?;
    let lo: f64 = lo.trim().parse().map_err(|_| fail())?;
    let hi: f64 = hi.trim().parse().map_err(|_| fail())?;
    if !(lo.is_finite() && hi.is_finite() && lo > 0.0 && lo < hi) {
        return Err(fail());
    }
    Ok((lo, hi))
}

/// A --csv target must sit in an existing folder; checked before any work is done.
pub(super) fn check_output_folder(path: &Path) -> Result<(), Failure> {
    let folder = parent_folder(path);
    if !folder.is_dir() {
        return Err(Failure::BadInput(format!(
            "--csv {}: folder {} does not exist\n  fix: create the folder first or write the \
             file elsewhere",
            path.display(),
            folder.display()
        )));
    }
    if path.is_dir() {
        return Err(Failure::BadInput(format!(
            "--csv {}: is a folder\n  fix: give a file name, e.g. {}/film.csv",
            path.display(),
            path.display()
        )));
    }
    Ok(())
}

fn parent_folder(path: &Path) -> PathBuf {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// The stack at one wavelength, with every index taken from its material.
fn stack_at(
    above: &Medium,
    films: &[Film],
    below: &Medium,
    wavelength_nm: f64,
) -> Result<FilmStack, Failure> {
    let index = |m: &Medium| -> Result<Index, Failure> {
        m.material
            .index_at(wavelength_nm)
            .map_err(|e| Failure::BadInput(format!("{}: {e}", m.what)))
    };
    let above_index = index(above)?;
    let layers = films
        .iter()
        .map(|f| Ok(Layer::new(index(&f.medium)?, f.thickness_nm)))
        .collect::<Result<Vec<Layer>, Failure>>()?;
    FilmStack::new(above_index, layers, index(below)?)
        .map_err(|e| Failure::BadInput(format!("at {wavelength_nm} nm: {e}")))
}

/// AM1.5G photon-flux-weighted reflectance per angle, when the wavelengths span the band.
fn weighted_reflectance(
    grid_nm: &[f64],
    angles_deg: &[f64],
    points: &[Point],
    band_nm: (f64, f64),
) -> Result<Option<Vec<Weighted>>, Failure> {
    let spans =
        grid_nm.len() >= 2 && grid_nm[0] <= band_nm.0 && grid_nm[grid_nm.len() - 1] >= band_nm.1;
    if !spans {
        return Ok(None);
    }
    let am15g = Spectrum::am15g();
    let n_angles = angles_deg.len();
    let mut out = Vec::with_capacity(n_angles);
    for (a, &angle_deg) in angles_deg.iter().enumerate() {
        // points are wavelength-major: index = wavelength × n_angles + angle
        let series = |f: &dyn Fn(&FilmResponse) -> f64| -> Vec<f64> {
            points
                .iter()
                .skip(a)
                .step_by(n_angles)
                .map(|p| f(&p.response))
                .collect()
        };
        let mean = |values: Vec<f64>| {
            am15g
                .photon_weighted_mean(grid_nm, &values, band_nm)
                .map_err(|e| Failure::BadInput(format!("--band: {e}")))
        };
        out.push(Weighted {
            angle_deg,
            s: mean(series(&|r| r.s.reflectance))?,
            p: mean(series(&|r| r.p.reflectance))?,
            unpolarised: mean(series(&|r| r.reflectance_unpolarised()))?,
        });
    }
    Ok(Some(out))
}

fn describe(m: &Medium) -> String {
    if m.material.id() == m.spec {
        m.spec.clone()
    } else {
        format!("{} ({})", m.spec, m.material.id())
    }
}

fn stack_line(above: &Medium, films: &[Film], below: &Medium) -> String {
    let mut s = describe(above);
    for f in films {
        let _ = write!(s, " | {} {} nm", describe(&f.medium), f.thickness_nm);
    }
    let _ = write!(s, " | {}", describe(below));
    s
}

/// What the table shows besides the points.
struct View<'a> {
    pol: Pol,
    above_absorbs: bool,
    band_nm: (f64, f64),
    grid: &'a WavelengthGrid,
}

fn table_text(
    view: &View,
    above: &Medium,
    films: &[Film],
    below: &Medium,
    points: &[Point],
    weighted: Option<&[Weighted]>,
) -> String {
    let View {
        pol,
        above_absorbs,
        band_nm,
        grid,
    } = *view;
    let mut out = String::new();
    let _ = writeln!(
        out,
        "stack (light from the top): {}",
        stack_line(above, films, below)
    );
    let pol_name = match pol {
        Pol::S => "s",
        Pol::P => "p",
        Pol::Unpolarised => "unpolarised",
    };
    let _ = writeln!(
        out,
        "polarisation: {pol_name}; T = power into the exit medium (absorbed there if it is a \
         metal); A1… = absorptance of each film, top to bottom"
    );
    if above_absorbs {
        let _ = writeln!(
            out,
            "note: the incidence medium absorbs; its real index is used at the interface (its \
             bulk absorption belongs to the path through it)"
        );
    }

    // Header and rows.
    let mut header = vec![
        "λ (nm)".to_owned(),
        "angle (°)".to_owned(),
        "R".to_owned(),
        "T".to_owned(),
    ];
    for (i, f) in films.iter().enumerate() {
        header.push(format!("A{} {}", i + 1, f.medium.spec));
    }
    if pol == Pol::Unpolarised {
        header.push("R_s".to_owned());
        header.push("R_p".to_owned());
    }
    let rows: Vec<Vec<String>> = points
        .iter()
        .map(|pt| {
            let r = &pt.response;
            let (refl, trans, absorb): (f64, f64, Vec<f64>) = match pol {
                Pol::S => (r.s.reflectance, r.s.transmittance, r.s.absorptance.clone()),
                Pol::P => (r.p.reflectance, r.p.transmittance, r.p.absorptance.clone()),
                Pol::Unpolarised => (
                    r.reflectance_unpolarised(),
                    r.transmittance_unpolarised(),
                    (0..films.len())
                        .map(|l| r.absorptance_unpolarised(l))
                        .collect(),
                ),
            };
            let mut row = vec![
                format!("{:.1}", pt.wavelength_nm),
                format!("{:.1}", pt.angle_deg),
                fixed6(refl),
                fixed6(trans),
            ];
            row.extend(absorb.iter().map(|&a| fixed6(a)));
            if pol == Pol::Unpolarised {
                row.push(fixed6(r.s.reflectance));
                row.push(fixed6(r.p.reflectance));
            }
            row
        })
        .collect();
    let widths: Vec<usize> = (0..header.len())
        .map(|c| {
            rows.iter()
                .map(|r| r[c].chars().count())
                .chain([header[c].chars().count()])
                .max()
                .unwrap_or(0)
        })
        .collect();
    let line = |cells: &[String]| {
        let padded: Vec<String> = cells
            .iter()
            .zip(&widths)
            .map(|(c, w)| format!("{}{c}", " ".repeat(w - c.chars().count())))
            .collect();
        padded.join("  ")
    };
    let _ = writeln!(out, "{}", line(&header));
    for row in &rows {
        let _ = writeln!(out, "{}", line(row));
    }

    // Ranking figure.
    match weighted {
        Some(ws) => {
            for w in ws {
                let value = match pol {
                    Pol::S => w.s,
                    Pol::P => w.p,
                    Pol::Unpolarised => w.unpolarised,
                };
                let _ = writeln!(
                    out,
                    "AM1.5G photon-weighted R ({}–{} nm, {pol_name}) at {}°: {value:.6}",
                    band_nm.0, band_nm.1, w.angle_deg
                );
            }
        }
        None if grid.len() >= 2 => {
            let (lo, hi) = grid.bounds_nm();
            let _ = writeln!(
                out,
                "(no AM1.5G-weighted R: the wavelengths {lo}–{hi} nm do not span the band \
                 {}–{} nm; see --band)",
                band_nm.0, band_nm.1
            );
        }
        None => {}
    }
    out
}

/// Six decimals; round-off residues (|v| < 5e-7, e.g. −1e-17 in a lossless film) print as 0.
fn fixed6(v: f64) -> String {
    let v = if v.abs() < 5e-7 { 0.0 } else { v };
    format!("{v:.6}")
}

fn csv_text(films: &[Film], points: &[Point]) -> String {
    let mut out = String::new();
    let mut header = vec![
        "wavelength_nm",
        "angle_deg",
        "R_s",
        "R_p",
        "R",
        "T_s",
        "T_p",
        "T",
    ]
    .into_iter()
    .map(str::to_owned)
    .collect::<Vec<_>>();
    for i in 1..=films.len() {
        header.extend([format!("A{i}_s"), format!("A{i}_p"), format!("A{i}")]);
    }
    for name in ["r_s", "r_p", "t_s", "t_p"] {
        header.extend([format!("{name}_re"), format!("{name}_im")]);
    }
    let _ = writeln!(out, "{}", header.join(","));
    for pt in points {
        let r = &pt.response;
        let mut v = vec![
            pt.wavelength_nm,
            pt.angle_deg,
            r.s.reflectance,
            r.p.reflectance,
            r.reflectance_unpolarised(),
            r.s.transmittance,
            r.p.transmittance,
            r.transmittance_unpolarised(),
        ];
        for l in 0..films.len() {
            v.extend([
                r.s.absorptance[l],
                r.p.absorptance[l],
                r.absorptance_unpolarised(l),
            ]);
        }
        for z in [r.s.r, r.p.r, r.s.t, r.p.t] {
            v.extend([z.re, z.im]);
        }
        // `{}` prints the shortest text that reads back to the same f64: full precision.
        let cells: Vec<String> = v.iter().map(|x| format!("{x}")).collect();
        let _ = writeln!(out, "{}", cells.join(","));
    }
    out
}

fn json_text(
    args: &FilmArgs,
    above: &Medium,
    films: &[Film],
    below: &Medium,
    points: &[Point],
    band_nm: (f64, f64),
    weighted: Option<&[Weighted]>,
) -> Result<String, Failure> {
    let medium = |m: &Medium| json!({ "spec": m.spec, "id": m.material.id() });
    let amplitudes = |a: &lightfold::thinfilm::Amplitudes| {
        json!({
            "R": a.reflectance, "T": a.transmittance, "A": a.absorptance,
            "r": [a.r.re, a.r.im], "t": [a.t.re, a.t.im],
        })
    };
    let results: Vec<_> = points
        .iter()
        .map(|pt| {
            let r = &pt.response;
            json!({
                "wavelength_nm": pt.wavelength_nm,
                "angle_deg": pt.angle_deg,
                "s": amplitudes(&r.s),
                "p": amplitudes(&r.p),
                "unpolarised": {
                    "R": r.reflectance_unpolarised(),
                    "T": r.transmittance_unpolarised(),
                    "A": (0..films.len()).map(|l| r.absorptance_unpolarised(l)).collect::<Vec<_>>(),
                },
            })
        })
        .collect();
    let weighted = weighted.map(|ws| {
        json!({
            "spectrum": "AM1.5G, ASTM G173-03",
            "band_nm": [band_nm.0, band_nm.1],
            "by_angle": ws.iter().map(|w| json!({
                "angle_deg": w.angle_deg, "s": w.s, "p": w.p, "unpolarised": w.unpolarised,
            })).collect::<Vec<_>>(),
        })
    });
    let doc = json!({
        "stack": {
            "above": medium(above),
            "layers": films.iter().map(|f| json!({
                "spec": f.medium.spec, "id": f.medium.material.id(), "thickness_nm": f.thickness_nm,
            })).collect::<Vec<_>>(),
            "below": medium(below),
            "light_from": "above",
        },
        "wavelengths_given": args.wavelengths,
        "angles_given_deg": args.angles,
        "results": results,
        "weighted_reflectance": weighted,
    });
    let mut text = serde_json::to_string_pretty(&doc)
        .map_err(|e| Failure::Internal(format!("cannot serialise the results: {e}")))?;
    text.push('\n');
    Ok(text)
}

/// Write `text` to a temporary file in the target's folder, then rename it over the target:
/// a failure never leaves half a file or clobbers an old one.
pub(super) fn write_atomically(path: &Path, text: &str) -> Result<(), Failure> {
    lightfold::report::write_atomic(path, text.as_bytes())
        .map_err(|e| Failure::Internal(format!("cannot write {}: {e}", path.display())))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn angles_parse_lists_and_ranges() {
        assert_eq!(parse_angles("0").unwrap(), vec![0.0]);
        assert_eq!(parse_angles("0, 30,60").unwrap(), vec![0.0, 30.0, 60.0]);
        assert_eq!(
            parse_angles("0:80:20").unwrap(),
            vec![0.0, 20.0, 40.0, 60.0, 80.0]
        );
        assert!(parse_angles("90").is_err());
        assert!(parse_angles("-1").is_err());
        assert!(parse_angles("0:80:0").is_err());
        assert!(parse_angles("abc").is_err());
    }

    #[test]
    fn band_parses() {
        assert_eq!(parse_band("300:1200").unwrap(), (300.0, 1200.0));
        assert!(parse_band("1200:300").is_err());
        assert!(parse_band("300").is_err());
    }
}
