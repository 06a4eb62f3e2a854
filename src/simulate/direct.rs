//! Direct mode: every wavelength traced ray by ray through the whole stack
//! (`tracer::WaferModel`).

use super::result::{RunResult, WavelengthResult};
use super::{Progress, RunError};
use crate::optics::Index;
use crate::scenario::{RayBudget, Scenario};
use crate::thinfilm::{FilmStack, Layer};
use crate::tracer::{
    BareInterface, CoatedInterface, FacetResponse, Incidence, Surface, ThickLayer, WaferModel,
};
use rayon::prelude::*;

/// Assumptions of the direct mode, stated in every output.
pub fn assumptions() -> Vec<String> {
    vec![
        "thick layers are incoherent; thin films are coherent (transfer-matrix method)".into(),
        "lateral position is re-randomised when a ray crosses a thick layer: valid when the \
         layer is much thicker than the texture periods"
            .into(),
        "layer thickness is measured between the base planes of the interfaces above and \
         below; texture volume protruding into a layer belongs to it and absorbs"
            .into(),
        "interface responses seen from inside a thick layer use the real part of its index; \
         its absorption (α = 4πk/λ) is taken along the path"
            .into(),
        "no free-carrier or parasitic absorption beyond the materials' tabulated k".into(),
    ]
}

/// The per-wavelength optical inputs: real indices and α of thick media, interface stacks.
pub(super) struct Optics {
    pub(super) n_media: Vec<f64>,
    pub(super) layers: Vec<ThickLayer>,
    pub(super) stacks: Vec<FilmStack>,
    pub(super) absorber_index: Index,
    /// Complex indices of the thick layers, top to bottom.
    pub(super) layer_indices: Vec<Index>,
}

pub(super) fn optics_at(scenario: &Scenario, wavelength_nm: f64) -> Result<Optics, RunError> {
    let at = |m: &crate::optics::materials::Material| {
        m.index_at(wavelength_nm)
            .map_err(|e| RunError::Input(e.to_string()))
    };
    let top = at(&scenario.above.material)?;
    let bottom = at(&scenario.below.material)?;
    let mut n_media = vec![top.re];
    let mut layers = Vec::new();
    let mut layer_indices = Vec::new();
    for layer in scenario.layers() {
        let n = at(&layer.material)?;
        // α = 4πk/λ with λ in µm gives µm⁻¹.
        let alpha = 4.0 * std::f64::consts::PI * n.im / (wavelength_nm * 1e-3);
        n_media.push(n.re);
        layers.push(ThickLayer {
            thickness_um: layer.thickness_um,
            alpha_per_um: alpha,
        });
        layer_indices.push(n);
    }
    n_media.push(bottom.re);
    let mut stacks = Vec::new();
    for (i, spec) in scenario.interfaces().enumerate() {
        let above = Index::new(n_media[i], 0.0);
        // The exit half-space keeps its full complex index (a rear metal absorbs what
        // crosses into it); thick layers enter with their real part.
        let below = if i + 1 == n_media.len() - 1 {
            bottom
        } else {
            Index::new(n_media[i + 1], 0.0)
        };
        let films = spec
            .coating
            .iter()
            .map(|c| Ok(Layer::new(at(&c.material)?, c.thickness_nm)))
            .collect::<Result<Vec<_>, RunError>>()?;
        stacks
            .push(FilmStack::new(above, films, below).map_err(|e| RunError::Input(e.to_string()))?);
    }
    Ok(Optics {
        n_media,
        layers,
        stacks,
        absorber_index: layer_indices[scenario.absorber],
        layer_indices,
    })
}

pub(super) fn response(
    scenario: &Scenario,
    i: usize,
    stack: &FilmStack,
    wavelength_nm: f64,
) -> Result<Box<dyn FacetResponse>, RunError> {
    let spec = scenario.interfaces().nth(i).expect("interface index");
    if stack.n_layers() == 0 && stack.below().im == 0.0 {
        return Ok(Box::new(BareInterface {
            n_above: stack.above().re,
            n_below: stack.below().re,
        }));
    }
    let coated = CoatedInterface::new(
        stack,
        wavelength_nm,
        spec.coating_geometry,
        &spec.coating_tilt_cos,
    )
    .map_err(|e| RunError::Input(e.to_string()))?;
    Ok(Box::new(coated))
}

