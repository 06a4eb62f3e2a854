//! Short text and JSON descriptions of a validated scenario (for `lightfold check` and report
//! headers). Formatting only.

use serde_json::{Value, json};

use super::{Element, Features, Mode, RayBudget, Scenario};
use crate::tracer::{CoatingGeometry, InputPolarisation, PolarisationMode};

fn polarisation_text(p: InputPolarisation) -> String {
    match p {
        InputPolarisation::Unpolarised => "unpolarised".into(),
        InputPolarisation::S => "s-polarised".into(),
        InputPolarisation::P => "p-polarised".into(),
        InputPolarisation::Linear(a) => format!("linear at {}° from s", a.to_degrees()),
    }
}

fn rays_text(r: RayBudget, mode: Mode) -> String {
    if mode == Mode::Matrix {
        return format!(
            "{} rays per angle bin and side for each textured interface",
            r.matrix_rays_per_bin()
        );
    }
    match r {
        RayBudget::Fixed(n) => format!("{n} rays per wavelength"),
        RayBudget::Precision {
            target_std_error,
            max_rays,
        } => format!(
            "until standard error ≤ {target_std_error} (at most {max_rays} rays per wavelength)"
        ),
    }
}

fn coating_text(i: &super::InterfaceSpec) -> String {
    if i.coating.is_empty() {
        return "bare".into();
    }
    let films: Vec<String> = i
        .coating
        .iter()
        .map(|f| format!("{} {} nm", f.material.id(), f.thickness_nm))
        .collect();
    let geometry = match i.coating_geometry {
        CoatingGeometry::Conformal => "conformal",
        CoatingGeometry::Directional => "directional",
    };
    format!("{} ({geometry})", films.join(" / "))
}

fn features_text(f: Features) -> &'static str {
    match f {
        Features::Up => "up",
        Features::Down => "down",
    }
}

pub(super) fn text(s: &Scenario) -> String {
    let l = &s.light;
    let g = l.wavelengths.as_slice();
    let (g_lo, g_hi) = l.wavelengths.bounds_nm();
    let mut out = String::new();
    out += &format!("scenario `{}`", s.name);
    if let Some(src) = &s.source {
        out += &format!(" ({})", src.display());
    }
    out.push('\n');
    if !s.description.is_empty() {
        out += &format!("  {}\n", s.description.trim());
    }
    out += &format!(
        "  light:  {}, {} wavelengths {g_lo}–{g_hi} nm, incidence {}° (azimuth {}°), {}; \
         weighting band {}–{} nm\n",
        l.spectrum.get().id(),
        g.len(),
        l.polar_angle_deg,
        l.azimuth_deg,
        polarisation_text(l.polarisation),
        l.weighting_band_nm.0,
        l.weighting_band_nm.1
    );
    out += &format!("  above:  {}\n", s.above.material.id());
    let width = s
        .stack
        .iter()
        .map(|e| match e {
            Element::Interface(i) => i.name.chars().count(),
            Element::Layer(l) => l.name.chars().count(),
        })
        .max()
        .unwrap_or(0);
    let mut layer_index = 0;
    for e in &s.stack {
        match e {
            Element::Interface(i) => {
                let pad = " ".repeat(width + 15);
                let flat = i.texture.z_range_um() == [0.0, 0.0];
                let (orientation, describe) = if flat {
                    (
                        "flat".to_string(),
                        i.texture
                            .describe()
                            .replace(" (features pointing down)", ""),
                    )
                } else {
                    (
                        format!("features {}", features_text(i.features)),
                        i.texture.describe(),
                    )
                };
                out += &format!(
                    "  {:<width$}  interface  {}, {orientation}\n{pad}{describe}\n{pad}coating: {}\n",
                    i.name,
                    i.texture_label,
                    coating_text(i)
                );
            }
            Element::Layer(ly) => {
                let mark = if layer_index == s.absorber {
                    "  ← absorber"
                } else {
                    ""
                };
                out += &format!(
                    "  {:<width$}  layer      {}, {} µm{mark}\n",
                    ly.name,
                    ly.material.id(),
                    ly.thickness_um
                );
                layer_index += 1;
            }
        }
    }
    out += &format!("  below:  {}\n", s.below.material.id());
    let so = &s.solver;
    let mode = match so.mode {
        Mode::Direct => "direct tracing",
        Mode::Matrix => "redistribution matrices",
    };
    let pol = match so.polarisation {
        PolarisationMode::Stokes => "Stokes polarisation",
        PolarisationMode::Unpolarised => "unpolarised approximation",
    };
    let threads = so
        .threads
        .map_or_else(|| "all cores".to_string(), |t| format!("{t} threads"));
    out += &format!(
        "  solver: {mode}, {}, seed {}, {pol}, {threads}; bins: {} polar × {} azimuthal, \
         profile {}\n",
        rays_text(so.rays, so.mode),
        so.seed,
        so.polar_bins,
        so.azimuth_bins,
        so.profile_bins
    );
    out += &format!(
        "  output: plots {}, matrices {}\n",
        if s.output.plots { "yes" } else { "no" },
        if s.output.matrices { "yes" } else { "no" }
    );
    out
}

