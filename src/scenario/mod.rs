//! Scenario files: the TOML schema, read with spans ([`RawScenario`]), validated into a
//! [`Scenario`] that the engine runs without further checks. Every input error lives here.
//!
//! Invariant: a [`Scenario`] is physical and complete: the stack alternates interface, thick
//! layer, …, interface; exactly one thick layer is the absorber; every material has data over
//! the whole wavelength grid; textures fit inside the layers they protrude into; coatings
//! have at most [`crate::tracer::MAX_FILM_LAYERS`] films of positive thickness. Loading never
//! stops at the first problem: [`ScenarioError::Invalid`] lists every problem found, sorted
//! by position, each with file:line:column, what was expected and how to fix it.
//!
//! Frame and thickness (see `docs/scenario.md`): the stack is listed top to bottom, light
//! comes from [`Scenario::above`]. A thick layer's `thickness_um` is the distance between the
//! base planes (z = 0) of the interfaces above and below it; texture features protrude from
//! their base plane into the medium they point to (`features = "up"`: into the medium above),
//! and their volume belongs to the layer on the other side of the base plane.
//!
//! Not here: running a scenario (`simulate`), sweeps over keys (they call [`set_number`]).

mod geometries;
mod keys;
pub mod raw;
mod validate;

pub use geometries::{EMBEDDED_GEOMETRIES, GeometrySource, find_geometry, known_geometries};
pub use keys::{numeric_keys, set_number};
pub use raw::{Entry, Node, RawScenario, RawValue};
pub use validate::{
    DEFAULT_AZIMUTH_BINS, DEFAULT_MAX_RAYS, DEFAULT_POLAR_BINS, DEFAULT_PROFILE_BINS, DEFAULT_RAYS,
    DEFAULT_WAVELENGTHS_NM, DEFAULT_WEIGHTING_BAND_NM, MAX_FILM_THICKNESS_NM,
};

use std::fmt;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use crate::optics::materials::Material;
use crate::spectrum::{Spectrum, WavelengthGrid};
use crate::texture::Texture;
use crate::tracer::{CoatingGeometry, InputPolarisation, PolarisationMode};

/// The embedded demo scenario (`lightfold run` without a file).
pub const DEMO_TOML: &str = include_str!("demo.toml");

/// Name of the embedded demo in messages.
const DEMO_FILE: &str = "<embedded demo>";

/// A validated scenario: what to simulate and how. Plain data; build it with
/// [`Scenario::from_file`], [`Scenario::from_str`] or [`Scenario::demo`].
#[derive(Clone, Debug)]
pub struct Scenario {
    /// Short name for reports (`name`; default: the file stem).
    pub name: String,
    /// Free text (`description`; default empty).
    pub description: String,
    /// The scenario file, if it came from one (`None` for the embedded demo).
    pub source: Option<PathBuf>,
    /// The TOML text as read, for reports and for deriving sweep points.
    pub text: String,
    /// Illumination and wavelengths.
    pub light: Light,
    /// Half-space the light comes from (top of the stack).
    pub above: Medium,
    /// Interfaces and thick layers, top to bottom; alternates interface, layer, …, interface.
    pub stack: Vec<Element>,
    /// Half-space below the last interface (exit medium, e.g. air or a rear metal).
    pub below: Medium,
    /// Index into the thick layers (top to bottom, as [`Scenario::layers`] yields them) of
    /// the absorber whose current, escape loss and generation profile are reported.
    pub absorber: usize,
    /// How to compute.
    pub solver: Solver,
    /// What to write.
    pub output: Output,
}

