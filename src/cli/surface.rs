//! `lightfold surface`: trace one textured, coated interface between two half-spaces and
//! report reflectance, transmittance, film absorptance and how obliquely light is sent into
//! the lower medium, each with its Monte Carlo standard error.

use super::Failure;
use crate::cli::progress::Bar;
use lightfold::optics::Index;
use lightfold::optics::materials::{self, Material};
use lightfold::texture::{self, Texture};
use lightfold::thinfilm::{FilmStack, Layer};
use lightfold::tracer::{
    BareInterface, CoatedInterface, CoatingGeometry, FacetResponse, Incidence, InputPolarisation,
    PolarisationMode, Surface, Tally,
};
use serde::Serialize;
use std::path::{Path, PathBuf};

#[derive(clap::Args)]
pub struct SurfaceArgs {
    /// Texture: a file (e.g. geometries/random-pyramids-3um.toml), a name from the
    /// project's geometries/ folder (random-pyramids-3um), or an inline kind with keys,
    /// e.g. `regular-pyramids,base_um=10,inverted=true` or `planar`.
    #[arg(long)]
    texture: String,
    /// Medium above the surface (library id, CSV path or literal index); its real part is used.
    #[arg(long, default_value = "air")]
    above: String,
    /// Medium below the surface; its full complex index enters the film response (a metal
    /// absorbs what crosses into it), directions use the real part.
    #[arg(long, default_value = "si")]
    below: String,
    /// Coating layer MATERIAL:THICKNESS_NM on every facet, repeatable, top to bottom.
    #[arg(long = "layer", value_name = "MATERIAL:THICKNESS_NM")]
    layers: Vec<String>,
    /// Film thickness over the texture: conformal (as given, along each facet normal) or
    /// directional (given thickness × cos of the facet tilt).
    #[arg(long, default_value = "conformal")]
    coating: String,
    /// Wavelengths in nm: "600", "400,600,800" or "300:1200:100" (start:stop:step).
    #[arg(long, default_value = "600")]
    wavelengths: String,
    /// Polar incidence angles in degrees from the surface normal, same syntax (0 ≤ θ < 90).
    #[arg(long, default_value = "0")]
    angles: String,
    /// Azimuth of incidence in degrees.
    #[arg(long, default_value_t = 0.0)]
    azimuth: f64,
    /// Where light comes from: above, below (along --angles, from inside) or
    /// below-isotropic (isotropic radiance inside the lower medium).
    #[arg(long, default_value = "above")]
    from: String,
    /// Input polarisation: unpolarised, s, p or linear:DEG (from s towards p).
    #[arg(long, default_value = "unpolarised")]
    pol: String,
    /// Rays per wavelength and angle.
    #[arg(long, default_value_t = 100_000)]
    rays: u64,
    /// Trace until the standard error of R and T is at most this (overrides --rays; capped by --max-rays).
    #[arg(long)]
    target_se: Option<f64>,
    /// Most rays per point when --target-se is given.
    #[arg(long, default_value_t = 10_000_000)]
    max_rays: u64,
    /// Master seed; results are bit-identical for a seed whatever the thread count.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Mean of s and p at each facet instead of Stokes-vector tracking.
    #[arg(long)]
    unpolarised: bool,
    /// Write every number at full precision to this CSV file.
    #[arg(long)]
    csv: Option<PathBuf>,
    /// Print JSON on stdout instead of the table.
    #[arg(long)]
    json: bool,
    /// No progress bar.
    #[arg(long)]
    quiet: bool,
}

#[derive(Serialize)]
struct Row {
    wavelength_nm: f64,
    angle_deg: f64,
    rays: u64,
    reflectance: f64,
    reflectance_se: f64,
    transmittance: f64,
    transmittance_se: f64,
    film_absorptance: Vec<f64>,
    film_absorptance_se: Vec<f64>,
    /// ⟨1/cos θ⟩ of the transmitted light (how obliquely it enters the lower medium).
    transmitted_path_factor: f64,
    mean_facet_hits: f64,
    hits_histogram: Vec<u64>,
    reflected_polar_10deg: Vec<f64>,
    transmitted_polar_10deg: Vec<f64>,
    lost_rays: u64,
    event_limited_rays: u64,
    energy_error: f64,
}

