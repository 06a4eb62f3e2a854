//! Matrix mode: per wavelength, redistribution matrices for every interface (analytic for
//! planar interfaces, traced for textures) combined by the stack solver (`wafer::Stack`).

use super::direct::{assumptions as direct_assumptions, optics_at, response};
use super::result::{RunResult, WavelengthResult};
use super::{Progress, RunError};
use crate::redistribution::traced::textured_matrices;
use crate::redistribution::{AngleBins, InterfaceMatrices, InterfaceSetup, MediumInfo};
use crate::scenario::{RayBudget, Scenario};
use crate::texture::{SurfaceKind, Symmetry};
use crate::tracer::{Estimate, Surface};
use crate::wafer::{SemiInfinite, SolverOptions, Stack, StackElement, ThickLayer};
use rayon::prelude::*;

fn input(e: impl std::fmt::Display) -> RunError {
    RunError::Input(e.to_string())
}

fn exact(value: f64) -> Estimate {
    Estimate {
        value,
        std_error: 0.0,
    }
}

/// Receives each interface's matrices as they are built: (interface name, wavelength, matrices).
pub type MatrixSink<'a> =
    &'a (dyn Fn(&str, f64, &InterfaceMatrices) -> Result<(), RunError> + Sync);

fn one_wavelength(
    scenario: &Scenario,
    index: usize,
    wl: f64,
    sink: Option<MatrixSink>,
) -> Result<WavelengthResult, RunError> {
    let optics = optics_at(scenario, wl)?;
    let solver = &scenario.solver;
    let symmetry = if solver.azimuth_bins == 1 {
        Symmetry::Isotropic
    } else {
        Symmetry::None
    };
    // Equal-étendue polar bins plus a narrow first bin (sin²θ < 1e-4, θ < 0.6°) so that
    // collimated light at normal incidence is not smeared over the first cone.
    let n = solver.polar_bins.max(2);
    let mut edges = vec![0.0, 1e-4];
    edges.extend((1..=n).map(|i| i as f64 / n as f64));
    let bins = AngleBins::from_sin2_edges(&edges, solver.azimuth_bins, symmetry).map_err(input)?;
    let rays_per_bin = match solver.rays {
        RayBudget::Fixed(n) => n.max(2048),
        RayBudget::Precision { .. } => 4096,
    };
    let top = scenario.above.material.index_at(wl).map_err(input)?;
    let bottom = scenario.below.material.index_at(wl).map_err(input)?;
    let mut elements = vec![StackElement::Medium(SemiInfinite {
        id: scenario.above.material.id().into(),
        index: top,
    })];
    let layers: Vec<_> = scenario.layers().collect();
    let n_if = optics.stacks.len();
    for (i, spec) in scenario.interfaces().enumerate() {
        let stack = &optics.stacks[i];
        let medium = |j: usize| -> MediumInfo {
            if j == 0 {
                MediumInfo {
                    id: scenario.above.material.id().into(),
                    n: top.re,
                    k: 0.0,
                }
            } else if j == n_if {
                MediumInfo {
                    id: scenario.below.material.id().into(),
                    n: bottom.re,
                    k: bottom.im,
                }
            } else {
                MediumInfo {
                    id: layers[j - 1].material.id().into(),
                    n: optics.n_media[j],
                    k: 0.0,
                }
            }
        };
        let setup = InterfaceSetup {
            bins: bins.clone(),
            wavelength_nm: wl,
            above: medium(i),
            below: medium(i + 1),
            film_layers: spec
                .coating
                .iter()
                .enumerate()
                .map(|(k, c)| format!("{} film {} ({})", spec.name, k + 1, c.material.id()))
                .collect(),
        };
        let planar = spec.texture.kind() == SurfaceKind::IdealSpecular
            || (spec.texture.kind() == SurfaceKind::Geometric
                && spec.texture.z_range_um() == [0.0, 0.0]);
        let m = if planar {
            InterfaceMatrices::planar_film(setup, stack).map_err(input)?
        } else {
            let resp = response(scenario, i, stack, wl)?;
            let surface = Surface {
                texture: &*spec.texture,
                response: &*resp,
                n_above: optics.n_media[i],
                n_below: optics.n_media[i + 1],
                polarisation: solver.polarisation,
            };
            let key = crate::sampling::job_key(index as u32, i as u32 + 1);
            textured_matrices(&surface, setup, rays_per_bin, solver.seed, key).map_err(input)?
        };
        if let Some(sink) = sink {
            sink(&spec.name, wl, &m)?;
        }
        elements.push(StackElement::Interface(Box::new(m)));
        if i + 1 < n_if {
            let l = layers[i];
            elements.push(StackElement::Thick(ThickLayer {
                id: l.name.clone(),
                index: optics.layer_indices[i],
                thickness_um: l.thickness_um,
            }));
        }
    }
    elements.push(StackElement::Medium(SemiInfinite {
        id: scenario.below.material.id().into(),
        index: bottom,
    }));
    let stack = Stack::new(wl, elements)
        .map_err(input)?
        .with_wafer_layer(scenario.absorber)
        .map_err(input)?;
    let light = &scenario.light;
    let (t, p) = (
        light.polar_angle_deg.to_radians(),
        light.azimuth_deg.to_radians(),
    );
    let dir = crate::geometry::Vec3::new(t.sin() * p.cos(), t.sin() * p.sin(), -t.cos());
    let mut incident = vec![0.0; bins.len()];
    incident[bins.index(dir)] = 1.0;
    let r = stack
        .solve(&incident, &SolverOptions::default())
        .map_err(input)?;

    // Generation profile: absorbed fraction per depth bin from the solver's G(z) per unit flux.
    let w_um = layers[scenario.absorber].thickness_um;
    let nb = solver.profile_bins.max(1);
    let dz = w_um / nb as f64;
    let profile = (0..nb)
        .map(|b| {
            let z = (b as f64 + 0.5) * dz;
            r.generation_cm3_s(scenario.absorber, z, 1.0).unwrap_or(0.0) * dz * 1e-4
        })
        .collect();
    let a = r.thick_absorptance[scenario.absorber];
    let limits = crate::wafer::limits::limit_point(
        wl,
        optics.absorber_index.re,
        optics.absorber_index.im,
        w_um,
    );
    let z = crate::wafer::limits::path_length_enhancement(
        a,
        r.reflectance_front,
        limits.alpha_per_cm,
        w_um,
    );
    Ok(WavelengthResult {
        wavelength_nm: wl,
        reflectance: exact(r.reflectance),
        escape: exact(r.escape),
        transmittance: exact(r.transmittance),
        layers: r.thick_absorptance.iter().map(|v| exact(*v)).collect(),
        films: r
            .film_absorptance
            .iter()
            .map(|f| f.iter().map(|v| exact(*v)).collect())
            .collect(),
        abandoned: r.unaccounted,
        rays: rays_per_bin * bins.len() as u64 * 2 * n_if as u64,
        lost_rays: 0,
        event_limited_rays: 0,
        energy_error: r.energy_residual.abs(),
        profile,
        entering: vec![
            0.0;
            crate::tracer::wafer_trace::ENTER_POLAR_BINS
                * crate::tracer::wafer_trace::ENTER_AZIMUTH_BINS
        ],
        entering_path_factor: 0.0,
        limits,
        path_length_enhancement: z,
    })
}