/// Where the incident spectrum comes from.
#[derive(Clone, Debug)]
pub enum SpectrumSource {
    /// A built-in ASTM G173-03 spectrum (`am1.5g`, `am1.5d`, `g173-etr`).
    Builtin(&'static Spectrum),
    /// A user spectrum file (two columns, see [`Spectrum::from_csv`]).
    File(Arc<Spectrum>),
}

impl SpectrumSource {
    /// The spectrum.
    pub fn get(&self) -> &Spectrum {
        match self {
            SpectrumSource::Builtin(s) => s,
            SpectrumSource::File(s) => s,
        }
    }
}

/// Illumination.
#[derive(Clone, Debug)]
pub struct Light {
    /// Incident spectrum, for photocurrent and weighted averages.
    pub spectrum: SpectrumSource,
    /// Wavelengths simulated, nm.
    pub wavelengths: WavelengthGrid,
    /// Angle of incidence from the macroscopic surface normal, degrees, in [0, 90).
    pub polar_angle_deg: f64,
    /// Azimuth of the incident direction's horizontal component from the texture's x axis,
    /// degrees (any finite value).
    pub azimuth_deg: f64,
    /// Polarisation of the incident light; the angle inside `Linear` is in radians, from the
    /// s direction towards p.
    pub polarisation: InputPolarisation,
    /// Band (lo, hi) in nm over which spectrum-weighted figures (photocurrent, weighted
    /// reflectance) are integrated; inside the simulated wavelengths, lo ≤ hi.
    pub weighting_band_nm: (f64, f64),
}

/// A half-space medium.
#[derive(Clone, Debug)]
pub struct Medium {
    /// Its material (covers every simulated wavelength).
    pub material: Material,
}

/// One entry of the stack.
#[derive(Clone, Debug)]
pub enum Element {
    /// A textured, coated interface between two media.
    Interface(InterfaceSpec),
    /// A thick incoherent layer.
    Layer(LayerSpec),
}

/// Which way a texture's features point.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Features {
    /// As defined in the texture file (z up, towards the medium above).
    Up,
    /// Mirrored in z (towards the medium below).
    Down,
}

/// A textured, coated interface.
#[derive(Clone, Debug)]
pub struct InterfaceSpec {
    /// Unique name in the stack (used in sweep keys, e.g. `stack.front.coating.0.thickness_nm`).
    pub name: String,
    /// The surface, already oriented: wrapped in [`crate::texture::Flipped`] when its
    /// features point down. Base plane at z = 0.
    pub texture: Arc<dyn Texture>,
    /// What the scenario wrote for the texture (geometry name, path, or `inline <kind>`).
    pub texture_label: String,
    /// Orientation applied to the texture.
    pub features: Features,
    /// Thin films on the interface, top to bottom as seen from above (at most
    /// [`crate::tracer::MAX_FILM_LAYERS`]; empty for a bare interface).
    pub coating: Vec<CoatingLayer>,
    /// How film thickness varies over the facets.
    pub coating_geometry: CoatingGeometry,
    /// Cosines of the facet tilts at which the coating is tabulated
    /// ([`crate::texture::coating_tilt_levels`] of the texture's facet tilts for a directional
    /// coating, `[1.0]` otherwise). Found once here: a height map has a tilt per triangle,
    /// and the run builds the coating's tables at every wavelength.
    pub coating_tilt_cos: Vec<f64>,
}

/// One coherent thin film.
#[derive(Clone, Debug)]
pub struct CoatingLayer {
    /// Film material (covers every simulated wavelength).
    pub material: Material,
    /// Thickness, nm, > 0 (along the facet normal for conformal coatings; planar-equivalent
    /// for directional ones).
    pub thickness_nm: f64,
}

/// A thick incoherent layer.
#[derive(Clone, Debug)]
pub struct LayerSpec {
    /// Unique name in the stack (used in sweep keys, e.g. `stack.wafer.thickness_um`).
    pub name: String,
    /// Layer material (covers every simulated wavelength).
    pub material: Material,
    /// Distance between the base planes of the interfaces above and below, µm, > 0 and at
    /// least the depth the two textures protrude into the layer.
    pub thickness_um: f64,
}

/// How the wafer is solved.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Mode {
    /// Rays followed one by one through the whole stack.
    Direct,
    /// Redistribution matrices per interface, combined by the wafer solver.
    Matrix,
}