/// Traces one wavelength.
fn one_wavelength(
    scenario: &Scenario,
    index: usize,
    wavelength_nm: f64,
) -> Result<(WavelengthResult, Vec<f64>), RunError> {
    let optics = optics_at(scenario, wavelength_nm)?;
    let responses = optics
        .stacks
        .iter()
        .enumerate()
        .map(|(i, s)| response(scenario, i, s, wavelength_nm))
        .collect::<Result<Vec<_>, _>>()?;
    let interfaces: Vec<Surface> = scenario
        .interfaces()
        .enumerate()
        .map(|(i, spec)| Surface {
            texture: &*spec.texture,
            response: &*responses[i],
            n_above: optics.n_media[i],
            n_below: optics.n_media[i + 1],
            polarisation: scenario.solver.polarisation,
        })
        .collect();
    let model = WaferModel {
        interfaces,
        layers: optics.layers.clone(),
        absorber: scenario.absorber,
        profile_bins: scenario.solver.profile_bins,
    };
    model
        .validate()
        .map_err(|e| RunError::Input(e.to_string()))?;
    let light = &scenario.light;
    let incidence = Incidence::Above {
        theta: light.polar_angle_deg.to_radians(),
        phi: light.azimuth_deg.to_radians(),
        polarisation: light.polarisation,
    };
    let key = crate::sampling::job_key(index as u32, 0);
    let seed = scenario.solver.seed;
    let t = match scenario.solver.rays {
        RayBudget::Fixed(n) => model.trace(&incidence, n, seed, key),
        RayBudget::Precision {
            target_std_error,
            max_rays,
        } => model.trace_to_precision(&incidence, target_std_error, max_rays, seed, key),
    };
    let n_rays = t.rays.max(1) as f64;
    let absorber = scenario.absorber;
    let a = t.estimate(&t.layers[absorber]);
    let r = t.estimate(&t.reflected);
    let esc = t.estimate(&t.escape);
    let thickness = optics.layers[absorber].thickness_um;
    let k = optics.absorber_index.im;
    let limits =
        crate::wafer::limits::limit_point(wavelength_nm, optics.absorber_index.re, k, thickness);
    let z = crate::wafer::limits::path_length_enhancement(
        a.value,
        r.value - esc.value,
        limits.alpha_per_cm,
        thickness,
    );
    let films = scenario
        .interfaces()
        .enumerate()
        .map(|(i, spec)| {
            (0..spec.coating.len())
                .map(|l| t.estimate(&t.films[i][l]))
                .collect()
        })
        .collect();
    let result = WavelengthResult {
        wavelength_nm,
        reflectance: r,
        escape: esc,
        transmittance: t.estimate(&t.transmitted),
        layers: t.layers.iter().map(|m| t.estimate(m)).collect(),
        films,
        abandoned: t.abandoned.sum / n_rays,
        rays: t.rays,
        lost_rays: t.lost_rays,
        event_limited_rays: t.event_limited_rays,
        energy_error: t.energy_error(),
        profile: t.profile.iter().map(|p| p / n_rays).collect(),
        entering: t.entering.iter().map(|p| p / n_rays).collect(),
        entering_path_factor: if t.entering_power > 0.0 {
            t.entering_inv_cos / t.entering_power
        } else {
            0.0
        },
        limits,
        path_length_enhancement: z,
        front_reflection_std_error: None,
        binning_error: None,
    };
    Ok((result, model.profile_edges_um()))
}

/// Runs every wavelength (in parallel over wavelengths and, inside, over ray chunks).
pub fn run(scenario: &Scenario, progress: Progress) -> Result<RunResult, RunError> {
    let grid = scenario.light.wavelengths.as_slice();
    let done = std::sync::atomic::AtomicUsize::new(0);
    let total = grid.len();
    let per: Vec<Result<(WavelengthResult, Vec<f64>), RunError>> = grid
        .par_iter()
        .enumerate()
        .map(|(i, &wl)| {
            let r = one_wavelength(scenario, i, wl);
            let d = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
            progress(d, total);
            r
        })
        .collect();
    let mut wavelengths = Vec::with_capacity(total);
    let mut edges = Vec::new();
    for r in per {
        let (w, e) = r?;
        edges = e;
        wavelengths.push(w);
    }
    RunResult::assemble(scenario, "direct", wavelengths, edges, assumptions())
        .map_err(RunError::Internal)
}
