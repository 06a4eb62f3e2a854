//! Wavelength grids, the ASTM G173-03 reference spectra, user spectrum files, photon flux and
//! photocurrent integrals J = q∫Φ(λ)A(λ)dλ at the spectrum's native resolution.
//!
//! Invariant: a [`Spectrum`] holds at least two points, wavelengths finite, > 0 nm and strictly
//! increasing, spectral irradiance finite and ≥ 0 W m⁻² nm⁻¹; between points it is linear,
//! outside its range it is 0. Not here: the absorptance itself (`wafer`), drawing wavelengths
//! for Monte Carlo (`sampling`).
//!
//! # Built-in spectra
//!
//! ASTM G173-03, *Standard Tables for Reference Solar Spectral Irradiances: Direct Normal and
//! Hemispherical on 37° Tilted Surface*, ASTM International (2003), 280–4000 nm
//! on 2002 points (0.5 nm steps to 400 nm, 1 nm to 1700 nm, then 1702, 1705 and 5 nm steps
//! from 1710 nm), embedded from
//! `data/spectra/` (values as shipped in pvlib 0.16.1; see each file's header):
//!
//! | id | table column | ∫E dλ, 280–4000 nm (trapezoid) |
//! | --- | --- | --- |
//! | `am1.5g` | global tilt (hemispherical on a 37° sun-facing tilt) | 1000.37 W/m² |
//! | `am1.5d` | direct normal + circumsolar | 900.14 W/m² |
//! | `g173-etr` | extraterrestrial | 1347.93 W/m² |
//!
//! The G173 extraterrestrial column is the input spectrum of the SMARTS2 model used to build
//! the table; it is **not** the ASTM E490 AM0 standard and must not be used as such.
//!
//! # Quadrature
//!
//! Every integral over a band `[lo, hi]` uses the trapezoid rule on the spectrum's own
//! wavelengths inside `(lo, hi)`, plus two nodes exactly at `lo` and `hi` whose irradiance is
//! interpolated linearly: the band edges are clipped exactly. For irradiance this is the exact
//! integral of the piecewise-linear spectrum. A curve given on a simulation grid (absorptance,
//! transmittance, reflectance) is interpolated linearly onto those nodes and counts as 0
//! outside its grid. Photon flux at a node is Φ = E·λ/(hc). Sampling AM1.5G only at a 10 nm
//! simulation grid instead misses its narrow absorption bands and shifts J by about
//! 0.4 mA/cm² for a textured wafer (see `tests/reference_spectrum.rs`).

mod error;
mod file;
mod grid;

use std::path::Path;
use std::sync::LazyLock;

pub use error::SpectrumError;
pub use file::ACCEPTED_HEADERS;
pub use grid::{MAX_GRID_POINTS, WavelengthGrid};

/// Planck constant h in J s, exact in the 2019 SI.
/// Source: BIPM, *The International System of Units (SI)*, 9th ed. (2019), Table 1.
pub const PLANCK_J_S: f64 = 6.626_070_15e-34;

/// Speed of light in vacuum c in m/s, exact in the SI.
/// Source: BIPM, *The International System of Units (SI)*, 9th ed. (2019), Table 1.
pub const SPEED_OF_LIGHT_M_S: f64 = 299_792_458.0;

/// Elementary charge e in C, exact in the 2019 SI.
/// Source: BIPM, *The International System of Units (SI)*, 9th ed. (2019), Table 1.
pub const ELEMENTARY_CHARGE_C: f64 = 1.602_176_634e-19;

/// Ids of the built-in spectra, as accepted by [`Spectrum::builtin`].
pub const BUILTIN_IDS: [&str; 3] = ["am1.5g", "am1.5d", "g173-etr"];

/// h·c in J m.
const HC_J_M: f64 = PLANCK_J_S * SPEED_OF_LIGHT_M_S;
/// nm → m.
const M_PER_NM: f64 = 1e-9;
/// A/m² → mA/cm²: 10³ mA/A ÷ 10⁴ cm²/m².
const MA_CM2_PER_A_M2: f64 = 0.1;
/// Round-off allowance outside [0, 1] for fractions such as absorptance.
const FRACTION_TOL_ABS: f64 = 1e-9;
/// Tolerance, relative to the wavelength, for a band edge to count as inside a grid.
const BAND_TOL_REL: f64 = 1e-9;

static AM15G: LazyLock<Spectrum> = LazyLock::new(|| {
    Spectrum::embedded(
        "am1.5g",
        "ASTM G173-03 AM1.5G (global, 37° tilt)",
        "data/spectra/astm-g173-am15g.csv",
        include_str!("../../data/spectra/astm-g173-am15g.csv"),
    )
});
static AM15D: LazyLock<Spectrum> = LazyLock::new(|| {
    Spectrum::embedded(
        "am1.5d",
        "ASTM G173-03 AM1.5D (direct normal + circumsolar)",
        "data/spectra/astm-g173-am15d.csv",
        include_str!("../../data/spectra/astm-g173-am15d.csv"),
    )
});
static G173_ETR: LazyLock<Spectrum> = LazyLock::new(|| {
    Spectrum::embedded(
        "g173-etr",
        "ASTM G173-03 extraterrestrial column (not ASTM E490 AM0)",
        "data/spectra/astm-g173-extraterrestrial.csv",
        include_str!("../../data/spectra/astm-g173-extraterrestrial.csv"),
    )
});

/// A spectral irradiance E(λ) in W m⁻² nm⁻¹ tabulated against wavelength in nm, linear
/// between points and 0 outside them; see the module docs for the invariant and quadrature.
#[derive(Debug, Clone, PartialEq)]
pub struct Spectrum {
    id: String,
    name: String,
    provenance: String,
    wavelength_nm: Vec<f64>,
    irradiance_w_m2_nm: Vec<f64>,
}