/// Runs every wavelength in matrix mode.
pub fn run(scenario: &Scenario, progress: Progress) -> Result<RunResult, RunError> {
    run_with(scenario, progress, None)
}

/// Runs every wavelength in matrix mode and hands every interface's matrices to `sink`
/// (used by `lightfold matrices` to export them).
pub fn run_with(
    scenario: &Scenario,
    progress: Progress,
    sink: Option<MatrixSink>,
) -> Result<RunResult, RunError> {
    let grid = scenario.light.wavelengths.as_slice();
    let done = std::sync::atomic::AtomicUsize::new(0);
    let per: Vec<Result<WavelengthResult, RunError>> = grid
        .par_iter()
        .enumerate()
        .map(|(i, &wl)| {
            let r = one_wavelength(scenario, i, wl, sink);
            progress(
                done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1,
                grid.len(),
            );
            r
        })
        .collect();
    let wavelengths = per.into_iter().collect::<Result<Vec<_>, _>>()?;
    let w_um = scenario
        .layers()
        .nth(scenario.absorber)
        .map_or(0.0, |l| l.thickness_um);
    let nb = scenario.solver.profile_bins.max(1);
    let edges = (0..=nb).map(|b| w_um * b as f64 / nb as f64).collect();
    let mut assumptions = direct_assumptions();
    assumptions.push(
        "matrix mode: angular bins (equal étendue); light between interfaces is unpolarised; \
         textures are traced without absorption inside their height range; standard errors \
         of the traced matrices are not propagated into the spectra (reported as 0)"
            .into(),
    );
    RunResult::assemble(scenario, "matrix", wavelengths, edges, assumptions)
        .map_err(RunError::Internal)
}
