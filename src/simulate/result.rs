//! Results of a run: per-wavelength figures with standard errors, and the spectrum-integrated
//! photocurrents, losses, generation profile and Lambertian references.

use crate::scenario::Scenario;
use crate::spectrum::Spectrum;
use crate::tracer::Estimate;
use crate::wafer::BinningError;
use crate::wafer::limits::{LimitPoint, LimitSummary};
use serde::Serialize;

/// How matrix mode estimates its binning error (stated with every matrix-mode result; the
/// reasoning is in `wafer::binning` and docs/results.md).
pub const BINNING_METHOD: &str = "each wavelength is solved again from the same matrices \
merged onto coarser bins (polar bins pairwise in both pairings, keeping the narrow normal bin; \
azimuth bins pairwise when their count is even); the estimate is 2 × (the larger polar \
difference + the azimuthal difference), a conservative Richardson-type bound (L. F. \
Richardson, Phil. Trans. R. Soc. A 210, 307 (1911)); over a spectrum the estimates add \
linearly (systematic, not random)";

/// Everything computed at one wavelength. Fractions are of the incident power.
#[derive(Clone, Debug, Serialize)]
pub struct WavelengthResult {
    pub wavelength_nm: f64,
    /// Total reflectance (front reflection + escape).
    pub reflectance: Estimate,
    /// Part of the reflectance that had entered the absorber and left through the front.
    pub escape: Estimate,
    /// Crossed the last interface into the exit medium (absorbed there if it absorbs).
    pub transmittance: Estimate,
    /// Absorptance of each thick layer, top to bottom.
    pub layers: Vec<Estimate>,
    /// Absorptance of each film of each interface (`[interface][film]`, top to bottom).
    pub films: Vec<Vec<Estimate>>,
    /// Power in abandoned rays (numerical loss or event limit); should be 0.
    pub abandoned: f64,
    pub rays: u64,
    pub lost_rays: u64,
    pub event_limited_rays: u64,
    /// |R + ΣA + T + abandoned − 1| in the accounting.
    pub energy_error: f64,
    /// Fraction of incident power absorbed in each depth bin of the absorber.
    pub profile: Vec<f64>,
    /// Fraction of incident power first entering the absorber, by (polar 10°, azimuth 15°) bin.
    pub entering: Vec<f64>,
    /// ⟨1/cos θ⟩ of the light first entering the absorber.
    pub entering_path_factor: f64,
    /// Lambertian and pass references of the absorber at this wavelength.
    pub limits: LimitPoint,
    /// Path-length enhancement Z (see `wafer::limits::path_length_enhancement`).
    pub path_length_enhancement: Option<f64>,
    /// Standard error of the front reflection (reflectance − escape) where it is known
    /// directly (matrix mode: from the replicas, so the correlation of R and escape is kept);
    /// `None`: the loss breakdown combines the errors of R and escape in quadrature.
    pub front_reflection_std_error: Option<f64>,
    /// Matrix mode: the solver's binning error estimate of every figure above (non-negative
    /// fractions of the incident power, see `wafer::binning`); `None` in direct mode.
    pub binning_error: Option<BinningError>,
}

/// A photocurrent density with its standard error, mA/cm².
#[derive(Clone, Debug, Serialize)]
pub struct Current {
    pub name: String,
    pub j_ma_cm2: f64,
    pub std_error_ma_cm2: f64,
    /// Matrix mode: binning error estimate, Σ over wavelengths of the per-wavelength
    /// estimates times the photocurrent weights (linear: systematic errors); `None` (null)
    /// in direct mode.
    pub binning_error_ma_cm2: Option<f64>,
}

/// One entry of the loss breakdown: photon flux expressed as current density, mA/cm².
#[derive(Clone, Debug, Serialize)]
pub struct Loss {
    pub name: String,
    pub j_ma_cm2: f64,
    pub std_error_ma_cm2: f64,
    /// As [`Current::binning_error_ma_cm2`].
    pub binning_error_ma_cm2: Option<f64>,
}