pub(super) fn json(s: &Scenario) -> Value {
    let l = &s.light;
    let (g_lo, g_hi) = l.wavelengths.bounds_nm();
    let stack: Vec<Value> = s
        .stack
        .iter()
        .map(|e| match e {
            Element::Interface(i) => json!({
                "kind": "interface",
                "name": i.name,
                "texture": i.texture_label,
                "texture_description": i.texture.describe(),
                "features": features_text(i.features),
                "coating": i.coating.iter().map(|f| json!({
                    "material": f.material.id(),
                    "thickness_nm": f.thickness_nm,
                })).collect::<Vec<_>>(),
                "coating_geometry": match i.coating_geometry {
                    CoatingGeometry::Conformal => "conformal",
                    CoatingGeometry::Directional => "directional",
                },
            }),
            Element::Layer(ly) => json!({
                "kind": "layer",
                "name": ly.name,
                "material": ly.material.id(),
                "thickness_um": ly.thickness_um,
            }),
        })
        .collect();
    let rays = match s.solver.rays {
        RayBudget::Fixed(n) => json!({ "rays": n }),
        RayBudget::Precision {
            target_std_error,
            max_rays,
        } => json!({ "target_std_error": target_std_error, "max_rays": max_rays }),
    };
    json!({
        "name": s.name,
        "description": s.description,
        "source": s.source.as_ref().map(|p| p.display().to_string()),
        "light": {
            "spectrum": l.spectrum.get().id(),
            "wavelengths": l.wavelengths.len(),
            "wavelength_range_nm": [g_lo, g_hi],
            "polar_angle_deg": l.polar_angle_deg,
            "azimuth_deg": l.azimuth_deg,
            "polarisation": polarisation_text(l.polarisation),
            "weighting_band_nm": [l.weighting_band_nm.0, l.weighting_band_nm.1],
        },
        "above": s.above.material.id(),
        "stack": stack,
        "below": s.below.material.id(),
        "absorber": s.absorber_layer().name,
        "solver": {
            "mode": match s.solver.mode { Mode::Direct => "direct", Mode::Matrix => "matrix" },
            "budget": rays,
            "seed": s.solver.seed,
            "threads": s.solver.threads,
            "polarisation": match s.solver.polarisation {
                PolarisationMode::Stokes => "stokes",
                PolarisationMode::Unpolarised => "unpolarised",
            },
            "polar_bins": s.solver.polar_bins,
            "azimuth_bins": s.solver.azimuth_bins,
            "profile_bins": s.solver.profile_bins,
        },
        "output": { "matrices": s.output.matrices, "plots": s.output.plots },
    })
}