/// One trapezoid node: wavelength (nm), irradiance there (W m⁻² nm⁻¹), weight (nm).
#[derive(Debug, Clone, Copy)]
struct Node {
    wavelength_nm: f64,
    irradiance: f64,
    weight_nm: f64,
}

impl Node {
    /// Photon flux at the node, photons m⁻² s⁻¹ nm⁻¹.
    fn photon_flux(&self) -> f64 {
        photon_flux(self.irradiance, self.wavelength_nm)
    }
}

/// Φ = E·λ/(hc): W m⁻² nm⁻¹ at `wavelength_nm` → photons m⁻² s⁻¹ nm⁻¹.
fn photon_flux(irradiance_w_m2_nm: f64, wavelength_nm: f64) -> f64 {
    irradiance_w_m2_nm * (wavelength_nm * M_PER_NM) / HC_J_M
}

impl Spectrum {
    /// ASTM G173-03 AM1.5G: global (hemispherical) spectral irradiance on a sun-facing surface
    /// tilted 37°, 280–4000 nm, ∫E dλ = 1000.37 W/m² (ASTM's nominal value: 1000 W/m²).
    /// Source: ASTM G173-03, ASTM International (2003).
    pub fn am15g() -> &'static Spectrum {
        &AM15G
    }

    /// ASTM G173-03 AM1.5D: direct normal plus circumsolar spectral irradiance, 280–4000 nm,
    /// ∫E dλ = 900.14 W/m². Source: ASTM G173-03, ASTM International (2003).
    pub fn am15d() -> &'static Spectrum {
        &AM15D
    }

    /// The extraterrestrial column of the ASTM G173-03 table, 280–4000 nm, ∫E dλ = 1347.93
    /// W/m². It is the SMARTS2 input spectrum used to build G173, **not** the ASTM E490 AM0
    /// standard. Source: ASTM G173-03, ASTM International (2003).
    pub fn g173_extraterrestrial() -> &'static Spectrum {
        &G173_ETR
    }

    /// Built-in spectrum by id: `am1.5g`, `am1.5d` or `g173-etr` ([`BUILTIN_IDS`]),
    /// case-insensitive, surrounding spaces ignored. An unknown id gives
    /// [`SpectrumError::UnknownBuiltin`] listing the valid ids.
    pub fn builtin(id: &str) -> Result<&'static Spectrum, SpectrumError> {
        match id.trim().to_ascii_lowercase().as_str() {
            "am1.5g" => Ok(Self::am15g()),
            "am1.5d" => Ok(Self::am15d()),
            "g173-etr" => Ok(Self::g173_extraterrestrial()),
            _ => Err(SpectrumError::UnknownBuiltin {
                id: id.to_string(),
                valid: BUILTIN_IDS.map(|s| format!("`{s}`")).join(", "),
            }),
        }
    }

    /// Reads a user spectrum from a two-column CSV file.
    ///
    /// Format (see [`ACCEPTED_HEADERS`]): optional `#` provenance lines, then the unit header
    /// `wavelength_nm,irradiance_W_m2_nm` (W m⁻² nm⁻¹) or `wavelength_nm,photon_flux_m2_s_nm`
    /// (photons m⁻² s⁻¹ nm⁻¹, converted to irradiance by E = Φ·hc/λ on reading), header names
    /// case-insensitive; then at least two rows `wavelength,value` with wavelengths finite,
    /// positive and strictly increasing and values finite and ≥ 0. Blank lines and `#` lines
    /// are allowed anywhere; those `#` lines before the header become [`Spectrum::provenance`].
    ///
    /// The id is the file stem, the name the path as given. Errors
    /// ([`SpectrumError::File`]) name the file and 1-based line, what was found, what was
    /// expected and how to fix it; an unreadable file gives [`SpectrumError::Read`].
    pub fn from_csv(path: &Path) -> Result<Spectrum, SpectrumError> {
        let text = std::fs::read_to_string(path).map_err(|source| SpectrumError::Read {
            file: path.to_path_buf(),
            source,
        })?;
        let table = file::parse_table(&text, path)?;
        let id = path
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| path.display().to_string());
        Ok(Spectrum {
            id,
            name: path.display().to_string(),
            provenance: table.provenance,
            wavelength_nm: table.wavelength_nm,
            irradiance_w_m2_nm: table.irradiance_w_m2_nm,
        })
    }

    /// Spectrum from values in memory.
    ///
    /// * `wavelength_nm` – at least two, finite, > 0, strictly increasing.
    /// * `irradiance_w_m2_nm` – same length, finite, ≥ 0, W m⁻² nm⁻¹.
    /// * `provenance` – free text saying where the values come from (kept verbatim).
    ///
    /// Errors ([`SpectrumError::Input`]) name the first offending point.
    pub fn from_points(
        id: &str,
        name: &str,
        provenance: &str,
        wavelength_nm: Vec<f64>,
        irradiance_w_m2_nm: Vec<f64>,
    ) -> Result<Spectrum, SpectrumError> {
        check_curve(
            "spectrum",
            &wavelength_nm,
            &irradiance_w_m2_nm,
            Bounds::NonNegative,
        )?;
        Ok(Spectrum {
            id: id.to_string(),
            name: name.to_string(),
            provenance: provenance.to_string(),
            wavelength_nm,
            irradiance_w_m2_nm,
        })
    }

    /// Short identifier (`am1.5g`, a file stem, or the id given to [`Spectrum::filtered`]).
    pub fn id(&self) -> &str {
        &self.id
    }

    /// Human-readable name.
    pub fn name(&self) -> &str {
        &self.name
    }

    /// Where the data come from: the `#` comment lines that head the file, verbatim (markers
    /// included), joined by `\n`; empty if the file had none.
    pub fn provenance(&self) -> &str {
        &self.provenance
    }

    /// Tabulated wavelengths in nm, strictly increasing.
    pub fn wavelength_nm(&self) -> &[f64] {
        &self.wavelength_nm
    }

    /// Tabulated spectral irradiance in W m⁻² nm⁻¹, one per wavelength.
    pub fn irradiance_w_m2_nm(&self) -> &[f64] {
        &self.irradiance_w_m2_nm
    }

    /// First and last tabulated wavelength in nm.
    pub fn range_nm(&self) -> (f64, f64) {
        (
            self.wavelength_nm[0],
            self.wavelength_nm[self.wavelength_nm.len() - 1],
        )
    }

    /// Spectral irradiance in W m⁻² nm⁻¹ at `wavelength_nm`, linear between tabulated points,
    /// exactly the tabulated value on a point, 0 outside [`Spectrum::range_nm`]; NaN gives NaN.
    pub fn irradiance_at(&self, wavelength_nm: f64) -> f64 {
        if wavelength_nm.is_nan() {
            return f64::NAN;
        }
        interp_linear(&self.wavelength_nm, &self.irradiance_w_m2_nm, wavelength_nm).unwrap_or(0.0)
    }

    /// Spectral photon flux in photons m⁻² s⁻¹ nm⁻¹ at `wavelength_nm`: Φ = E·λ/(hc) with E
    /// from [`Spectrum::irradiance_at`] (0 outside the range; NaN gives NaN).
    /// Source: Planck–Einstein relation, photon energy hc/λ.
    pub fn photon_flux_at(&self, wavelength_nm: f64) -> f64 {
        photon_flux(self.irradiance_at(wavelength_nm), wavelength_nm)
    }

    /// Irradiance ∫E dλ in W/m² over `band_nm = (lo, hi)`, clipped to the spectrum's range
    /// (module-level quadrature: exact for the piecewise-linear spectrum). Returns 0 when the
    /// band is empty, reversed, NaN or outside the range.
    pub fn total_irradiance_w_m2(&self, band_nm: (f64, f64)) -> f64 {
        self.nodes(band_nm.0, band_nm.1)
            .iter()
            .fold(0.0, |acc, n| acc + n.weight_nm * n.irradiance)
    }

    /// Photon flux ∫Φ dλ in photons m⁻² s⁻¹ over `band_nm`, same quadrature and edge
    /// behaviour as [`Spectrum::total_irradiance_w_m2`].
    pub fn total_photon_flux_m2_s(&self, band_nm: (f64, f64)) -> f64 {
        self.nodes(band_nm.0, band_nm.1)
            .iter()
            .fold(0.0, |acc, n| acc + n.weight_nm * n.photon_flux())
    }

    /// Photocurrent density J = q∫Φ(λ)A(λ)dλ in mA/cm² at the spectrum's native resolution.
    ///
    /// * `grid_nm` – wavelengths in nm of the absorptance, at least two, finite, > 0,
    ///   strictly increasing (any spacing; typically a 5–20 nm simulation grid).
    /// * `absorptance` – A at each grid wavelength, a fraction in [0, 1] (values within 1e-9
    ///   of it are accepted as round-off). Any other collection probability (EQE) works too.
    ///
    /// Quadrature: trapezoid on the spectrum's own wavelengths inside the grid's range, plus
    /// nodes exactly at the grid's first and last wavelength (irradiance interpolated); A is
    /// interpolated linearly onto these nodes and counts as 0 outside the grid's range. A
    /// grid extending beyond the spectrum adds nothing there. Source of the rule:
    /// common practice, no source; see the module docs for why native resolution matters.
    pub fn photocurrent_ma_cm2(
        &self,
        grid_nm: &[f64],
        absorptance: &[f64],
    ) -> Result<f64, SpectrumError> {
        check_curve("absorptance", grid_nm, absorptance, Bounds::Fraction)?;
        let nodes = self.nodes(grid_nm[0], grid_nm[grid_nm.len() - 1]);
        let sum = nodes.iter().fold(0.0, |acc, n| {
            let a = interp_linear(grid_nm, absorptance, n.wavelength_nm).unwrap_or(0.0);
            acc + n.weight_nm * n.photon_flux() * a
        });
        Ok(ELEMENTARY_CHARGE_C * sum * MA_CM2_PER_A_M2)
    }

    /// Sensitivities g_j = ∂J/∂A_j in mA/cm² per unit absorptance at each grid wavelength,
    /// with the quadrature of [`Spectrum::photocurrent_ma_cm2`]. Because linear interpolation
    /// and the trapezoid rule are both linear in A, J = Σ_j g_j·A_j exactly (to round-off);
    /// Σ_j g_j is the current for A = 1 over the grid's range. Useful for many absorptance
    /// curves on one grid and for error propagation.
    pub fn photocurrent_weights_ma_cm2(&self, grid_nm: &[f64]) -> Result<Vec<f64>, SpectrumError> {
        check_grid("photocurrent grid_nm", grid_nm)?;
        let last = grid_nm.len() - 1;
        let mut weights = vec![0.0; grid_nm.len()];
        for n in self.nodes(grid_nm[0], grid_nm[last]) {
            // Grid interval [g_j, g_{j+1}] holding the node; t is the position within it.
            let j = grid_nm
                .partition_point(|&g| g <= n.wavelength_nm)
                .saturating_sub(1)
                .min(last - 1);
            let t = (n.wavelength_nm - grid_nm[j]) / (grid_nm[j + 1] - grid_nm[j]);
            let w = ELEMENTARY_CHARGE_C * n.weight_nm * n.photon_flux() * MA_CM2_PER_A_M2;
            weights[j] += (1.0 - t) * w;
            weights[j + 1] += t * w;
        }
        Ok(weights)
    }

    /// Photocurrent density J in mA/cm² and its standard error in mA/cm², from per-wavelength
    /// standard errors `se` (same length as `grid_nm`, finite, ≥ 0) of the absorptance.
    ///
    /// J is as in [`Spectrum::photocurrent_ma_cm2`]. J is linear in the grid values,
    /// J = Σ_j g_j·A_j ([`Spectrum::photocurrent_weights_ma_cm2`]), so for errors independent
    /// between grid points (true when each wavelength is traced with its own random streams)
    /// the propagation is exact: SE(J) = √(Σ_j g_j²·se_j²). It holds no uncertainty of the
    /// spectrum itself nor the interpolation error of A between grid points.
    pub fn photocurrent_with_se(
        &self,
        grid_nm: &[f64],
        absorptance: &[f64],
        se: &[f64],
    ) -> Result<(f64, f64), SpectrumError> {
        let j = self.photocurrent_ma_cm2(grid_nm, absorptance)?;
        check_curve(
            "absorptance standard error",
            grid_nm,
            se,
            Bounds::NonNegative,
        )?;
        let weights = self.photocurrent_weights_ma_cm2(grid_nm)?;
        let var = weights
            .iter()
            .zip(se)
            .fold(0.0, |acc, (g, s)| acc + (g * s) * (g * s));
        Ok((j, var.sqrt()))
    }

    /// Largest photocurrent density in mA/cm² that the spectrum can give in `band_nm`: J for
    /// A = 1, i.e. q∫Φ dλ, e.g. `(280.0, 1107.0)` for silicon's band gap (≈ 1.12 eV).
    /// Same quadrature and edge behaviour as [`Spectrum::total_irradiance_w_m2`] (0 for an
    /// empty, reversed or NaN band).
    pub fn max_photocurrent_ma_cm2(&self, band_nm: (f64, f64)) -> f64 {
        ELEMENTARY_CHARGE_C * self.total_photon_flux_m2_s(band_nm) * MA_CM2_PER_A_M2
    }

    /// Photon-flux-weighted mean ∫Φ·v dλ / ∫Φ dλ over `band_nm` of `values` given on
    /// `grid_nm`, e.g. the AM1.5G-weighted reflectance over 300–1200 nm used to rank
    /// anti-reflection coatings (common practice, no source).
    ///
    /// * `grid_nm` – at least two wavelengths, finite, > 0, strictly increasing.
    /// * `values` – finite, one per grid wavelength, any unit (the result has the same one).
    /// * `band_nm` – `(lo, hi)`, lo < hi, inside the grid's range (1e-9 relative slack),
    ///   clipped to the spectrum's range, and holding photons.
    ///
    /// Same quadrature as [`Spectrum::photocurrent_ma_cm2`], values interpolated linearly.
    pub fn photon_weighted_mean(
        &self,
        grid_nm: &[f64],
        values: &[f64],
        band_nm: (f64, f64),
    ) -> Result<f64, SpectrumError> {
        check_curve("weighted values", grid_nm, values, Bounds::Finite)?;
        let (g_lo, g_hi) = (grid_nm[0], grid_nm[grid_nm.len() - 1]);
        let (lo, hi) = band_nm;
        if !(lo.is_finite() && hi.is_finite() && lo < hi) {
            return Err(SpectrumError::input(
                "band_nm",
                format!("band ({lo}, {hi}) nm is not an interval"),
                "(lo, hi) in nm with finite lo < hi",
                "give the band as (lower, upper) wavelength in nm",
            ));
        }
        if lo < g_lo * (1.0 - BAND_TOL_REL) || hi > g_hi * (1.0 + BAND_TOL_REL) {
            return Err(SpectrumError::input(
                "band_nm",
                format!("band {lo}–{hi} nm extends beyond the values' grid {g_lo}–{g_hi} nm"),
                "a band inside the wavelength range of the values",
                "narrow the band or compute the values over a wider grid",
            ));
        }
        let nodes = self.nodes(lo.max(g_lo), hi.min(g_hi));
        let (num, den) = nodes.iter().fold((0.0, 0.0), |(num, den), n| {
            let v = interp_linear(grid_nm, values, n.wavelength_nm).unwrap_or(0.0);
            let w = n.weight_nm * n.photon_flux();
            (num + w * v, den + w)
        });
        if den <= 0.0 {
            let (s_lo, s_hi) = self.range_nm();
            return Err(SpectrumError::input(
                "band_nm",
                format!(
                    "spectrum `{}` has no photons in {lo}–{hi} nm (it covers {s_lo}–{s_hi} nm)",
                    self.id
                ),
                "a band where the spectrum is non-zero",
                "choose a band inside the spectrum's range",
            ));
        }
        Ok(num / den)
    }

    /// This spectrum multiplied by a transmittance curve, e.g. the light that reaches a bottom
    /// cell through a top cell.
    ///
    /// * `grid_nm` – at least two wavelengths, finite, > 0, strictly increasing.
    /// * `transmittance` – T per grid wavelength, in [0, 1] (1e-9 round-off slack).
    /// * `id` – id of the new spectrum, non-empty.
    ///
    /// The result lives on this spectrum's points inside the overlap of both ranges, plus
    /// points exactly at the overlap's edges (irradiance interpolated): E'(λ) = E(λ)·T(λ), T
    /// interpolated linearly, and 0 outside the overlap (T counts as 0 outside its grid, as
    /// A does in [`Spectrum::photocurrent_ma_cm2`]). The provenance gains one line saying so.
    pub fn filtered(
        &self,
        grid_nm: &[f64],
        transmittance: &[f64],
        id: &str,
    ) -> Result<Spectrum, SpectrumError> {
        check_curve("transmittance", grid_nm, transmittance, Bounds::Fraction)?;
        if id.trim().is_empty() {
            return Err(SpectrumError::input(
                "filtered spectrum id",
                "the id is empty",
                "a short non-empty name, e.g. `am1.5g-under-perovskite`",
                "pass an id",
            ));
        }
        let (g_lo, g_hi) = (grid_nm[0], grid_nm[grid_nm.len() - 1]);
        let nodes = self.nodes(g_lo, g_hi);
        if nodes.len() < 2 {
            let (s_lo, s_hi) = self.range_nm();
            return Err(SpectrumError::input(
                "transmittance",
                format!(
                    "its grid {g_lo}–{g_hi} nm does not overlap spectrum `{}` ({s_lo}–{s_hi} nm)",
                    self.id
                ),
                "a transmittance grid overlapping the spectrum",
                "give the transmittance over the spectrum's wavelengths",
            ));
        }
        let wavelength_nm: Vec<f64> = nodes.iter().map(|n| n.wavelength_nm).collect();
        let irradiance_w_m2_nm = nodes
            .iter()
            .map(|n| {
                let t = interp_linear(grid_nm, transmittance, n.wavelength_nm).unwrap_or(0.0);
                n.irradiance * t.max(0.0)
            })
            .collect();
        let note = format!(
            "# Filtered by lightfold: multiplied by a transmittance curve on {} wavelengths, \
             {g_lo}–{g_hi} nm (linear interpolation, 0 outside).",
            grid_nm.len()
        );
        let provenance = if self.provenance.is_empty() {
            note
        } else {
            format!("{}\n{note}", self.provenance)
        };
        Ok(Spectrum {
            id: id.trim().to_string(),
            name: format!("{} × transmittance", self.name),
            provenance,
            wavelength_nm,
            irradiance_w_m2_nm,
        })
    }

    /// Parses an embedded table. A failure is a bug in lightfold's data, tested below.
    fn embedded(id: &str, name: &str, file: &str, text: &str) -> Spectrum {
        let table = file::parse_table(text, Path::new(file)).unwrap_or_else(|e| {
            panic!("embedded spectrum {file} is broken (a lightfold bug): {e}")
        });
        Spectrum {
            id: id.to_string(),
            name: name.to_string(),
            provenance: table.provenance,
            wavelength_nm: table.wavelength_nm,
            irradiance_w_m2_nm: table.irradiance_w_m2_nm,
        }
    }

    /// Trapezoid nodes over `[lo, hi]` ∩ range: the band edges (irradiance interpolated)
    /// and the tabulated points strictly between them. Empty if the overlap has no width.
    fn nodes(&self, lo: f64, hi: f64) -> Vec<Node> {
        if lo.is_nan() || hi.is_nan() {
            return Vec::new();
        }
        let (s_lo, s_hi) = self.range_nm();
        let (lo, hi) = (lo.max(s_lo), hi.min(s_hi));
        if lo >= hi {
            return Vec::new();
        }
        let wl = &self.wavelength_nm;
        let first = wl.partition_point(|&w| w <= lo);
        let end = wl.partition_point(|&w| w < hi);

        // Node positions and irradiance: edge, interior tabulated points, edge.
        let mut nodes = Vec::with_capacity(end - first + 2);
        let mut push = |wavelength_nm: f64, irradiance: f64| {
            nodes.push(Node {
                wavelength_nm,
                irradiance,
                weight_nm: 0.0,
            });
        };
        push(lo, self.irradiance_at(lo));
        for (&w, &e) in wl[first..end]
            .iter()
            .zip(&self.irradiance_w_m2_nm[first..end])
        {
            push(w, e);
        }
        push(hi, self.irradiance_at(hi));

        // Trapezoid weights: half of each adjacent interval.
        for i in 0..nodes.len() - 1 {
            let half = 0.5 * (nodes[i + 1].wavelength_nm - nodes[i].wavelength_nm);
            nodes[i].weight_nm += half;
            nodes[i + 1].weight_nm += half;
        }
        nodes
    }
}