pub fn run(args: SurfaceArgs) -> Result<(), Failure> {
    let texture = load_texture(&args.texture)?;
    let above = material("--above", &args.above)?;
    let below = material("--below", &args.below)?;
    let films = args
        .layers
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let f = super::film::parse_layer(i + 1, s)?;
            Ok((f.medium.material, f.thickness_nm))
        })
        .collect::<Result<Vec<(Material, f64)>, Failure>>()?;
    if films.len() > lightfold::tracer::MAX_FILM_LAYERS {
        return Err(Failure::BadInput(format!(
            "{} coating layers given; at most {} are supported",
            films.len(),
            lightfold::tracer::MAX_FILM_LAYERS
        )));
    }
    let geometry = match args.coating.as_str() {
        "conformal" => CoatingGeometry::Conformal,
        "directional" => CoatingGeometry::Directional,
        other => {
            return Err(Failure::BadInput(format!(
                "--coating {other}: expected `conformal` or `directional`"
            )));
        }
    };
    let wavelengths = lightfold::spectrum::WavelengthGrid::parse(&args.wavelengths)
        .map_err(|e| Failure::BadInput(format!("--wavelengths: {e}")))?;
    let angles = super::film::parse_angles(&args.angles)?;
    let polarisation = parse_pol(&args.pol)?;
    let mode = if args.unpolarised {
        PolarisationMode::Unpolarised
    } else {
        PolarisationMode::Stokes
    };
    if args.rays == 0 {
        return Err(Failure::BadInput("--rays 0: trace at least one ray".into()));
    }
    if let Some(t) = args.target_se
        && !(t > 0.0 && t < 1.0)
    {
        return Err(Failure::BadInput(format!(
            "--target-se {t}: expected a number in (0, 1)"
        )));
    }
    let from = args.from.as_str();
    if !matches!(from, "above" | "below" | "below-isotropic") {
        return Err(Failure::BadInput(format!(
            "--from {from}: expected `above`, `below` or `below-isotropic`"
        )));
    }
    let angles = if from == "below-isotropic" {
        vec![0.0]
    } else {
        angles
    };
    if let Some(path) = &args.csv {
        super::film::check_output_folder(path)?;
    }

    let points = wavelengths.len() * angles.len();
    let bar = Bar::new(points as u64, "tracing", args.quiet || args.json);
    let mut rows = Vec::with_capacity(points);
    let tilt_levels = match geometry {
        CoatingGeometry::Conformal => vec![1.0],
        CoatingGeometry::Directional => texture::coating_tilt_levels(&texture.facet_tilts_deg()),
    };
    for (wi, &wl) in wavelengths.as_slice().iter().enumerate() {
        let n_above = index(&above, wl)?;
        let n_below = index(&below, wl)?;
        let layers = films
            .iter()
            .map(|(m, t)| Ok(Layer::new(index(m, wl)?, *t)))
            .collect::<Result<Vec<_>, Failure>>()?;
        let stack = FilmStack::new(Index::new(n_above.re, 0.0), layers, n_below)
            .map_err(|e| Failure::BadInput(e.to_string()))?;
        let response: Box<dyn FacetResponse> = if stack.n_layers() == 0 && n_below.im == 0.0 {
            Box::new(BareInterface {
                n_above: n_above.re,
                n_below: n_below.re,
            })
        } else {
            Box::new(
                CoatedInterface::new(&stack, wl, geometry, &tilt_levels)
                    .map_err(|e| Failure::BadInput(e.to_string()))?,
            )
        };
        let surface = Surface {
            texture: &*texture,
            response: &*response,
            n_above: n_above.re,
            n_below: n_below.re,
            polarisation: mode,
        };
        for (ai, &angle) in angles.iter().enumerate() {
            let theta = angle.to_radians();
            let phi = args.azimuth.to_radians();
            let incidence = match from {
                "above" => Incidence::Above {
                    theta,
                    phi,
                    polarisation,
                },
                "below" => Incidence::BelowDirection {
                    direction: lightfold::geometry::Vec3::new(
                        theta.sin() * phi.cos(),
                        theta.sin() * phi.sin(),
                        theta.cos(),
                    ),
                },
                _ => Incidence::BelowIsotropic,
            };
            let key = lightfold::sampling::job_key(wi as u32, ai as u32);
            let (tally, ()) = match args.target_se {
                Some(t) => surface.trace_to_precision(&incidence, t, args.max_rays, args.seed, key),
                None => surface.trace(&incidence, args.rays, args.seed, key),
            };
            if tally.lost_rays > 0 {
                eprintln!(
                    "warning: {} rays lost to numerics at {wl} nm, {angle}° (seed {}, key {key}); \
                     please report with this command line",
                    tally.lost_rays, args.seed
                );
            }
            rows.push(row(wl, angle, stack.n_layers(), &tally));
            bar.inc();
        }
    }
    bar.finish();

    if let Some(path) = &args.csv {
        super::film::write_atomically(path, &csv_text(&rows, films.len()))?;
    }
    if args.json {
        let doc = serde_json::json!({
            "texture": texture.describe(),
            "above": above.id(), "below": below.id(),
            "coating": films.iter().map(|(m, t)| serde_json::json!({"material": m.id(), "thickness_nm": t})).collect::<Vec<_>>(),
            "coating_geometry": args.coating,
            "polarisation_tracking": if args.unpolarised { "unpolarised" } else { "stokes" },
            "from": from,
            "seed": args.seed,
            "points": rows,
        });
        println!(
            "{}",
            serde_json::to_string_pretty(&doc).map_err(|e| Failure::Internal(e.to_string()))?
        );
    } else {
        print!(
            "{}",
            table_text(&*texture, &above, &below, &films, &rows, mode)
        );
    }
    Ok(())
}