/// Matrix mode: the bins and the binning error estimate of a run.
#[derive(Clone, Debug, Serialize)]
pub struct BinningSummary {
    /// (polar, azimuth) bins of the solve, the narrow normal-incidence bin included.
    pub bins: [usize; 2],
    /// (polar, azimuth) bins of the coarse solves of the estimate.
    pub coarse_bins: Vec<[usize; 2]>,
    /// How the estimate is made ([`BINNING_METHOD`]).
    pub method: String,
    /// Largest per-wavelength estimate for the absorber's absorptance, and where.
    pub max_absorber_absorptance: f64,
    pub max_at_wavelength_nm: f64,
}

/// The results of a run.
#[derive(Clone, Debug, Serialize)]
pub struct RunResult {
    pub scenario: String,
    pub version: String,
    pub mode: String,
    pub seed: u64,
    pub spectrum: String,
    pub wavelengths: Vec<WavelengthResult>,
    pub layer_names: Vec<String>,
    pub film_names: Vec<Vec<String>>,
    pub absorber: usize,
    pub absorber_name: String,
    pub absorber_thickness_um: f64,
    /// Name of the exit medium's column ("transmitted to air", "absorbed in ag-…").
    pub exit_name: String,
    /// Photocurrent of the absorber (first) and of every other absorbing part.
    pub currents: Vec<Current>,
    /// Loss breakdown over the wavelength grid; with the absorber current it adds up to
    /// `max_current_ma_cm2`.
    pub losses: Vec<Loss>,
    /// J for A = 1 over the wavelength grid's range.
    pub max_current_ma_cm2: f64,
    /// Photon-flux-weighted reflectance over the weighting band.
    pub weighted_reflectance: f64,
    pub weighting_band_nm: (f64, f64),
    /// Lambertian, single- and double-pass references for the absorber.
    pub limits: LimitSummary,
    /// Depth bin edges of the generation profile, µm below the absorber's top base plane.
    pub profile_edges_um: Vec<f64>,
    /// Photogeneration rate per depth bin, cm⁻³ s⁻¹, under the scenario's spectrum.
    pub generation_cm3_s: Vec<f64>,
    /// Photon flux entering the absorber, cm⁻² s⁻¹, by (polar, azimuth) bin.
    pub entering_map: Vec<f64>,
    pub entering_polar_bins: usize,
    pub entering_azimuth_bins: usize,
    pub rays_total: u64,
    pub lost_rays_total: u64,
    pub event_limited_rays_total: u64,
    pub energy_error_max: f64,
    pub wall_time_s: f64,
    /// Modelling assumptions, stated with every result.
    pub assumptions: Vec<String>,
    /// Matrix mode: bins and binning error estimate; `None` in direct mode.
    pub binning: Option<BinningSummary>,
}

/// Photon flux per grid point, cm⁻² s⁻¹: the weights that turn an absorptance curve on the
/// grid into an absorbed photon flux at the spectrum's native resolution (J = q Σ Φ_j A_j).
fn flux_weights(spectrum: &Spectrum, grid: &[f64]) -> Result<Vec<f64>, String> {
    let g = spectrum
        .photocurrent_weights_ma_cm2(grid)
        .map_err(|e| e.to_string())?;
    // J [mA/cm²] = 1e3 · q [C] · Φ [cm⁻² s⁻¹]
    Ok(g.iter()
        .map(|x| x / (1e3 * crate::spectrum::ELEMENTARY_CHARGE_C))
        .collect())
}

/// (value, standard error) of Σ g_j x_j with independent errors per wavelength.
fn integrate(g_ma: &[f64], x: &[Estimate]) -> (f64, f64) {
    let v = g_ma.iter().zip(x).map(|(g, e)| g * e.value).sum();
    let s2: f64 = g_ma
        .iter()
        .zip(x)
        .map(|(g, e)| (g * e.std_error).powi(2))
        .sum();
    (v, s2.sqrt())
}

/// Σ g_j e_j for non-negative per-wavelength error estimates (linear sum: systematic).
fn integrate_linear(g_ma: &[f64], e: &[f64]) -> f64 {
    g_ma.iter().zip(e).map(|(g, x)| g * x.abs()).sum()
}