/// Linear interpolation of (x, y) at `at`; exact on a tabulated point; `None` outside
/// [x₀, xₙ] or for NaN. `x` strictly increasing, non-empty.
fn interp_linear(x: &[f64], y: &[f64], at: f64) -> Option<f64> {
    let last = x.len() - 1;
    if !(at >= x[0] && at <= x[last]) {
        return None;
    }
    let i = x.partition_point(|&v| v < at);
    if x[i] == at {
        return Some(y[i]);
    }
    // x[i-1] < at < x[i], i ≥ 1 because at > x[0].
    let t = (at - x[i - 1]) / (x[i] - x[i - 1]);
    Some(y[i - 1] + t * (y[i] - y[i - 1]))
}

/// Allowed range of a curve's values.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Bounds {
    /// [0, 1] with FRACTION_TOL_ABS slack.
    Fraction,
    /// ≥ 0.
    NonNegative,
    /// Any finite value.
    Finite,
}

/// Checks a wavelength grid: ≥ 2 points, finite, > 0, strictly increasing.
fn check_grid(what: &str, grid_nm: &[f64]) -> Result<(), SpectrumError> {
    let expected =
        "at least two wavelengths in nm, each finite, > 0 and larger than the one before";
    if grid_nm.len() < 2 {
        return Err(SpectrumError::input(
            what,
            format!("{} wavelength(s) given", grid_nm.len()),
            expected,
            "integrals need a curve over a range: give at least two wavelengths",
        ));
    }
    for (i, &g) in grid_nm.iter().enumerate() {
        if !g.is_finite() || g <= 0.0 {
            return Err(SpectrumError::input(
                what,
                format!("wavelength #{i} is {g} nm"),
                expected,
                "use finite, positive wavelengths in nm",
            ));
        }
        if i > 0 && g <= grid_nm[i - 1] {
            return Err(SpectrumError::input(
                what,
                format!(
                    "wavelength #{i} ({g} nm) does not exceed #{} ({} nm)",
                    i - 1,
                    grid_nm[i - 1]
                ),
                expected,
                "sort the wavelengths and remove duplicates",
            ));
        }
    }
    Ok(())
}