fn material(option: &str, spec: &str) -> Result<Material, Failure> {
    materials::resolve(spec).map_err(|e| Failure::BadInput(format!("{option} {spec}: {e}")))
}

fn index(m: &Material, wl: f64) -> Result<Index, Failure> {
    m.index_at(wl).map_err(|e| Failure::BadInput(e.to_string()))
}

fn parse_pol(text: &str) -> Result<InputPolarisation, Failure> {
    match text {
        "unpolarised" | "unpolarized" => Ok(InputPolarisation::Unpolarised),
        "s" => Ok(InputPolarisation::S),
        "p" => Ok(InputPolarisation::P),
        t if t.starts_with("linear:") => t[7..]
            .parse::<f64>()
            .ok()
            .filter(|a| a.is_finite())
            .map(|a| InputPolarisation::Linear(a.to_radians()))
            .ok_or_else(|| {
                Failure::BadInput(format!("--pol {t}: expected linear:DEG, e.g. linear:45"))
            }),
        t => Err(Failure::BadInput(format!(
            "--pol {t}: expected unpolarised, s, p or linear:DEG"
        ))),
    }
}

/// A texture from a file, from the project's geometries/ folder by name, or inline.
pub fn load_texture(spec: &str) -> Result<Box<dyn Texture>, Failure> {
    let bad = |e: texture::TextureError| Failure::BadInput(e.to_string());
    let path = Path::new(spec);
    if path.is_file() {
        return texture::from_file(path).map_err(bad);
    }
    if !spec.contains(',') && !spec.contains('=') {
        // The same search as scenario files use: ./geometries, the project's, then built-ins.
        match lightfold::scenario::find_geometry(spec, Some(Path::new("."))) {
            Ok(lightfold::scenario::GeometrySource::File(path)) => {
                return texture::from_file(&path).map_err(bad);
            }
            Ok(lightfold::scenario::GeometrySource::Embedded(name, text)) => {
                return texture::from_toml_str(text, Path::new(name)).map_err(bad);
            }
            Err(_) => {}
        }
        if spec.ends_with(".toml") || spec.contains('/') {
            return Err(Failure::BadInput(format!(
                "--texture {spec}: no such file\n  expected: a texture file, a name from geometries/, or KIND[,key=value…]\n  fix: check the path"
            )));
        }
    }
    // Inline: KIND[,key=value...] → TOML text.
    let mut parts = spec.split(',');
    let kind = parts.next().unwrap_or("").trim();
    let mut text = format!("kind = \"{kind}\"\n");
    for kv in parts {
        let Some((k, v)) = kv.split_once('=') else {
            return Err(Failure::BadInput(format!(
                "--texture {spec}: `{kv}` is not key=value\n  expected: KIND,key=value,… e.g. regular-pyramids,base_um=10"
            )));
        };
        let v = v.trim();
        let value = if v.parse::<f64>().is_ok() || v == "true" || v == "false" {
            v.to_string()
        } else {
            format!("\"{}\"", v.replace('"', ""))
        };
        text.push_str(&format!("{} = {value}\n", k.trim()));
    }
    texture::from_toml_str(&text, Path::new("--texture")).map_err(bad)
}