impl RunResult {
    /// Integrates per-wavelength results against the scenario's spectrum.
    pub fn assemble(
        scenario: &Scenario,
        mode: &str,
        wavelengths: Vec<WavelengthResult>,
        profile_edges_um: Vec<f64>,
        assumptions: Vec<String>,
    ) -> Result<RunResult, String> {
        let spectrum = scenario.light.spectrum.get();
        let grid: Vec<f64> = wavelengths.iter().map(|w| w.wavelength_nm).collect();
        let g = spectrum
            .photocurrent_weights_ma_cm2(&grid)
            .map_err(|e| e.to_string())?;
        let flux = flux_weights(spectrum, &grid)?;
        let layers: Vec<_> = scenario.layers().collect();
        let interfaces: Vec<_> = scenario.interfaces().collect();
        let layer_names: Vec<String> = layers
            .iter()
            .map(|l| format!("{} ({})", l.name, l.material.id()))
            .collect();
        let film_names: Vec<Vec<String>> = interfaces
            .iter()
            .map(|i| {
                i.coating
                    .iter()
                    .enumerate()
                    .map(|(k, c)| format!("{} film {} ({})", i.name, k + 1, c.material.id()))
                    .collect()
            })
            .collect();
        let absorber = scenario.absorber;
        let column = |f: &dyn Fn(&WavelengthResult) -> Estimate| -> Vec<Estimate> {
            wavelengths.iter().map(f).collect()
        };
        let below = &scenario.below.material;
        let exit_name = if below.is_absorbing_anywhere() {
            format!("absorbed in {}", below.id())
        } else {
            format!("transmitted to {}", below.id())
        };

        // Binning error columns (matrix mode: every wavelength has an estimate).
        let has_binning =
            !wavelengths.is_empty() && wavelengths.iter().all(|w| w.binning_error.is_some());
        let bin_col = |f: &dyn Fn(&BinningError) -> f64| -> Option<f64> {
            has_binning.then(|| {
                let e: Vec<f64> = wavelengths
                    .iter()
                    .map(|w| w.binning_error.as_ref().map_or(0.0, f))
                    .collect();
                integrate_linear(&g, &e)
            })
        };

        // Currents: the absorber first, then every other absorbing part.
        let mut currents = Vec::new();
        let (j, se) = integrate(&g, &column(&|w| w.layers[absorber]));
        currents.push(Current {
            name: layer_names[absorber].clone(),
            j_ma_cm2: j,
            std_error_ma_cm2: se,
            binning_error_ma_cm2: bin_col(&|b| b.thick_absorptance[absorber]),
        });
        let mut losses = Vec::new();
        let push_loss =
            |name: String, x: Vec<Estimate>, binning: Option<f64>, losses: &mut Vec<Loss>| {
                let (j, se) = integrate(&g, &x);
                losses.push(Loss {
                    name,
                    j_ma_cm2: j,
                    std_error_ma_cm2: se,
                    binning_error_ma_cm2: binning,
                });
            };
        push_loss(
            "front reflection".into(),
            column(&|w| Estimate {
                value: w.reflectance.value - w.escape.value,
                std_error: w.front_reflection_std_error.unwrap_or_else(|| {
                    (w.reflectance.std_error.powi(2) + w.escape.std_error.powi(2)).sqrt()
                }),
            }),
            bin_col(&|b| b.reflectance_front),
            &mut losses,
        );
        push_loss(
            "escape (entered, left through the front)".into(),
            column(&|w| w.escape),
            bin_col(&|b| b.escape),
            &mut losses,
        );
        for (i, names) in film_names.iter().enumerate() {
            for (k, name) in names.iter().enumerate() {
                push_loss(
                    name.clone(),
                    column(&|w| w.films[i][k]),
                    bin_col(&|b| b.film_absorptance[i][k]),
                    &mut losses,
                );
            }
        }
        for (l, name) in layer_names.iter().enumerate() {
            if l != absorber {
                push_loss(
                    name.clone(),
                    column(&|w| w.layers[l]),
                    bin_col(&|b| b.thick_absorptance[l]),
                    &mut losses,
                );
            }
        }
        push_loss(
            exit_name.clone(),
            column(&|w| w.transmittance),
            bin_col(&|b| b.transmittance),
            &mut losses,
        );
        let abandoned: Vec<Estimate> = column(&|w| Estimate {
            value: w.abandoned,
            std_error: 0.0,
        });
        if abandoned.iter().any(|a| a.value.abs() > 1e-9) {
            push_loss(
                "abandoned rays (numerics)".into(),
                abandoned,
                bin_col(&|b| b.unaccounted),
                &mut losses,
            );
        }
        for l in &losses[2..] {
            if !l.name.starts_with("transmitted") && !l.name.starts_with("abandoned") {
                currents.push(Current {
                    name: l.name.clone(),
                    j_ma_cm2: l.j_ma_cm2,
                    std_error_ma_cm2: l.std_error_ma_cm2,
                    binning_error_ma_cm2: l.binning_error_ma_cm2,
                });
            }
        }
        let binning = if has_binning {
            let (mut worst, mut at) = (0.0, grid[0]);
            for w in &wavelengths {
                let e = w
                    .binning_error
                    .as_ref()
                    .map_or(0.0, |b| b.thick_absorptance[absorber]);
                if e > worst {
                    (worst, at) = (e, w.wavelength_nm);
                }
            }
            let first = wavelengths[0].binning_error.as_ref();
            Some(BinningSummary {
                bins: [
                    scenario.solver.polar_bins.max(2) + 1,
                    scenario.solver.azimuth_bins,
                ],
                coarse_bins: first.map_or(vec![], |b| b.coarse_bins.clone()),
                method: BINNING_METHOD.to_string(),
                max_absorber_absorptance: worst,
                max_at_wavelength_nm: at,
            })
        } else {
            None
        };
        let max_current_ma_cm2 = g.iter().sum();

        // Generation profile: G_b = Σ_j Φ_j · f_{j,b} / Δz_b.
        let n_bins = profile_edges_um.len().saturating_sub(1);
        let mut generation_cm3_s = vec![0.0; n_bins];
        for (w, phi) in wavelengths.iter().zip(&flux) {
            for (gb, f) in generation_cm3_s.iter_mut().zip(&w.profile) {
                *gb += phi * f;
            }
        }
        for (b, gb) in generation_cm3_s.iter_mut().enumerate() {
            let dz_cm = (profile_edges_um[b + 1] - profile_edges_um[b]) * 1e-4;
            *gb /= dz_cm;
        }
        let mut entering_map = vec![0.0; wavelengths.first().map_or(0, |w| w.entering.len())];
        for (w, phi) in wavelengths.iter().zip(&flux) {
            for (m, e) in entering_map.iter_mut().zip(&w.entering) {
                *m += phi * e;
            }
        }

        let band = scenario.light.weighting_band_nm;
        let r: Vec<f64> = wavelengths.iter().map(|w| w.reflectance.value).collect();
        let weighted_reflectance = spectrum
            .photon_weighted_mean(
                &grid,
                &r,
                (band.0.max(grid[0]), band.1.min(grid[grid.len() - 1])),
            )
            .map_err(|e| e.to_string())?;
        let n: Vec<f64> = wavelengths.iter().map(|w| w.limits.n).collect();
        let k: Vec<f64> = wavelengths.iter().map(|w| w.limits.k).collect();
        let thickness = layers[absorber].thickness_um;
        let limits = crate::wafer::limits::limit_summary(spectrum, &grid, &n, &k, thickness)
            .map_err(|e| e.to_string())?;
        Ok(RunResult {
            scenario: scenario.name.clone(),
            version: env!("CARGO_PKG_VERSION").to_string(),
            mode: mode.to_string(),
            seed: scenario.solver.seed,
            spectrum: spectrum.id().to_string(),
            rays_total: wavelengths.iter().map(|w| w.rays).sum(),
            lost_rays_total: wavelengths.iter().map(|w| w.lost_rays).sum(),
            event_limited_rays_total: wavelengths.iter().map(|w| w.event_limited_rays).sum(),
            energy_error_max: wavelengths
                .iter()
                .map(|w| w.energy_error)
                .fold(0.0, f64::max),
            wavelengths,
            layer_names,
            film_names,
            absorber,
            absorber_name: layers[absorber].name.clone(),
            absorber_thickness_um: thickness,
            exit_name,
            currents,
            losses,
            max_current_ma_cm2,
            weighted_reflectance,
            weighting_band_nm: band,
            limits,
            profile_edges_um,
            generation_cm3_s,
            entering_map,
            entering_polar_bins: crate::tracer::wafer_trace::ENTER_POLAR_BINS,
            entering_azimuth_bins: crate::tracer::wafer_trace::ENTER_AZIMUTH_BINS,
            wall_time_s: 0.0,
            assumptions,
            binning,
        })
    }

    /// Photocurrent of the absorber.
    pub fn absorber_current(&self) -> &Current {
        &self.currents[0]
    }
}