/// How many rays to trace per wavelength.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum RayBudget {
    /// Exactly this many rays per wavelength (≥ 1).
    Fixed(u64),
    /// Trace until the standard error of reflectance and absorber absorptance is at most
    /// `target_std_error` (absolute, in (0, 0.5)) or `max_rays` (≥ 1) are spent.
    Precision {
        target_std_error: f64,
        max_rays: u64,
    },
}

/// Fewest rays per angle bin and side with which matrix mode traces a textured interface.
pub const MIN_MATRIX_RAYS_PER_BIN: u64 = 2048;
/// Rays per angle bin and side in matrix mode when the budget is a target precision.
pub const MATRIX_RAYS_PER_BIN_FOR_PRECISION: u64 = 4096;

impl RayBudget {
    /// Rays per angle bin (and side) with which matrix mode traces each textured interface:
    /// a fixed budget counts per bin there (at least [`MIN_MATRIX_RAYS_PER_BIN`]); a
    /// precision target uses [`MATRIX_RAYS_PER_BIN_FOR_PRECISION`].
    pub fn matrix_rays_per_bin(self) -> u64 {
        match self {
            RayBudget::Fixed(n) => n.max(MIN_MATRIX_RAYS_PER_BIN),
            RayBudget::Precision { .. } => MATRIX_RAYS_PER_BIN_FOR_PRECISION,
        }
    }
}

/// Solver settings.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Solver {
    /// Direct tracing or matrices.
    pub mode: Mode,
    /// Rays per wavelength.
    pub rays: RayBudget,
    /// Master seed; results are bitwise reproducible for a seed whatever the thread count.
    pub seed: u64,
    /// Worker threads (`None`: all cores).
    pub threads: Option<usize>,
    /// Stokes tracking or the unpolarised approximation.
    pub polarisation: PolarisationMode,
    /// Polar angle bins per hemisphere (equal étendue), matrix mode and angular outputs, ≥ 1.
    pub polar_bins: usize,
    /// Azimuthal bins over the azimuth range left after folding by texture symmetry, ≥ 1.
    pub azimuth_bins: usize,
    /// Depth bins of the generation profile in the absorber, ≥ 1.
    pub profile_bins: usize,
}

/// Which outputs to write.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Output {
    /// Export redistribution matrices (NPY + JSON sidecar).
    pub matrices: bool,
    /// Draw plots.
    pub plots: bool,
}

/// One problem in a scenario (or in a file it refers to).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Problem {
    /// The file the problem is in.
    pub file: PathBuf,
    /// Line, 1-based; 0 when the problem concerns the file as a whole.
    pub line: usize,
    /// Column in characters, 1-based; 0 when unknown.
    pub col: usize,
    /// What is wrong.
    pub problem: String,
    /// What is accepted.
    pub expected: String,
    /// How to fix it.
    pub fix: String,
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match (self.line, self.col) {
            (0, _) => write!(f, "{}: ", self.file.display())?,
            (l, 0) => write!(f, "{}:{l}: ", self.file.display())?,
            (l, c) => write!(f, "{}:{l}:{c}: ", self.file.display())?,
        }
        write!(
            f,
            "{}\n  expected: {}\n  fix: {}",
            self.problem, self.expected, self.fix
        )
    }
}