/// Checks a curve on a grid: the grid as in `check_grid`, equal lengths, values in `bounds`.
/// Positions in messages are 0-based indices (`#i`).
fn check_curve(
    what: &str,
    grid_nm: &[f64],
    values: &[f64],
    bounds: Bounds,
) -> Result<(), SpectrumError> {
    check_grid(&format!("{what} wavelengths"), grid_nm)?;
    if values.len() != grid_nm.len() {
        return Err(SpectrumError::input(
            what,
            format!("{} values for {} wavelengths", values.len(), grid_nm.len()),
            "one value per wavelength",
            "pass values and wavelengths of equal length",
        ));
    }
    for (i, (&v, &g)) in values.iter().zip(grid_nm).enumerate() {
        let (ok, expected) = match bounds {
            Bounds::Fraction => (
                v.is_finite() && (-FRACTION_TOL_ABS..=1.0 + FRACTION_TOL_ABS).contains(&v),
                "a fraction in [0, 1]",
            ),
            Bounds::NonNegative => (v.is_finite() && v >= 0.0, "a finite value ≥ 0"),
            Bounds::Finite => (v.is_finite(), "a finite value"),
        };
        if !ok {
            return Err(SpectrumError::input(
                what,
                format!("value #{i} at {g} nm is {v}"),
                expected,
                "check the values at that wavelength",
            ));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    /// A triangle 0 → 2 → 0 W m⁻² nm⁻¹ over 1–3 nm: small enough to integrate by hand.
    fn triangle() -> Spectrum {
        Spectrum::from_points(
            "tri",
            "triangle",
            "",
            vec![1.0, 2.0, 3.0],
            vec![0.0, 2.0, 0.0],
        )
        .unwrap()
    }

    #[test]
    fn builtin_ids_are_case_insensitive() {
        assert!(std::ptr::eq(
            Spectrum::builtin(" AM1.5G ").unwrap(),
            Spectrum::am15g()
        ));
        assert!(std::ptr::eq(
            Spectrum::builtin("am1.5d").unwrap(),
            Spectrum::am15d()
        ));
        assert!(std::ptr::eq(
            Spectrum::builtin("G173-ETR").unwrap(),
            Spectrum::g173_extraterrestrial()
        ));
        for id in BUILTIN_IDS {
            assert_eq!(Spectrum::builtin(id).unwrap().id(), id);
        }
    }

    #[test]
    fn unknown_builtin_lists_the_valid_ids() {
        let msg = Spectrum::builtin("am0").unwrap_err().to_string();
        assert!(msg.contains("`am0`"), "{msg}");
        for id in BUILTIN_IDS {
            assert!(msg.contains(id), "{msg}");
        }
    }

    #[test]
    fn embedded_tables_have_the_g173_layout() {
        // ASTM G173-03 wavelength column: 280–400 nm in 0.5 nm steps, 401–1700 nm in 1 nm
        // steps, then 1702 and 1705 nm, then 1710–4000 nm in 5 nm steps: 2002 rows.
        let layout: Vec<f64> = (0..=240)
            .map(|i| 280.0 + 0.5 * i as f64)
            .chain((401..=1700).map(f64::from))
            .chain([1702.0, 1705.0])
            .chain((0..=458).map(|i| 1710.0 + 5.0 * i as f64))
            .collect();
        assert_eq!(layout.len(), 2002);
        for s in [
            Spectrum::am15g(),
            Spectrum::am15d(),
            Spectrum::g173_extraterrestrial(),
        ] {
            assert_eq!(s.wavelength_nm(), layout.as_slice(), "{}", s.id());
            assert_eq!(s.irradiance_w_m2_nm().len(), 2002);
            assert_eq!(s.range_nm(), (280.0, 4000.0));
            assert!(
                s.provenance().contains("ASTM G173-03"),
                "{}",
                s.provenance()
            );
            assert!(s.provenance().lines().all(|l| l.starts_with('#')));
        }
        assert!(
            Spectrum::g173_extraterrestrial()
                .provenance()
                .contains("NOT the ASTM E490")
        );
    }

    #[test]
    fn interpolation_is_exact_on_points_linear_between_and_zero_outside() {
        let s = Spectrum::am15g();
        // Table rows: 400 nm → 1.1141, 401 nm → 1.1603, 500 nm → 1.5451 W m⁻² nm⁻¹.
        assert_eq!(s.irradiance_at(500.0), 1.5451);
        assert!((s.irradiance_at(400.5) - 0.5 * (1.1141 + 1.1603)).abs() < 1e-15);
        assert!((s.irradiance_at(400.25) - (0.75 * 1.1141 + 0.25 * 1.1603)).abs() < 1e-15);
        assert_eq!(s.irradiance_at(4000.0), 0.0071043);
        assert_eq!(s.irradiance_at(279.999), 0.0);
        assert_eq!(s.irradiance_at(4000.001), 0.0);
        assert_eq!(s.photon_flux_at(5000.0), 0.0);
        assert!(s.irradiance_at(f64::NAN).is_nan());
    }

    #[test]
    fn photon_flux_by_hand_at_500_nm() {
        // hc = 6.626 070 15e-34 J s × 299 792 458 m/s = 1.986 445 857e-25 J m;
        // Φ = E λ/(hc) = 1.5451 W m⁻² nm⁻¹ × 500e-9 m / 1.986 445 857e-25 J m
        //   = 1.5451 × 2.517 058 284e18 = 3.889 106 75e18 photons m⁻² s⁻¹ nm⁻¹.
        let phi = Spectrum::am15g().photon_flux_at(500.0);
        assert!(rel(phi, 3.889_106_75e18) < 1e-8, "Φ = {phi:e}");
    }

    #[test]
    fn band_edges_are_clipped_exactly() {
        let s = triangle();
        // Area of the triangle: ½ × 2 nm × 2 W m⁻² nm⁻¹ = 2 W/m².
        assert!((s.total_irradiance_w_m2((0.0, 10.0)) - 2.0).abs() < 1e-15);
        // 1.5–2.5 nm: trapezoids (1 + 2)/2 × 0.5 twice = 1.5 W/m², exact for linear pieces.
        assert!((s.total_irradiance_w_m2((1.5, 2.5)) - 1.5).abs() < 1e-15);
        // Inside one interval: 1.25–1.75 nm, E = 0.5 → 1.5, area 0.5 W/m².
        assert!((s.total_irradiance_w_m2((1.25, 1.75)) - 0.5).abs() < 1e-15);
        for band in [
            (2.5, 1.5),
            (2.0, 2.0),
            (f64::NAN, 2.0),
            (3.0, 9.0),
            (0.0, 1.0),
        ] {
            assert_eq!(s.total_irradiance_w_m2(band), 0.0, "{band:?}");
            assert_eq!(s.max_photocurrent_ma_cm2(band), 0.0, "{band:?}");
        }
    }

    #[test]
    fn photocurrent_weights_by_hand_on_a_matching_grid() {
        // Flat 1 W m⁻² nm⁻¹ on 500, 600, 700 nm and the same grid: trapezoid weights
        // 50, 100, 50 nm, so g_j = q·w_j·λ_j/(hc)·0.1 mA/cm² per (A/m²).
        let s = Spectrum::from_points("flat", "flat", "", vec![500.0, 600.0, 700.0], vec![1.0; 3])
            .unwrap();
        let grid = [500.0, 600.0, 700.0];
        let g = s.photocurrent_weights_ma_cm2(&grid).unwrap();
        let by_hand = |w_nm: f64, wl_nm: f64| {
            1.602_176_634e-19 * w_nm * wl_nm * 1e-9 / (6.626_070_15e-34 * 299_792_458.0) * 0.1
        };
        for (j, (w, wl)) in [(50.0, 500.0), (100.0, 600.0), (50.0, 700.0)]
            .into_iter()
            .enumerate()
        {
            assert!(rel(g[j], by_hand(w, wl)) < 1e-12, "g[{j}] = {}", g[j]);
        }
    }

    #[test]
    fn photocurrent_is_linear_in_absorptance_and_bounded_by_the_maximum() {
        let s = Spectrum::am15g();
        let grid: Vec<f64> = (0..=90).map(|i| 300.0 + 10.0 * i as f64).collect();
        let ones = vec![1.0; grid.len()];
        let j_max = s.max_photocurrent_ma_cm2((300.0, 1200.0));
        let j_one = s.photocurrent_ma_cm2(&grid, &ones).unwrap();
        assert!(rel(j_one, j_max) < 1e-12, "{j_one} vs {j_max}");
        let half = vec![0.5; grid.len()];
        assert!(rel(s.photocurrent_ma_cm2(&grid, &half).unwrap(), 0.5 * j_max) < 1e-12);

        let a: Vec<f64> = grid.iter().map(|l| 0.5 + 0.4 * (l / 97.0).sin()).collect();
        let j = s.photocurrent_ma_cm2(&grid, &a).unwrap();
        let g = s.photocurrent_weights_ma_cm2(&grid).unwrap();
        let from_weights: f64 = g.iter().zip(&a).map(|(g, a)| g * a).sum();
        assert!(rel(from_weights, j) < 1e-12);
        assert!(rel(g.iter().sum::<f64>(), j_max) < 1e-12);
        assert!(j > 0.0 && j < j_max);
    }

    #[test]
    fn photocurrent_grid_beyond_the_spectrum_adds_nothing() {
        let s = Spectrum::am15g();
        let j = s
            .photocurrent_ma_cm2(&[100.0, 5000.0], &[1.0, 1.0])
            .unwrap();
        assert!(rel(j, s.max_photocurrent_ma_cm2((280.0, 4000.0))) < 1e-12);
        assert_eq!(
            s.photocurrent_ma_cm2(&[5000.0, 6000.0], &[1.0, 1.0])
                .unwrap(),
            0.0
        );
    }

    #[test]
    fn standard_error_propagates_through_the_weights() {
        let s = Spectrum::am15g();
        let grid = [400.0, 700.0, 1000.0];
        let a = [0.9, 0.95, 0.8];
        let g = s.photocurrent_weights_ma_cm2(&grid).unwrap();
        // One uncertain point: SE = g_j·se_j.
        let (j, se) = s
            .photocurrent_with_se(&grid, &a, &[0.0, 0.01, 0.0])
            .unwrap();
        assert!(rel(se, g[1] * 0.01) < 1e-12);
        assert_eq!(j, s.photocurrent_ma_cm2(&grid, &a).unwrap());
        // Independent errors add in quadrature.
        let (_, se_all) = s
            .photocurrent_with_se(&grid, &a, &[0.02, 0.01, 0.03])
            .unwrap();
        let by_hand =
            ((g[0] * 0.02).powi(2) + (g[1] * 0.01).powi(2) + (g[2] * 0.03).powi(2)).sqrt();
        assert!(rel(se_all, by_hand) < 1e-12);
        assert_eq!(s.photocurrent_with_se(&grid, &a, &[0.0; 3]).unwrap().1, 0.0);
    }

    #[test]
    fn curve_errors_say_what_and_where() {
        let s = Spectrum::am15g();
        let cases: [(Result<f64, SpectrumError>, &str); 7] = [
            (s.photocurrent_ma_cm2(&[500.0], &[1.0]), "1 wavelength(s)"),
            (
                s.photocurrent_ma_cm2(&[500.0, 600.0], &[1.0]),
                "1 values for 2 wavelengths",
            ),
            (
                s.photocurrent_ma_cm2(&[600.0, 500.0], &[1.0, 1.0]),
                "#1 (500 nm) does not exceed",
            ),
            (
                s.photocurrent_ma_cm2(&[500.0, 600.0], &[1.0, 1.2]),
                "value #1 at 600 nm is 1.2",
            ),
            (
                s.photocurrent_ma_cm2(&[500.0, 600.0], &[f64::NAN, 1.0]),
                "value #0 at 500 nm is NaN",
            ),
            (
                s.photocurrent_ma_cm2(&[-5.0, 600.0], &[1.0, 1.0]),
                "#0 is -5 nm",
            ),
            (
                s.photocurrent_with_se(&[500.0, 600.0], &[1.0, 1.0], &[0.1, -0.1])
                    .map(|r| r.0),
                "value #1 at 600 nm is -0.1",
            ),
        ];
        for (result, needle) in cases {
            let msg = result.unwrap_err().to_string();
            assert!(msg.contains(needle), "{msg}");
            assert!(msg.contains("expected:") && msg.contains("fix:"), "{msg}");
        }
        // Round-off just outside [0, 1] is accepted.
        assert!(
            s.photocurrent_ma_cm2(&[500.0, 600.0], &[-1e-12, 1.0 + 1e-12])
                .is_ok()
        );
    }

    #[test]
    fn weighted_mean_of_a_constant_is_the_constant_and_band_is_checked() {
        let s = Spectrum::am15g();
        let grid = [300.0, 800.0, 1200.0];
        let m = s
            .photon_weighted_mean(&grid, &[0.07; 3], (300.0, 1200.0))
            .unwrap();
        assert!((m - 0.07).abs() < 1e-15);
        // A step-free ramp lies between its extremes.
        let m = s
            .photon_weighted_mean(&grid, &[0.0, 0.5, 1.0], (300.0, 1200.0))
            .unwrap();
        assert!(m > 0.0 && m < 1.0);
        for band in [
            (250.0, 1200.0),
            (300.0, 1300.0),
            (900.0, 800.0),
            (f64::NAN, 900.0),
        ] {
            let e = s.photon_weighted_mean(&grid, &[0.1; 3], band);
            assert!(
                matches!(e, Err(SpectrumError::Input { .. })),
                "{band:?}: {e:?}"
            );
        }
        let ir = [5000.0, 6000.0];
        let msg = s
            .photon_weighted_mean(&ir, &[0.1; 2], (5000.0, 6000.0))
            .unwrap_err();
        assert!(msg.to_string().contains("no photons"), "{msg}");
    }

    #[test]
    fn filtering_by_unit_transmittance_keeps_the_spectrum() {
        let s = Spectrum::am15g();
        let f = s.filtered(&[280.0, 4000.0], &[1.0, 1.0], "same").unwrap();
        assert_eq!(f.wavelength_nm(), s.wavelength_nm());
        assert_eq!(f.irradiance_w_m2_nm(), s.irradiance_w_m2_nm());
        assert_eq!(f.id(), "same");
        assert!(f.provenance().starts_with(s.provenance()));
        assert!(
            f.provenance()
                .lines()
                .last()
                .unwrap()
                .contains("transmittance")
        );
    }

    #[test]
    fn filtering_clips_to_the_grid_and_scales() {
        let s = Spectrum::am15g();
        let f = s.filtered(&[500.25, 900.0], &[0.5, 0.5], "half").unwrap();
        assert_eq!(f.range_nm(), (500.25, 900.0));
        let want = 0.5 * s.total_irradiance_w_m2((500.25, 900.0));
        assert!(rel(f.total_irradiance_w_m2((0.0, 5000.0)), want) < 1e-12);
        assert!(s.filtered(&[500.0, 900.0], &[0.5, 0.5], " ").is_err());
        assert!(s.filtered(&[5000.0, 9000.0], &[0.5, 0.5], "ir").is_err());
        assert!(s.filtered(&[500.0, 900.0], &[0.5, 1.5], "bad").is_err());
    }

    #[test]
    fn from_points_rejects_bad_spectra() {
        let bad = [
            (vec![500.0], vec![1.0]),
            (vec![500.0, 500.0], vec![1.0, 1.0]),
            (vec![500.0, 600.0], vec![1.0, -1.0]),
            (vec![0.0, 600.0], vec![1.0, 1.0]),
            (vec![500.0, 600.0], vec![1.0, f64::INFINITY]),
        ];
        for (wl, e) in bad {
            assert!(
                Spectrum::from_points("x", "x", "", wl.clone(), e).is_err(),
                "{wl:?}"
            );
        }
    }
}