fn row(wl: f64, angle: f64, n_layers: usize, t: &Tally) -> Row {
    Row {
        wavelength_nm: wl,
        angle_deg: angle,
        rays: t.rays,
        reflectance: t.reflectance().value,
        reflectance_se: t.reflectance().std_error,
        transmittance: t.transmittance().value,
        transmittance_se: t.transmittance().std_error,
        film_absorptance: (0..n_layers).map(|j| t.film_absorptance(j).value).collect(),
        film_absorptance_se: (0..n_layers)
            .map(|j| t.film_absorptance(j).std_error)
            .collect(),
        transmitted_path_factor: t.transmitted_path_factor(),
        mean_facet_hits: t.mean_hits(),
        hits_histogram: t.hits.to_vec(),
        reflected_polar_10deg: normalised(&t.reflected_polar, t.rays),
        transmitted_polar_10deg: normalised(&t.transmitted_polar, t.rays),
        lost_rays: t.lost_rays,
        event_limited_rays: t.event_limited_rays,
        energy_error: t.energy_error(),
    }
}

fn normalised(h: &[f64], rays: u64) -> Vec<f64> {
    h.iter().map(|x| x / rays.max(1) as f64).collect()
}

fn table_text(
    texture: &dyn Texture,
    above: &Material,
    below: &Material,
    films: &[(Material, f64)],
    rows: &[Row],
    mode: PolarisationMode,
) -> String {
    let mut out = String::new();
    let coating = if films.is_empty() {
        "bare".to_string()
    } else {
        films
            .iter()
            .map(|(m, t)| format!("{} {t} nm", m.id()))
            .collect::<Vec<_>>()
            .join(" / ")
    };
    out.push_str(&format!(
        "surface: {}\n  {} above | {} | {} below; {} tracking\n",
        texture.describe(),
        above.id(),
        coating,
        below.id(),
        if mode == PolarisationMode::Stokes {
            "Stokes"
        } else {
            "unpolarised"
        }
    ));
    let mut header = format!(
        "{:>8} {:>6} {:>9} {:>17} {:>17}",
        "λ (nm)", "θ (°)", "rays", "R ± σ", "T ± σ"
    );
    for j in 0..films.len() {
        header.push_str(&format!(" {:>17}", format!("A film{} ± σ", j + 1)));
    }
    header.push_str(&format!(" {:>10} {:>6}", "⟨1/cosθ⟩T", "hits"));
    out.push_str(&header);
    out.push('\n');
    for r in rows {
        let mut line = format!(
            "{:>8.1} {:>6.1} {:>9} {:>9.5} ± {:.5} {:>9.5} ± {:.5}",
            r.wavelength_nm,
            r.angle_deg,
            r.rays,
            lightfold::report::shown(r.reflectance, 5),
            r.reflectance_se,
            lightfold::report::shown(r.transmittance, 5),
            r.transmittance_se
        );
        for j in 0..films.len() {
            line.push_str(&format!(
                " {:>9.5} ± {:.5}",
                lightfold::report::shown(r.film_absorptance[j], 5),
                r.film_absorptance_se[j]
            ));
        }
        line.push_str(&format!(
            " {:>10.4} {:>6.2}",
            r.transmitted_path_factor, r.mean_facet_hits
        ));
        out.push_str(&line);
        out.push('\n');
    }
    let lost: u64 = rows
        .iter()
        .map(|r| r.lost_rays + r.event_limited_rays)
        .sum();
    if lost > 0 {
        out.push_str(&format!(
            "note: {lost} rays were given up (numerics or event limit)\n"
        ));
    }
    out.push_str("Monte Carlo estimates with standard errors; engineering estimates, not certified measurements.\n");
    out
}

fn csv_text(rows: &[Row], n_films: usize) -> String {
    let mut out =
        String::from("# lightfold surface: fractions of incident power; *_se = standard error\n");
    out.push_str(
        "wavelength_nm,angle_deg,rays,reflectance,reflectance_se,transmittance,transmittance_se",
    );
    for j in 0..n_films {
        out.push_str(&format!(
            ",film{0}_absorptance,film{0}_absorptance_se",
            j + 1
        ));
    }
    out.push_str(",transmitted_path_factor,mean_facet_hits,lost_rays,event_limited_rays\n");
    for r in rows {
        out.push_str(&format!(
            "{:?},{:?},{},{:?},{:?},{:?},{:?}",
            r.wavelength_nm,
            r.angle_deg,
            r.rays,
            r.reflectance,
            r.reflectance_se,
            r.transmittance,
            r.transmittance_se
        ));
        for j in 0..n_films {
            out.push_str(&format!(
                ",{:?},{:?}",
                r.film_absorptance[j], r.film_absorptance_se[j]
            ));
        }
        out.push_str(&format!(
            ",{:?},{:?},{},{}\n",
            r.transmitted_path_factor, r.mean_facet_hits, r.lost_rays, r.event_limited_rays
        ));
    }
    out
}