/// Why a scenario could not be loaded or modified.
#[derive(Debug, thiserror::Error)]
pub enum ScenarioError {
    /// The scenario file could not be read.
    #[error("{}: cannot read scenario: {source}\n  fix: check the path and the file's permissions", file.display())]
    Read {
        /// The file.
        file: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// The scenario has problems (syntax, keys, types, ranges, files, physics): all of them,
    /// sorted by position.
    #[error("{}", render_problems(file, problems))]
    Invalid {
        /// The scenario file.
        file: PathBuf,
        /// Every problem found; never empty.
        problems: Vec<Problem>,
    },
    /// A key path given to [`set_number`] does not name a number in the scenario.
    #[error("key `{key}`: {problem}\n  expected: {expected}\n  fix: {fix}")]
    Key {
        /// The key as given.
        key: String,
        /// What is wrong.
        problem: String,
        /// What is accepted.
        expected: String,
        /// How to fix it.
        fix: String,
    },
}

impl ScenarioError {
    /// The problems listed by an [`ScenarioError::Invalid`] error (empty for other kinds).
    pub fn problems(&self) -> &[Problem] {
        match self {
            ScenarioError::Invalid { problems, .. } => problems,
            _ => &[],
        }
    }
}

fn render_problems(file: &Path, problems: &[Problem]) -> String {
    let mut out = String::new();
    if problems.len() > 1 {
        out += &format!(
            "{}: {} problems, listed by position\n",
            file.display(),
            problems.len()
        );
    }
    for (k, p) in problems.iter().enumerate() {
        if k > 0 {
            out.push('\n');
        }
        out += &p.to_string();
    }
    out
}

impl Scenario {
    /// Reads and validates a scenario file. Relative paths inside it (spectrum, material and
    /// texture files) start at the file's folder; texture names are looked up in the nearest
    /// `geometries/` folder above it, then in the built-in geometries.
    pub fn from_file(path: &Path) -> Result<Scenario, ScenarioError> {
        let text = std::fs::read_to_string(path).map_err(|source| ScenarioError::Read {
            file: path.to_path_buf(),
            source,
        })?;
        Scenario::from_str(&text, path)
    }

    /// Validates scenario text; `origin` is the path it stands for: named in messages, and
    /// its folder anchors relative paths (as for [`Scenario::from_file`]).
    #[allow(clippy::should_implement_trait)] // two arguments: not `FromStr`
    pub fn from_str(text: &str, origin: &Path) -> Result<Scenario, ScenarioError> {
        let base = origin.parent().unwrap_or(Path::new("")).to_path_buf();
        let raw = RawScenario::parse(text, origin, Some(&base))?;
        validate::validate(&raw, Some(origin))
    }

    /// The embedded demo (`src/scenario/demo.toml`): a 160 µm n-type wafer with alkaline
    /// random pyramids on both faces, PECVD SiNx front, SiO2/Ag rear, under AM1.5G. It uses
    /// built-in data only.
    pub fn demo() -> Scenario {
        let raw = RawScenario::parse(DEMO_TOML, Path::new(DEMO_FILE), None)
            .unwrap_or_else(|e| panic!("the embedded demo scenario is corrupt: {e}"));
        validate::validate(&raw, None)
            .unwrap_or_else(|e| panic!("the embedded demo scenario is invalid: {e}"))
    }

    /// The same scenario with the number at `key` set to `value` (see [`set_number`]),
    /// validated again.
    pub fn with_number(&self, key: &str, value: f64) -> Result<Scenario, ScenarioError> {
        match &self.source {
            Some(origin) => {
                let base = origin.parent().unwrap_or(Path::new(""));
                let text = set_number(&self.text, Some(base), key, value)?;
                Scenario::from_str(&text, origin)
            }
            None => {
                let text = set_number(&self.text, None, key, value)?;
                let raw = RawScenario::parse(&text, Path::new(DEMO_FILE), None)?;
                validate::validate(&raw, None)
            }
        }
    }

    /// The interfaces, top to bottom.
    pub fn interfaces(&self) -> impl Iterator<Item = &InterfaceSpec> {
        self.stack.iter().filter_map(|e| match e {
            Element::Interface(i) => Some(i),
            Element::Layer(_) => None,
        })
    }

    /// The thick layers, top to bottom.
    pub fn layers(&self) -> impl Iterator<Item = &LayerSpec> {
        self.stack.iter().filter_map(|e| match e {
            Element::Layer(l) => Some(l),
            Element::Interface(_) => None,
        })
    }

    /// The absorber layer.
    pub fn absorber_layer(&self) -> &LayerSpec {
        self.layers()
            .nth(self.absorber)
            .expect("validated scenario: the absorber names a thick layer")
    }

    /// A short multi-line description of the stack and settings, for `lightfold check` and
    /// report headers.
    pub fn summary(&self) -> String {
        summary::text(self)
    }

    /// The same summary as JSON.
    pub fn summary_json(&self) -> serde_json::Value {
        summary::json(self)
    }
}

mod summary;
