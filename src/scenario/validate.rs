//! RawScenario → Scenario: every key, type, range, file and physical rule is checked here, and
//! every problem is collected (never stopping at the first) before the result is returned.

use std::path::Path;
use std::sync::Arc;

use super::geometries::{self, GeometrySource};
use super::raw::{Entry, RawScenario, RawValue, Span, find};
use super::{
    CoatingLayer, Element, Features, InterfaceSpec, LayerSpec, Light, Medium, Mode, Output,
    Problem, RayBudget, Scenario, ScenarioError, Solver, SpectrumSource,
};
use crate::optics::materials::{self, Material, MaterialError};
use crate::spectrum::{BUILTIN_IDS, Spectrum, SpectrumError, WavelengthGrid};
use crate::texture::file::did_you_mean;
use crate::texture::{Flipped, RawEntry, RawTexture, Symmetry, Texture, TextureError};
use crate::tracer::{CoatingGeometry, InputPolarisation, MAX_FILM_LAYERS, PolarisationMode};

/// Wavelength grid when `[light] wavelengths_nm` is absent: 300–1200 nm in 10 nm steps.
pub const DEFAULT_WAVELENGTHS_NM: &str = "300:1200:10";
/// Weighting band when absent, nm (clipped to the simulated wavelengths): the band where
/// silicon cells convert light (common practice, no source).
pub const DEFAULT_WEIGHTING_BAND_NM: (f64, f64) = (300.0, 1200.0);
/// Rays per wavelength when neither `rays` nor `target_std_error` is given.
pub const DEFAULT_RAYS: u64 = 10_000;
/// Ray cap per wavelength for `target_std_error` when `max_rays` is absent.
pub const DEFAULT_MAX_RAYS: u64 = 1_000_000;
/// Polar bins per hemisphere when absent.
pub const DEFAULT_POLAR_BINS: usize = 30;
/// Azimuthal bins when absent and some texture is not rotationally symmetric (1 otherwise).
pub const DEFAULT_AZIMUTH_BINS: usize = 8;
/// Generation-profile depth bins when absent.
pub const DEFAULT_PROFILE_BINS: usize = 100;
/// Thickest coherent film accepted, nm. Sunlight's coherence length is about a micrometre,
/// so thicker layers are incoherent and belong in the stack as thick layers (common
/// practice, no source).
pub const MAX_FILM_THICKNESS_NM: f64 = 10_000.0;

pub(crate) const TOP_KEYS: &[&str] = &[
    "name",
    "description",
    "light",
    "above",
    "below",
    "stack",
    "solver",
    "output",
];
pub(crate) const LIGHT_KEYS: &[&str] = &[
    "spectrum",
    "wavelengths_nm",
    "polar_angle_deg",
    "azimuth_deg",
    "polarisation",
    "weighting_band_nm",
];
pub(crate) const MEDIUM_KEYS: &[&str] = &["material"];
pub(crate) const INTERFACE_KEYS: &[&str] = &[
    "kind",
    "name",
    "texture",
    "coating",
    "coating_geometry",
    "features",
];
pub(crate) const LAYER_KEYS: &[&str] = &["kind", "name", "material", "thickness_um", "absorber"];
pub(crate) const COATING_KEYS: &[&str] = &["material", "thickness_nm"];
pub(crate) const SOLVER_KEYS: &[&str] = &[
    "mode",
    "rays",
    "target_std_error",
    "max_rays",
    "seed",
    "threads",
    "polarisation",
    "polar_bins",
    "azimuth_bins",
    "profile_bins",
];
pub(crate) const OUTPUT_KEYS: &[&str] = &["matrices", "plots"];

/// Most rays per wavelength accepted (a typo guard: 10¹² rays is days of work).
const MAX_RAYS: i64 = 1_000_000_000_000;

/// The kind of a stack element.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Kind {
    Interface,
    Layer,
}

/// Element names when `name` is absent: `front` for a first interface, `rear` for a last
/// one, `interface-<k>` and `layer-<k>` (k counted from 1 among elements of that kind)
/// otherwise. `kinds[i]` is `None` when element i has no usable kind.
pub(crate) fn default_names(kinds: &[Option<Kind>]) -> Vec<String> {
    let (mut n_if, mut n_layer) = (0, 0);
    let last = kinds.len().saturating_sub(1);
    kinds
        .iter()
        .enumerate()
        .map(|(i, k)| match k {
            Some(Kind::Interface) => {
                n_if += 1;
                if i == 0 {
                    "front".to_string()
                } else if i == last {
                    "rear".to_string()
                } else {
                    format!("interface-{n_if}")
                }
            }
            Some(Kind::Layer) => {
                n_layer += 1;
                format!("layer-{n_layer}")
            }
            None => format!("element-{}", i + 1),
        })
        .collect()
}

/// The kind an element table declares, if it is a valid one.
pub(crate) fn kind_of(table: &[Entry]) -> Option<Kind> {
    match &find(table, "kind")?.node.value {
        RawValue::String(s) if s == "interface" => Some(Kind::Interface),
        RawValue::String(s) if s == "layer" => Some(Kind::Layer),
        _ => None,
    }
}

/// Names of the stack elements, as the validator assigns them (explicit or default).
pub(crate) fn element_names(stack: &[&[Entry]]) -> Vec<String> {
    let kinds: Vec<Option<Kind>> = stack.iter().map(|t| kind_of(t)).collect();
    let defaults = default_names(&kinds);
    stack
        .iter()
        .zip(defaults)
        .map(|(t, d)| match find(t, "name").map(|e| &e.node.value) {
            Some(RawValue::String(s)) => s.clone(),
            _ => d,
        })
        .collect()
}

/// Whether a material id names crystalline silicon (the default absorber): `si` or `si-…`.
fn is_silicon(m: &Material) -> bool {
    let id = m.id().to_ascii_lowercase();
    id == "si" || id.starts_with("si-")
}

/// Whether a material text is a file path (as [`materials::resolve`] decides).
fn material_is_path(text: &str) -> bool {
    text.contains('/') || text.contains('\\') || text.to_ascii_lowercase().ends_with(".csv")
}

fn join(list: &[&str]) -> String {
    list.join(", ")
}

fn quoted(list: &[&str]) -> String {
    list.iter()
        .map(|s| format!("\"{s}\""))
        .collect::<Vec<_>>()
        .join(", ")
}

/// A stack element as parsed, before the checks that involve its neighbours.
struct Elem {
    span: Span,
    kind: Option<Kind>,
    kind_span: Option<Span>,
    name: String,
    name_span: Option<Span>,
    iface: Option<IfaceParts>,
    layer: Option<LayerParts>,
}

struct IfaceParts {
    texture: Option<(Arc<dyn Texture>, String)>,
    coating: Option<Vec<CoatingLayer>>,
    geometry: Option<CoatingGeometry>,
    /// `None`: bad value (reported); `Some(None)`: not given.
    features: Option<Option<Features>>,
}

struct LayerParts {
    material: Option<Material>,
    thickness_um: Option<f64>,
    thickness_span: Option<Span>,
    /// `None`: bad value (reported); `Some(None)`: not given.
    absorber: Option<Option<bool>>,
    absorber_span: Option<Span>,
}

struct Checker<'a> {
    raw: &'a RawScenario,
    /// (position of the anchor in the scenario, insertion order, problem).
    problems: Vec<((usize, usize), usize, Problem)>,
    /// Built textures by resolved file (front and rear often share one).
    textures: Vec<(String, Arc<dyn Texture>)>,
    /// Materials used: (material, value span, where).
    materials: Vec<(Material, Span, String)>,
}

impl<'a> Checker<'a> {
    fn new(raw: &'a RawScenario) -> Self {
        Checker {
            raw,
            problems: Vec::new(),
            textures: Vec::new(),
            materials: Vec::new(),
        }
    }

    fn pos(&self, span: Option<&Span>) -> (usize, usize) {
        span.map_or((0, 0), |s| self.raw.line_col(s.start))
    }

    /// A problem at a position of the scenario (`None`: the file as a whole).
    fn at(
        &mut self,
        span: Option<&Span>,
        problem: impl Into<String>,
        expected: impl Into<String>,
        fix: impl Into<String>,
    ) {
        let (line, col) = self.pos(span);
        let p = Problem {
            file: self.raw.file.clone(),
            line,
            col,
            problem: problem.into(),
            expected: expected.into(),
            fix: fix.into(),
        };
        self.push((line, col), p);
    }

    /// A problem in another file (texture, spectrum, material), listed where the scenario
    /// refers to it.
    fn elsewhere(&mut self, anchor: Option<&Span>, p: Problem) {
        let key = self.pos(anchor);
        self.push(key, p);
    }

    fn push(&mut self, key: (usize, usize), p: Problem) {
        let n = self.problems.len();
        self.problems.push((key, n, p));
    }

    fn finish(mut self) -> Vec<Problem> {
        self.problems.sort_by_key(|(k, n, _)| (*k, *n));
        let mut out: Vec<Problem> = Vec::new();
        for (_, _, p) in self.problems {
            if !out.contains(&p) {
                out.push(p);
            }
        }
        out
    }

    // ---- keys and types ----

    fn check_keys(
        &mut self,
        table: &[Entry],
        allowed: &[&str],
        ctx: &str,
        hint: &dyn Fn(&str) -> Option<String>,
    ) {
        for e in table {
            if allowed.contains(&e.key.as_str()) {
                continue;
            }
            let fix = match did_you_mean(&e.key, allowed) {
                Some(s) => format!("did you mean `{s}`?"),
                None => {
                    hint(&e.key).unwrap_or_else(|| "remove the key or check its spelling".into())
                }
            };
            self.at(
                Some(&e.key_span),
                format!("unknown key `{}` in {ctx}", e.key),
                format!("one of {}", join(allowed)),
                fix,
            );
        }
    }

    fn wrong_type(&mut self, e: &Entry, ctx: &str, expected: &str, example: &str) {
        self.at(
            Some(&e.node.span),
            format!("`{}` in {ctx} is a {}", e.key, e.node.value.type_name()),
            expected.to_string(),
            format!("write e.g. `{example}`"),
        );
    }

    fn string(&mut self, e: &'a Entry, ctx: &str, example: &str) -> Option<String> {
        match &e.node.value {
            RawValue::String(s) => Some(s.clone()),
            _ => {
                self.wrong_type(e, ctx, "a string in double quotes", example);
                None
            }
        }
    }

    /// A finite number (integer or float).
    fn number(&mut self, e: &'a Entry, ctx: &str, expected: &str, example: &str) -> Option<f64> {
        match e.node.value {
            RawValue::Integer(v) => Some(v as f64),
            RawValue::Float(v) if v.is_finite() => Some(v),
            RawValue::Float(v) => {
                self.at(
                    Some(&e.node.span),
                    format!("`{}` in {ctx} = {v} is not a finite number", e.key),
                    expected.to_string(),
                    format!("write e.g. `{example}`"),
                );
                None
            }
            _ => {
                self.wrong_type(e, ctx, expected, example);
                None
            }
        }
    }

    /// A number in an interval; `lo_open`/`hi_open` say whether the ends are excluded.
    #[allow(clippy::too_many_arguments)]
    fn ranged(
        &mut self,
        e: &'a Entry,
        ctx: &str,
        (lo, lo_open): (f64, bool),
        (hi, hi_open): (f64, bool),
        expected: &str,
        example: &str,
        fix: &str,
    ) -> Option<f64> {
        let v = self.number(e, ctx, expected, example)?;
        let above_lo = if lo_open { v > lo } else { v >= lo };
        let below_hi = if hi_open { v < hi } else { v <= hi };
        if above_lo && below_hi {
            Some(v)
        } else {
            self.at(
                Some(&e.node.span),
                format!("`{}` in {ctx} = {v} is out of range", e.key),
                expected.to_string(),
                fix.to_string(),
            );
            None
        }
    }

    fn whole(
        &mut self,
        e: &'a Entry,
        ctx: &str,
        (lo, hi): (i64, i64),
        expected: &str,
        example: &str,
    ) -> Option<i64> {
        match e.node.value {
            RawValue::Integer(v) if (lo..=hi).contains(&v) => Some(v),
            RawValue::Integer(v) => {
                self.at(
                    Some(&e.node.span),
                    format!("`{}` in {ctx} = {v} is out of range", e.key),
                    expected.to_string(),
                    format!("give a whole number from {lo} to {hi}, e.g. `{example}`"),
                );
                None
            }
            RawValue::Float(v) => {
                self.at(
                    Some(&e.node.span),
                    format!("`{}` in {ctx} = {v} is not a whole number", e.key),
                    expected.to_string(),
                    format!("write it without a decimal point, e.g. `{example}`"),
                );
                None
            }
            _ => {
                self.wrong_type(e, ctx, expected, example);
                None
            }
        }
    }

    fn boolean(&mut self, e: &'a Entry, ctx: &str) -> Option<bool> {
        match e.node.value {
            RawValue::Boolean(b) => Some(b),
            _ => {
                let key = e.key.clone();
                self.wrong_type(
                    e,
                    ctx,
                    "true or false (no quotes)",
                    &format!("{key} = true"),
                );
                None
            }
        }
    }

    /// A string from a fixed set (`aliases` map extra spellings to members).
    fn choice(
        &mut self,
        e: &'a Entry,
        ctx: &str,
        options: &[&str],
        aliases: &[(&str, &str)],
    ) -> Option<String> {
        let example = format!("{} = \"{}\"", e.key, options[0]);
        let s = self.string(e, ctx, &example)?;
        if options.contains(&s.as_str()) {
            return Some(s);
        }
        if let Some((_, to)) = aliases.iter().find(|(a, _)| *a == s) {
            return Some(to.to_string());
        }
        let fix = match did_you_mean(&s, options) {
            Some(m) => format!("did you mean \"{m}\"?"),
            None => format!("use one of {}", quoted(options)),
        };
        self.at(
            Some(&e.node.span),
            format!("`{}` in {ctx} = \"{s}\" is not a known value", e.key),
            format!("one of {}", quoted(options)),
            fix,
        );
        None
    }

    /// An optional key: `default` when absent, `parse` otherwise (`None`: problem reported).
    fn opt<T>(
        &mut self,
        table: &'a [Entry],
        key: &str,
        default: T,
        parse: impl FnOnce(&mut Self, &'a Entry) -> Option<T>,
    ) -> Option<T> {
        match find(table, key) {
            None => Some(default),
            Some(e) => parse(self, e),
        }
    }

    /// A required key; a missing one is reported at `anchor` (the table's position).
    fn req<T>(
        &mut self,
        table: &'a [Entry],
        key: &str,
        anchor: Option<&Span>,
        ctx: &str,
        (expected, example): (&str, &str),
        parse: impl FnOnce(&mut Self, &'a Entry) -> Option<T>,
    ) -> Option<T> {
        match find(table, key) {
            Some(e) => parse(self, e),
            None => {
                self.at(
                    anchor,
                    format!("missing key `{key}` in {ctx}"),
                    expected.to_string(),
                    format!("add `{example}`"),
                );
                None
            }
        }
    }

    /// A top-level section: its entries and position (empty when absent or not a table).
    fn section(&mut self, key: &str, example: &str) -> (&'a [Entry], Option<Span>) {
        let root: &'a [Entry] = &self.raw.root;
        match find(root, key) {
            None => (&[], None),
            Some(e) => match &e.node.value {
                RawValue::Table(t) => (t, Some(e.node.span.clone())),
                _ => {
                    self.wrong_type(e, "the scenario", &format!("a table [{key}]"), example);
                    (&[], None)
                }
            },
        }
    }

    // ---- materials, spectra, textures ----

    fn material(&mut self, e: &'a Entry, ctx: &str, role: &str) -> Option<Material> {
        let text = self.string(e, ctx, &format!("{} = \"si\"", e.key))?;
        let resolved = if material_is_path(&text) {
            match &self.raw.base {
                Some(base) => materials::resolve(&base.join(&text).to_string_lossy()),
                None => materials::resolve(&text),
            }
        } else {
            materials::resolve(&text)
        };
        let span = e.node.span.clone();
        match resolved {
            Ok(m) => {
                self.materials.push((m.clone(), span, role.to_string()));
                Some(m)
            }
            Err(err) => {
                self.material_error(&span, &text, err);
                None
            }
        }
    }

    fn material_error(&mut self, span: &Span, text: &str, err: MaterialError) {
        let expected = "a library id or alias (`lightfold materials` lists them), a CSV file \
                        `wavelength_nm,n,k` (a path containing `/` or ending in `.csv`, relative \
                        to this scenario's folder), or a constant index such as `1.5` or \
                        `2.05+0.001i`";
        match err {
            MaterialError::Unknown { suggestions, .. } => {
                let fix = if suggestions.is_empty() {
                    "run `lightfold materials` to list the library".to_string()
                } else {
                    let q: Vec<String> = suggestions.iter().map(|s| format!("`{s}`")).collect();
                    format!("did you mean {}?", q.join(" or "))
                };
                self.at(
                    Some(span),
                    format!("unknown material `{text}`"),
                    expected,
                    fix,
                );
            }
            MaterialError::BadFile {
                path,
                line,
                problem,
                expected,
                fix,
            } => {
                let p = Problem {
                    file: path,
                    line,
                    col: 0,
                    problem: format!("material file: {problem}"),
                    expected,
                    fix,
                };
                self.elsewhere(Some(span), p);
            }
            MaterialError::Read { path, source } => self.at(
                Some(span),
                format!("cannot read material file `{}`: {source}", path.display()),
                expected,
                "check the path; relative paths start at the scenario's folder",
            ),
            other => self.at(
                Some(span),
                format!("material `{text}`: {}", first_line(&other.to_string())),
                expected,
                "correct the material",
            ),
        }
    }

    fn spectrum(&mut self, e: &'a Entry) -> Option<SpectrumSource> {
        let text = self.string(e, "[light]", "spectrum = \"am1.5g\"")?;
        if let Ok(s) = Spectrum::builtin(&text) {
            return Some(SpectrumSource::Builtin(s));
        }
        let span = e.node.span.clone();
        let expected = format!(
            "a built-in spectrum ({}) or a two-column CSV file `wavelength_nm,irradiance_W_m2_nm` \
             (path ending in `.csv` or containing `/`, relative to this scenario's folder)",
            quoted(&BUILTIN_IDS)
        );
        if !material_is_path(&text) {
            let fix = match did_you_mean(&text.to_ascii_lowercase(), &BUILTIN_IDS) {
                Some(m) => format!("did you mean \"{m}\"?"),
                None => "use a built-in id, or a file path ending in `.csv`".into(),
            };
            self.at(
                Some(&span),
                format!("unknown spectrum \"{text}\""),
                expected,
                fix,
            );
            return None;
        }
        let path = match &self.raw.base {
            Some(base) => base.join(&text),
            None => Path::new(&text).to_path_buf(),
        };
        match Spectrum::from_csv(&path) {
            Ok(s) => Some(SpectrumSource::File(Arc::new(s))),
            Err(SpectrumError::Read { file, source }) => {
                self.at(
                    Some(&span),
                    format!("cannot read spectrum file `{}`: {source}", file.display()),
                    expected,
                    "check the path; relative paths start at the scenario's folder",
                );
                None
            }
            Err(SpectrumError::File {
                file,
                line,
                problem,
                expected,
                fix,
            }) => {
                let p = Problem {
                    file,
                    line,
                    col: 0,
                    problem: format!("spectrum file: {problem}"),
                    expected,
                    fix,
                };
                self.elsewhere(Some(&span), p);
                None
            }
            Err(other) => {
                self.at(
                    Some(&span),
                    format!(
                        "spectrum file `{}`: {}",
                        path.display(),
                        first_line(&other.to_string())
                    ),
                    expected,
                    "correct the file",
                );
                None
            }
        }
    }

    fn wavelengths(&mut self, e: &'a Entry) -> Option<WavelengthGrid> {
        let grid = match &e.node.value {
            RawValue::String(s) => WavelengthGrid::parse(s),
            RawValue::Integer(_) | RawValue::Float(_) => {
                let v = self.number(e, "[light]", "", "")?;
                WavelengthGrid::list(vec![v])
            }
            RawValue::Array(items) => {
                let mut values = Vec::with_capacity(items.len());
                for (i, n) in items.iter().enumerate() {
                    match n.value {
                        RawValue::Integer(v) => values.push(v as f64),
                        RawValue::Float(v) => values.push(v),
                        _ => {
                            self.at(
                                Some(&n.span),
                                format!(
                                    "value {} of `wavelengths_nm` is a {}",
                                    i + 1,
                                    n.value.type_name()
                                ),
                                "wavelengths in nm as plain numbers",
                                "write e.g. `wavelengths_nm = [500, 600, 700]`",
                            );
                            return None;
                        }
                    }
                }
                WavelengthGrid::list(values)
            }
            _ => {
                self.wrong_type(
                    e,
                    "[light]",
                    "a range \"start:stop:step\" in nm or an array of wavelengths in nm",
                    "wavelengths_nm = \"300:1200:10\"",
                );
                return None;
            }
        };
        match grid {
            Ok(g) => Some(g),
            Err(SpectrumError::Grid {
                input,
                problem,
                expected,
                fix,
            }) => {
                self.at(
                    Some(&e.node.span),
                    format!("`wavelengths_nm` {input}: {problem}"),
                    expected,
                    fix,
                );
                None
            }
            Err(other) => {
                self.at(
                    Some(&e.node.span),
                    format!("`wavelengths_nm`: {}", first_line(&other.to_string())),
                    "wavelengths in nm, > 0, strictly increasing",
                    "correct the list",
                );
                None
            }
        }
    }

    /// A texture reference or table → the built texture (unoriented) and its label.
    fn texture(&mut self, e: &'a Entry, ctx: &str) -> Option<(Arc<dyn Texture>, String)> {
        let span = e.node.span.clone();
        match &e.node.value {
            RawValue::String(reference) => {
                let (key, built) = if geometries::is_path(reference) {
                    let Some(base) = self.raw.base.clone() else {
                        self.at(
                            Some(&span),
                            format!("texture file `{reference}` in a built-in scenario"),
                            "built-in scenarios use built-in geometries only",
                            "use a geometry name such as \"random-pyramids-3um\"",
                        );
                        return None;
                    };
                    let path = base.join(reference);
                    let key = path.to_string_lossy().into_owned();
                    if let Some(t) = self.cached(&key) {
                        return Some((t, reference.clone()));
                    }
                    (key, crate::texture::from_file(&path))
                } else {
                    match geometries::find_geometry(reference, self.raw.base.as_deref()) {
                        Ok(GeometrySource::File(path)) => {
                            let key = path.to_string_lossy().into_owned();
                            if let Some(t) = self.cached(&key) {
                                return Some((t, reference.clone()));
                            }
                            (key, crate::texture::from_file(&path))
                        }
                        Ok(GeometrySource::Embedded(name, text)) => {
                            let key = format!("<built-in>/{name}");
                            if let Some(t) = self.cached(&key) {
                                return Some((t, reference.clone()));
                            }
                            let file =
                                Path::new("<built-in geometries>").join(format!("{name}.toml"));
                            (key, crate::texture::from_toml_str(text, &file))
                        }
                        Err(known) => {
                            let names: Vec<&str> = known.iter().map(String::as_str).collect();
                            let fix = match did_you_mean(reference, &names) {
                                Some(m) => format!("did you mean \"{m}\"?"),
                                None => "give a texture file path (ending in .toml, relative to \
                                         this scenario) or an inline table such as \
                                         `texture = { kind = \"planar\" }`"
                                    .into(),
                            };
                            self.at(
                                Some(&span),
                                format!(
                                    "no geometry named \"{reference}\" in the project's \
                                     geometries/ folders or the built-in geometries"
                                ),
                                format!("one of {}", quoted(&names)),
                                fix,
                            );
                            return None;
                        }
                    }
                };
                match built {
                    Ok(t) => {
                        let t: Arc<dyn Texture> = Arc::from(t);
                        self.textures.push((key, t.clone()));
                        Some((t, reference.clone()))
                    }
                    Err(err) => {
                        self.texture_error(&span, err, false);
                        None
                    }
                }
            }
            RawValue::Table(entries) => {
                let raw = RawTexture {
                    entries: entries
                        .iter()
                        .map(|x| RawEntry {
                            key: x.key.clone(),
                            key_span: Some(x.key_span.clone()),
                            value: x.node.value.to_toml(),
                            value_span: Some(x.node.span.clone()),
                        })
                        .collect(),
                };
                let kind = match find(entries, "kind").map(|k| &k.node.value) {
                    Some(RawValue::String(s)) => s.clone(),
                    _ => "texture".into(),
                };
                let file = self.raw.file.clone();
                match raw.build(&file, Some(&self.raw.text)) {
                    Ok(t) => Some((Arc::from(t), format!("inline {kind}"))),
                    Err(err) => {
                        self.texture_error(&span, err, true);
                        None
                    }
                }
            }
            _ => {
                self.wrong_type(
                    e,
                    ctx,
                    "a geometry name, a texture file path, or a texture table",
                    "texture = \"random-pyramids-3um\"",
                );
                None
            }
        }
    }

    fn cached(&self, key: &str) -> Option<Arc<dyn Texture>> {
        self.textures
            .iter()
            .find(|(k, _)| k == key)
            .map(|(_, t)| t.clone())
    }

    /// Texture problems: inline ones are positions in the scenario (line 0: at the texture's
    /// table); file ones stay in their file, listed where the scenario names the file.
    fn texture_error(&mut self, span: &Span, err: TextureError, inline: bool) {
        match err {
            TextureError::Invalid { file, problems } => {
                for p in problems {
                    if inline {
                        if p.line == 0 {
                            self.at(
                                Some(span),
                                format!("texture: {}", p.problem),
                                p.expected,
                                p.fix,
                            );
                        } else {
                            let q = Problem {
                                file: self.raw.file.clone(),
                                line: p.line,
                                col: p.col,
                                problem: format!("texture: {}", p.problem),
                                expected: p.expected,
                                fix: p.fix,
                            };
                            self.push((p.line, p.col), q);
                        }
                    } else {
                        let q = Problem {
                            file: file.clone(),
                            line: p.line,
                            col: p.col,
                            problem: format!("texture file: {}", p.problem),
                            expected: p.expected,
                            fix: p.fix,
                        };
                        self.elsewhere(Some(span), q);
                    }
                }
            }
            TextureError::Syntax {
                file,
                line,
                col,
                message,
            } => {
                let q = Problem {
                    file,
                    line,
                    col,
                    problem: format!("texture file is not valid TOML: {message}"),
                    expected: "a texture table in TOML (see geometries/ for examples)".into(),
                    fix: "correct the syntax at that position".into(),
                };
                self.elsewhere(Some(span), q);
            }
            TextureError::Read { file, source } => self.at(
                Some(span),
                format!("cannot read texture file `{}`: {source}", file.display()),
                "an existing texture file; relative paths start at the scenario's folder",
                "check the path, or use a geometry name such as \"random-pyramids-3um\"",
            ),
            TextureError::Image {
                file,
                problem,
                expected,
                fix,
            } => self.at(
                Some(span),
                format!("height-map image `{}`: {problem}", file.display()),
                expected,
                fix,
            ),
            TextureError::Parameter {
                problem,
                expected,
                fix,
            } => self.at(Some(span), format!("texture: {problem}"), expected, fix),
        }
    }
}

fn first_line(s: &str) -> String {
    s.lines().next().unwrap_or("").to_string()
}

/// Validates a parsed scenario; `source` becomes [`Scenario::source`].
pub(crate) fn validate(
    raw: &RawScenario,
    source: Option<&Path>,
) -> Result<Scenario, ScenarioError> {
    let mut ck = Checker::new(raw);
    let root: &[Entry] = &raw.root;
    let no_hint = |_: &str| None;
    ck.check_keys(root, TOP_KEYS, "the top level", &no_hint);

    // Name and description
    let stem = raw.file.file_stem().map_or_else(
        || "scenario".to_string(),
        |s| s.to_string_lossy().into_owned(),
    );
    let name = ck.opt(root, "name", stem, |c, e| {
        c.string(e, "the top level", "name = \"pilot-line-a\"")
    });
    let description = ck.opt(root, "description", String::new(), |c, e| {
        c.string(e, "the top level", "description = \"...\"")
    });

    let (light, grid, input_pol) = light(&mut ck);
    let above = medium(&mut ck, "above");
    let below = medium(&mut ck, "below");
    let stack = stack(&mut ck);
    let isotropic = stack.as_ref().is_some_and(|(elements, _)| {
        elements.iter().all(|e| match e {
            Element::Interface(i) => i.texture.symmetry() == Symmetry::Isotropic,
            Element::Layer(_) => true,
        })
    });
    let (solver, solver_pol) = solver(&mut ck, isotropic);
    let output = output(&mut ck);

    // Light polarisation needs Stokes tracking.
    if let (Some(pol), Some((mode, span))) = (input_pol, &solver_pol)
        && pol != InputPolarisation::Unpolarised
        && *mode == PolarisationMode::Unpolarised
    {
        ck.at(
            Some(span),
            "`polarisation` in [solver] = \"unpolarised\" discards the polarised light set \
                 in [light]",
            "solver polarisation \"stokes\" when [light] polarisation is \"s\", \"p\" or \
                 { linear_deg = … }",
            "set `polarisation = \"stokes\"` in [solver], or unpolarised light in [light]",
        );
    }

    // Every material over the whole wavelength grid.
    if let Some(grid) = &grid {
        check_material_ranges(&mut ck, grid);
        if let Some(m) = &above {
            check_transparent_above(&mut ck, m, grid);
        }
    }

    let problems = ck.finish();
    match (
        name,
        description,
        light,
        above,
        below,
        stack,
        solver,
        output,
    ) {
        (
            Some(name),
            Some(description),
            Some(light),
            Some(above),
            Some(below),
            Some((stack, absorber)),
            Some(solver),
            Some(output),
        ) if problems.is_empty() => Ok(Scenario {
            name,
            description,
            source: source.map(Path::to_path_buf),
            text: raw.text.clone(),
            light,
            above,
            stack,
            below,
            absorber,
            solver,
            output,
        }),
        _ => {
            let problems = if problems.is_empty() {
                // Every failed part reports a problem; this is a guard against a silent failure.
                vec![Problem {
                    file: raw.file.clone(),
                    line: 0,
                    col: 0,
                    problem: "the scenario could not be validated".into(),
                    expected: "a scenario as described in docs/scenario.md".into(),
                    fix: "please report this as a bug in lightfold".into(),
                }]
            } else {
                problems
            };
            Err(ScenarioError::Invalid {
                file: raw.file.clone(),
                problems,
            })
        }
    }
}

/// The light, plus its grid and polarisation on their own (checked against the rest even
/// when another light key is wrong).
fn light(
    ck: &mut Checker<'_>,
) -> (
    Option<Light>,
    Option<WavelengthGrid>,
    Option<InputPolarisation>,
) {
    let (t, _anchor) = ck.section("light", "[light]");
    let ctx = "[light]";
    ck.check_keys(t, LIGHT_KEYS, ctx, &|_| None);
    let spectrum = match find(t, "spectrum") {
        None => Some(SpectrumSource::Builtin(Spectrum::am15g())),
        Some(e) => ck.spectrum(e),
    };
    let grid = match find(t, "wavelengths_nm") {
        None => Some(WavelengthGrid::parse(DEFAULT_WAVELENGTHS_NM).expect("default grid is valid")),
        Some(e) => ck.wavelengths(e),
    };
    let polar = ck.opt(t, "polar_angle_deg", 0.0, |c, e| {
        c.ranged(
            e,
            ctx,
            (0.0, false),
            (90.0, true),
            "an angle of incidence from the surface normal, 0 ≤ θ < 90°",
            "polar_angle_deg = 8",
            "give an angle from 0 (normal incidence) to just below 90",
        )
    });
    let azimuth = ck.opt(t, "azimuth_deg", 0.0, |c, e| {
        c.number(e, ctx, "an azimuth in degrees", "azimuth_deg = 45")
    });
    let polarisation = ck.opt(t, "polarisation", InputPolarisation::Unpolarised, |c, e| {
        polarisation(c, e)
    });
    let band = match find(t, "weighting_band_nm") {
        None => grid.as_ref().map(|g| {
            let (g_lo, g_hi) = g.bounds_nm();
            let (lo, hi) = DEFAULT_WEIGHTING_BAND_NM;
            let (a, b) = (lo.max(g_lo), hi.min(g_hi));
            if a <= b { (a, b) } else { (g_lo, g_hi) }
        }),
        Some(e) => weighting_band(ck, e, grid.as_ref()),
    };
    let light = (|| {
        Some(Light {
            spectrum: spectrum?,
            wavelengths: grid.clone()?,
            polar_angle_deg: polar?,
            azimuth_deg: azimuth?,
            polarisation: polarisation?,
            weighting_band_nm: band?,
        })
    })();
    (light, grid, polarisation)
}

fn polarisation<'a>(ck: &mut Checker<'a>, e: &'a Entry) -> Option<InputPolarisation> {
    let ctx = "[light]";
    match &e.node.value {
        RawValue::String(_) => {
            let s = ck.choice(
                e,
                ctx,
                &["unpolarised", "s", "p"],
                &[("unpolarized", "unpolarised"), ("S", "s"), ("P", "p")],
            )?;
            Some(match s.as_str() {
                "s" => InputPolarisation::S,
                "p" => InputPolarisation::P,
                _ => InputPolarisation::Unpolarised,
            })
        }
        RawValue::Table(t) => {
            ck.check_keys(t, &["linear_deg"], "[light] polarisation", &|_| None);
            let angle = ck.req(
                t,
                "linear_deg",
                Some(&e.node.span),
                "[light] polarisation",
                (
                    "the angle of linear polarisation in degrees from s towards p",
                    "polarisation = { linear_deg = 45 }",
                ),
                |c, x| {
                    c.ranged(
                        x,
                        "[light] polarisation",
                        (-180.0, false),
                        (180.0, false),
                        "an angle from −180° to 180° (0 = s, 90 = p)",
                        "linear_deg = 45",
                        "give an angle between -180 and 180",
                    )
                },
            )?;
            Some(InputPolarisation::Linear(angle.to_radians()))
        }
        _ => {
            ck.wrong_type(
                e,
                ctx,
                "\"unpolarised\", \"s\", \"p\" or a table { linear_deg = angle }",
                "polarisation = \"unpolarised\"",
            );
            None
        }
    }
}

fn weighting_band<'a>(
    ck: &mut Checker<'a>,
    e: &'a Entry,
    grid: Option<&WavelengthGrid>,
) -> Option<(f64, f64)> {
    let expected = "two wavelengths [lo, hi] in nm with 0 < lo < hi, inside the simulated \
                    wavelengths";
    let RawValue::Array(items) = &e.node.value else {
        ck.wrong_type(e, "[light]", expected, "weighting_band_nm = [300, 1200]");
        return None;
    };
    let values: Vec<f64> = items
        .iter()
        .filter_map(|n| match n.value {
            RawValue::Integer(v) => Some(v as f64),
            RawValue::Float(v) if v.is_finite() => Some(v),
            _ => None,
        })
        .collect();
    if values.len() != 2 || items.len() != 2 {
        ck.at(
            Some(&e.node.span),
            "`weighting_band_nm` in [light] is not a pair of numbers",
            expected,
            "write e.g. `weighting_band_nm = [300, 1200]`",
        );
        return None;
    }
    let (lo, hi) = (values[0], values[1]);
    if !(lo > 0.0 && lo < hi) {
        ck.at(
            Some(&e.node.span),
            format!("`weighting_band_nm` in [light] = [{lo}, {hi}] is not an interval"),
            expected,
            "give the lower edge first, both positive",
        );
        return None;
    }
    if let Some(g) = grid {
        let (g_lo, g_hi) = g.bounds_nm();
        let tol = 1e-9 * g_hi;
        if lo < g_lo - tol || hi > g_hi + tol {
            ck.at(
                Some(&e.node.span),
                format!(
                    "`weighting_band_nm` = [{lo}, {hi}] nm reaches outside the simulated \
                     wavelengths {g_lo}–{g_hi} nm, where the absorptance is unknown"
                ),
                expected,
                format!(
                    "narrow the band to [{}, {}] or widen `wavelengths_nm`",
                    lo.max(g_lo),
                    hi.min(g_hi)
                ),
            );
            return None;
        }
    }
    Some((lo, hi))
}

fn medium(ck: &mut Checker<'_>, key: &str) -> Option<Medium> {
    let (t, anchor) = ck.section(key, &format!("[{key}]\nmaterial = \"air\""));
    let ctx = format!("[{key}]");
    ck.check_keys(t, MEDIUM_KEYS, &ctx, &|_| None);
    let air = || Material::constant("air", crate::optics::Index::new(1.0, 0.0));
    match find(t, "material") {
        None if anchor.is_some() => {
            ck.at(
                anchor.as_ref(),
                format!("missing key `material` in {ctx}"),
                "a material id, e.g. \"air\", \"ag\" or \"glass-lowiron-5ppm-vogt2016\"",
                "add `material = \"air\"`",
            );
            None
        }
        None => Some(Medium {
            material: materials::by_id("air").unwrap_or_else(|_| air()),
        }),
        Some(e) => ck
            .material(e, &ctx, &ctx)
            .map(|material| Medium { material }),
    }
}

fn stack(ck: &mut Checker<'_>) -> Option<(Vec<Element>, usize)> {
    let root: &[Entry] = &ck.raw.root;
    let example = "[[stack]]\nkind = \"interface\"\ntexture = \"planar\"";
    let Some(stack_entry) = find(root, "stack") else {
        ck.at(
            None,
            "no [[stack]]: the scenario does not say what the light goes through",
            "an ordered list of [[stack]] tables, top to bottom: interface, thick layer, …, \
             interface",
            "add e.g. [[stack]] kind = \"interface\" (front), [[stack]] kind = \"layer\" \
             (the wafer), [[stack]] kind = \"interface\" (rear); see docs/scenario.md",
        );
        return None;
    };
    let items: Vec<(&[Entry], Span)> = match &stack_entry.node.value {
        RawValue::Array(items) => {
            let mut tables = Vec::new();
            for n in items {
                match &n.value {
                    RawValue::Table(t) => tables.push((t.as_slice(), n.span.clone())),
                    other => ck.at(
                        Some(&n.span),
                        format!("a stack entry is a {}", other.type_name()),
                        "a table per stack element",
                        format!("write each element as\n{example}"),
                    ),
                }
            }
            tables
        }
        RawValue::Table(_) => {
            ck.at(
                Some(&stack_entry.key_span),
                "`stack` is a single table ([stack])",
                "an ordered list of elements, each under a [[stack]] header (double brackets)",
                "write [[stack]] instead of [stack] before each element",
            );
            return None;
        }
        _ => {
            ck.wrong_type(
                stack_entry,
                "the scenario",
                "a list of [[stack]] tables",
                example,
            );
            return None;
        }
    };
    if items.is_empty() {
        ck.at(
            Some(&stack_entry.node.span),
            "the stack is empty",
            "interface, thick layer, …, interface",
            "add the elements under [[stack]] headers",
        );
        return None;
    }

    // Names (explicit or default).
    let tables: Vec<&[Entry]> = items.iter().map(|(t, _)| *t).collect();
    let names = element_names(&tables);

    // Per-element parsing.
    let mut elems: Vec<Elem> = Vec::new();
    for (i, ((t, span), name)) in items.iter().zip(names).enumerate() {
        elems.push(element(ck, t, span.clone(), i, name));
    }

    // Names: unique, usable in keys.
    for i in 0..elems.len() {
        let (name, span) = (elems[i].name.clone(), elems[i].name_span.clone());
        let anchor = span.clone().unwrap_or_else(|| elems[i].span.clone());
        if name.is_empty() || name.contains('.') || name.chars().all(|c| c.is_ascii_digit()) {
            ck.at(
                Some(&anchor),
                format!("stack element name \"{name}\" cannot be used in keys"),
                "a non-empty name without dots that is not a number, e.g. \"front\", \"wafer\"",
                "rename it, e.g. with dashes instead of dots",
            );
        }
        if let Some(j) = (0..i).find(|&j| elems[j].name == name) {
            let other = elems[j].name_span.as_ref().unwrap_or(&elems[j].span);
            let (l, _) = ck.pos(Some(other));
            ck.at(
                Some(&anchor),
                format!("two stack elements are named \"{name}\" (the other one at line {l})"),
                "a unique name per stack element (sweep keys such as stack.<name>.thickness_um \
                 use it)",
                "give this element its own `name`",
            );
        }
    }

    // Order: interface, layer, …, interface.
    let kinds: Vec<Option<Kind>> = elems.iter().map(|e| e.kind).collect();
    let order_known = kinds.iter().all(Option::is_some);
    let mut order_ok = order_known;
    if order_known {
        let anchor = |e: &Elem| e.kind_span.clone().unwrap_or_else(|| e.span.clone());
        let n = elems.len();
        if kinds[0] == Some(Kind::Layer) {
            order_ok = false;
            let e = &elems[0];
            ck.at(
                Some(&anchor(e)),
                format!(
                    "the stack starts with thick layer `{}`, not with an interface",
                    e.name
                ),
                "the stack starts and ends with an interface: [above] | interface | layer | \
                 interface | … | [below]",
                format!(
                    "add an interface before `{}` ([[stack]] kind = \"interface\", texture = \
                     \"planar\" for a flat one)",
                    e.name
                ),
            );
        }
        if n > 1 && kinds[n - 1] == Some(Kind::Layer) || n == 1 && kinds[0] == Some(Kind::Layer) {
            order_ok = false;
            let e = &elems[n - 1];
            ck.at(
                Some(&anchor(e)),
                format!(
                    "the stack ends with thick layer `{}`, not with an interface",
                    e.name
                ),
                "the stack starts and ends with an interface: [above] | interface | layer | \
                 interface | … | [below]",
                format!(
                    "add an interface after `{}` (texture = \"planar\" for a flat one)",
                    e.name
                ),
            );
        }
        for i in 1..n {
            let (a, b) = (&elems[i - 1], &elems[i]);
            if a.kind == Some(Kind::Layer) && b.kind == Some(Kind::Layer) {
                order_ok = false;
                ck.at(
                    Some(&anchor(b)),
                    format!(
                        "thick layers `{}` and `{}` follow each other without an interface \
                         between them",
                        a.name, b.name
                    ),
                    "an interface between any two thick layers",
                    format!(
                        "add an interface between `{}` and `{}` (texture = \"planar\" for a flat \
                         one)",
                        a.name, b.name
                    ),
                );
            }
            if a.kind == Some(Kind::Interface) && b.kind == Some(Kind::Interface) {
                order_ok = false;
                ck.at(
                    Some(&anchor(b)),
                    format!(
                        "interfaces `{}` and `{}` follow each other without a thick layer \
                         between them",
                        a.name, b.name
                    ),
                    "a thick layer between any two interfaces",
                    "merge them into one interface (all films in one `coating`, top to bottom), \
                     or add the thick layer between them",
                );
            }
        }
        if !kinds.contains(&Some(Kind::Layer)) {
            order_ok = false;
            ck.at(
                Some(&stack_entry.key_span),
                "the stack has no thick layer, so nothing can absorb",
                "at least one thick layer (the wafer) between two interfaces",
                "add [[stack]] kind = \"layer\", material = \"si\", thickness_um = 160 between \
                 two interfaces",
            );
        }
    }

    // Absorber: the one marked, else the first silicon layer.
    let layer_ids: Vec<usize> = (0..elems.len())
        .filter(|&i| elems[i].kind == Some(Kind::Layer))
        .collect();
    let marked: Vec<usize> = layer_ids
        .iter()
        .copied()
        .filter(|&i| {
            matches!(
                elems[i].layer.as_ref().and_then(|l| l.absorber),
                Some(Some(true))
            )
        })
        .collect();
    let absorber_elem: Option<usize> = if marked.len() > 1 {
        for &i in &marked[1..] {
            let span = elems[i]
                .layer
                .as_ref()
                .and_then(|l| l.absorber_span.clone());
            let first = elems[marked[0]].name.clone();
            ck.at(
                span.as_ref(),
                format!(
                    "layers `{first}` and `{}` are both marked `absorber = true`",
                    elems[i].name
                ),
                "one absorber: the layer whose current, escape and generation are reported",
                "keep `absorber = true` on one layer only",
            );
        }
        None
    } else if let Some(&i) = marked.first() {
        Some(i)
    } else {
        let unmarked_si = layer_ids.iter().copied().find(|&i| {
            elems[i].layer.as_ref().is_some_and(|l| {
                l.absorber == Some(None) && l.material.as_ref().is_some_and(is_silicon)
            })
        });
        let all_parsed = layer_ids.iter().all(|&i| {
            elems[i]
                .layer
                .as_ref()
                .is_some_and(|l| l.material.is_some() && l.absorber.is_some())
        });
        if unmarked_si.is_none() && all_parsed && !layer_ids.is_empty() {
            ck.at(
                Some(&stack_entry.key_span),
                "no absorber: no layer is marked `absorber = true` and no layer is silicon",
                "one thick layer marked `absorber = true` (default: the first silicon layer, \
                 material `si` or `si-…`)",
                "add `absorber = true` to the layer whose current you want reported",
            );
        }
        unmarked_si
    };

    // Orientation of each texture, then textures against layer thickness.
    let mut oriented: Vec<Option<(Arc<dyn Texture>, Features)>> = vec![None; elems.len()];
    for (i, e) in elems.iter().enumerate() {
        let Some(p) = &e.iface else { continue };
        let (Some((t, _)), Some(f)) = (&p.texture, p.features) else {
            continue;
        };
        let features = f.unwrap_or(match absorber_elem {
            Some(a) if i > a => Features::Down,
            _ => Features::Up,
        });
        let t: Arc<dyn Texture> = match features {
            Features::Up => t.clone(),
            Features::Down => Arc::new(Flipped(t.clone())),
        };
        oriented[i] = Some((t, features));
    }
    if order_ok {
        for (i, e) in elems.iter().enumerate() {
            let Some(l) = &e.layer else { continue };
            let Some(thickness) = l.thickness_um else {
                continue;
            };
            let (Some((above, _)), Some((below, _))) = (&oriented[i - 1], &oriented[i + 1]) else {
                continue;
            };
            let from_above = (-above.z_range_um()[0]).max(0.0);
            let from_below = below.z_range_um()[1].max(0.0);
            if from_above + from_below > thickness {
                let (na, nb) = (&elems[i - 1].name, &elems[i + 1].name);
                ck.at(
                    l.thickness_span.as_ref(),
                    format!(
                        "layer `{}` is {thickness} µm thick, but the textures reach {:.3} µm \
                         into it (`{na}`: {from_above:.3} µm from above, `{nb}`: {from_below:.3} \
                         µm from below)",
                        e.name,
                        from_above + from_below
                    ),
                    "thickness_um (between the base planes) at least the depth the textures of \
                     the interfaces above and below protrude into the layer",
                    format!(
                        "make the layer thicker than {:.3} µm, use smaller textures, or point \
                         them the other way with `features`",
                        from_above + from_below
                    ),
                );
            }
        }
    }

    // Assemble.
    let absorber_elem = absorber_elem?;
    if !order_ok {
        return None;
    }
    let mut out = Vec::with_capacity(elems.len());
    for (i, e) in elems.into_iter().enumerate() {
        match e.kind? {
            Kind::Interface => {
                let p = e.iface?;
                let (_, label) = p.texture?;
                let (texture, features) = oriented[i].take()?;
                let coating_geometry = p.geometry?;
                let coating_tilt_cos = match coating_geometry {
                    CoatingGeometry::Conformal => vec![1.0],
                    CoatingGeometry::Directional => {
                        crate::texture::coating_tilt_levels(&texture.facet_tilts_deg())
                    }
                };
                out.push(Element::Interface(InterfaceSpec {
                    name: e.name,
                    texture,
                    texture_label: label,
                    features,
                    coating: p.coating?,
                    coating_geometry,
                    coating_tilt_cos,
                }));
            }
            Kind::Layer => {
                let l = e.layer?;
                l.absorber?;
                out.push(Element::Layer(LayerSpec {
                    name: e.name,
                    material: l.material?,
                    thickness_um: l.thickness_um?,
                }));
            }
        }
    }
    let absorber = layer_ids.iter().position(|&i| i == absorber_elem)?;
    Some((out, absorber))
}

fn element<'a>(ck: &mut Checker<'a>, t: &'a [Entry], span: Span, i: usize, name: String) -> Elem {
    let pos_name = format!("[[stack]] #{}", i + 1);
    let name_entry = find(t, "name");
    if let Some(e) = name_entry {
        ck.string(e, &pos_name, "name = \"wafer\"");
    }
    let ctx = format!("[[stack]] `{name}`");
    let kind_entry = find(t, "kind");
    let kind = match kind_entry {
        None => {
            let guess = if find(t, "texture").is_some() || find(t, "coating").is_some() {
                "kind = \"interface\""
            } else if find(t, "thickness_um").is_some() || find(t, "material").is_some() {
                "kind = \"layer\""
            } else {
                "kind = \"interface\" or kind = \"layer\""
            };
            ck.at(
                Some(&span),
                format!("missing key `kind` in {ctx}"),
                "\"interface\" (a textured, coated surface) or \"layer\" (a thick layer)",
                format!("add `{guess}`"),
            );
            None
        }
        Some(e) => ck.choice(e, &ctx, &["interface", "layer"], &[]).map(|k| {
            if k == "layer" {
                Kind::Layer
            } else {
                Kind::Interface
            }
        }),
    };
    let mut elem = Elem {
        span: span.clone(),
        kind,
        kind_span: kind_entry.map(|e| e.node.span.clone()),
        name: name.clone(),
        name_span: name_entry.map(|e| e.node.span.clone()),
        iface: None,
        layer: None,
    };
    match kind {
        None => {
            let mut all: Vec<&str> = INTERFACE_KEYS.to_vec();
            all.extend(LAYER_KEYS.iter().filter(|k| !INTERFACE_KEYS.contains(k)));
            ck.check_keys(t, &all, &ctx, &|_| None);
        }
        Some(Kind::Interface) => {
            let hint = |k: &str| {
                LAYER_KEYS.contains(&k).then(|| {
                    format!(
                        "`{k}` belongs to thick layers (kind = \"layer\"); for a film use \
                         `coating = [{{ material = \"…\", thickness_nm = … }}]`"
                    )
                })
            };
            ck.check_keys(t, INTERFACE_KEYS, &ctx, &hint);
            elem.iface = Some(interface(ck, t, &span, &ctx));
        }
        Some(Kind::Layer) => {
            let hint = |k: &str| {
                INTERFACE_KEYS.contains(&k).then(|| {
                    format!("`{k}` belongs to interfaces (kind = \"interface\") above or below this layer")
                })
            };
            ck.check_keys(t, LAYER_KEYS, &ctx, &hint);
            elem.layer = Some(layer(ck, t, &span, &ctx, &name));
        }
    }
    elem
}

fn interface<'a>(ck: &mut Checker<'a>, t: &'a [Entry], span: &Span, ctx: &str) -> IfaceParts {
    let texture = ck.req(
        t,
        "texture",
        Some(span),
        ctx,
        (
            "a geometry name (geometries/<name>.toml), a texture file path, or a table such as \
             { kind = \"planar\" }",
            "texture = \"planar\"",
        ),
        |c, e| c.texture(e, ctx),
    );
    let coating = ck.opt(t, "coating", Vec::new(), |c, e| coating(c, e, ctx));
    let geometry = ck.opt(t, "coating_geometry", CoatingGeometry::Conformal, |c, e| {
        c.choice(e, ctx, &["conformal", "directional"], &[])
            .map(|g| match g.as_str() {
                "directional" => CoatingGeometry::Directional,
                _ => CoatingGeometry::Conformal,
            })
    });
    let features = match find(t, "features") {
        None => Some(None),
        Some(e) => ck.choice(e, ctx, &["up", "down"], &[]).map(|f| {
            Some(if f == "down" {
                Features::Down
            } else {
                Features::Up
            })
        }),
    };
    IfaceParts {
        texture,
        coating,
        geometry,
        features,
    }
}

fn coating<'a>(ck: &mut Checker<'a>, e: &'a Entry, ctx: &str) -> Option<Vec<CoatingLayer>> {
    let example = "coating = [{ material = \"sinx-n2.09-vogt2015\", thickness_nm = 75 }]";
    let items = match &e.node.value {
        RawValue::Array(items) => items,
        RawValue::Table(_) => {
            ck.at(
                Some(&e.node.span),
                format!("`coating` in {ctx} is a single table"),
                "a list of films, top to bottom, even for one film",
                format!("put it in brackets: {example}"),
            );
            return None;
        }
        _ => {
            ck.wrong_type(
                e,
                ctx,
                "a list of films { material, thickness_nm }, top to bottom",
                example,
            );
            return None;
        }
    };
    if items.len() > MAX_FILM_LAYERS {
        ck.at(
            Some(&e.node.span),
            format!("`coating` in {ctx} has {} films", items.len()),
            format!("at most {MAX_FILM_LAYERS} films per interface"),
            "merge films or model thick ones as thick layers in the stack",
        );
    }
    let mut films = Vec::with_capacity(items.len());
    let mut ok = items.len() <= MAX_FILM_LAYERS;
    for (k, n) in items.iter().enumerate() {
        let fctx = format!("film {} of `coating` in {ctx}", k + 1);
        let RawValue::Table(ft) = &n.value else {
            ck.at(
                Some(&n.span),
                format!("{fctx} is a {}", n.value.type_name()),
                "a table { material = …, thickness_nm = … }",
                format!("write e.g. {example}"),
            );
            ok = false;
            continue;
        };
        ck.check_keys(ft, COATING_KEYS, &fctx, &|_| None);
        let role = fctx.clone();
        let material = ck.req(
            ft,
            "material",
            Some(&n.span),
            &fctx,
            (
                "a material id, file or constant index",
                "material = \"sinx-n2.09-vogt2015\"",
            ),
            |c, x| c.material(x, &fctx, &role),
        );
        let thickness = ck.req(
            ft,
            "thickness_nm",
            Some(&n.span),
            &fctx,
            ("the film thickness in nm", "thickness_nm = 75"),
            |c, x| {
                c.ranged(
                    x,
                    &fctx,
                    (0.0, true),
                    (MAX_FILM_THICKNESS_NM, false),
                    &format!(
                        "a film thickness in nm, 0 < d ≤ {MAX_FILM_THICKNESS_NM} (thicker layers \
                         are incoherent: put them in the stack as thick layers)"
                    ),
                    "thickness_nm = 75",
                    "give a positive thickness in nm; for no film, remove the film from the list",
                )
            },
        );
        match (material, thickness) {
            (Some(material), Some(thickness_nm)) => films.push(CoatingLayer {
                material,
                thickness_nm,
            }),
            _ => ok = false,
        }
    }
    ok.then_some(films)
}

fn layer<'a>(
    ck: &mut Checker<'a>,
    t: &'a [Entry],
    span: &Span,
    ctx: &str,
    name: &str,
) -> LayerParts {
    let role = format!("layer `{name}`");
    let material = ck.req(
        t,
        "material",
        Some(span),
        ctx,
        ("a material id, file or constant index", "material = \"si\""),
        |c, e| c.material(e, ctx, &role),
    );
    let thickness_entry = find(t, "thickness_um");
    let thickness_um = ck.req(
        t,
        "thickness_um",
        Some(span),
        ctx,
        (
            "the layer thickness in µm between the base planes of the interfaces above and below",
            "thickness_um = 160",
        ),
        |c, e| {
            c.ranged(
                e,
                ctx,
                (0.0, true),
                (1e6, false),
                "a thickness in µm, 0 < d ≤ 1e6 (1 m)",
                "thickness_um = 160",
                "give a positive thickness in µm (wafers: ~100–200 µm; glass: 3200 µm)",
            )
        },
    );
    let absorber_entry = find(t, "absorber");
    let absorber = match absorber_entry {
        None => Some(None),
        Some(e) => ck.boolean(e, ctx).map(Some),
    };
    LayerParts {
        material,
        thickness_um,
        thickness_span: thickness_entry.map(|e| e.node.span.clone()),
        absorber,
        absorber_span: absorber_entry.map(|e| e.node.span.clone()),
    }
}

/// The solver, and its polarisation mode with the value's position (checked against the light
/// even when another solver key is wrong).
fn solver<'a>(
    ck: &mut Checker<'a>,
    isotropic: bool,
) -> (Option<Solver>, Option<(PolarisationMode, Span)>) {
    let (t, anchor) = ck.section("solver", "[solver]");
    let ctx = "[solver]";
    ck.check_keys(t, SOLVER_KEYS, ctx, &|_| None);
    let mode = ck.opt(t, "mode", Mode::Direct, |c, e| {
        c.choice(e, ctx, &["direct", "matrix"], &[]).map(|m| {
            if m == "matrix" {
                Mode::Matrix
            } else {
                Mode::Direct
            }
        })
    });
    let rays_expected = "a whole number of rays per wavelength, ≥ 1";
    let rays = match (find(t, "rays"), find(t, "target_std_error")) {
        (Some(r), Some(s)) => {
            let later = if r.key_span.start > s.key_span.start {
                r
            } else {
                s
            };
            ck.at(
                Some(&later.key_span),
                "both `rays` and `target_std_error` are given in [solver]",
                "either a fixed number of rays per wavelength or a target standard error",
                "keep one of them",
            );
            None
        }
        (Some(r), None) => {
            if let Some(m) = find(t, "max_rays") {
                ck.at(
                    Some(&m.key_span),
                    "`max_rays` in [solver] applies only with `target_std_error`",
                    "`max_rays` together with `target_std_error`",
                    "remove `max_rays`, or replace `rays` with `target_std_error`",
                );
            }
            ck.whole(r, ctx, (1, MAX_RAYS), rays_expected, "rays = 10000")
                .map(|n| RayBudget::Fixed(n as u64))
        }
        (None, Some(s)) => {
            let target = ck.ranged(
                s,
                ctx,
                (0.0, true),
                (0.5, true),
                "an absolute standard error of reflectance and absorptance, 0 < σ < 0.5 \
                 (e.g. 0.002)",
                "target_std_error = 0.002",
                "give a small positive number such as 0.002",
            );
            let max = ck.opt(t, "max_rays", DEFAULT_MAX_RAYS as i64, |c, e| {
                c.whole(e, ctx, (1, MAX_RAYS), rays_expected, "max_rays = 1000000")
            });
            match (target, max) {
                (Some(target_std_error), Some(m)) => Some(RayBudget::Precision {
                    target_std_error,
                    max_rays: m as u64,
                }),
                _ => None,
            }
        }
        (None, None) => {
            if let Some(m) = find(t, "max_rays") {
                ck.at(
                    Some(&m.key_span),
                    "`max_rays` in [solver] applies only with `target_std_error`",
                    "`max_rays` together with `target_std_error`",
                    "add `target_std_error = 0.002`, or use `rays = …` instead",
                );
                None
            } else {
                Some(RayBudget::Fixed(DEFAULT_RAYS))
            }
        }
    };
    let seed = ck.opt(t, "seed", 1, |c, e| {
        c.whole(e, ctx, (0, i64::MAX), "a whole number ≥ 0", "seed = 1")
    });
    let threads = ck.opt(t, "threads", None, |c, e| {
        c.whole(
            e,
            ctx,
            (1, 4096),
            "a number of worker threads, 1 to 4096",
            "threads = 2",
        )
        .map(|n| Some(n as usize))
    });
    let pol_span = find(t, "polarisation").map(|e| e.node.span.clone());
    let polarisation = ck.opt(t, "polarisation", PolarisationMode::Stokes, |c, e| {
        c.choice(
            e,
            ctx,
            &["stokes", "unpolarised"],
            &[("unpolarized", "unpolarised")],
        )
        .map(|p| {
            if p == "unpolarised" {
                PolarisationMode::Unpolarised
            } else {
                PolarisationMode::Stokes
            }
        })
    });
    let bins = |c: &mut Checker<'a>, e: &'a Entry, max: i64, example: &str| {
        c.whole(
            e,
            ctx,
            (1, max),
            &format!("a whole number of bins, 1 to {max}"),
            example,
        )
        .map(|n| n as usize)
    };
    let polar_bins = ck.opt(t, "polar_bins", DEFAULT_POLAR_BINS, |c, e| {
        bins(c, e, 1000, "polar_bins = 30")
    });
    let azimuth_default = if isotropic { 1 } else { DEFAULT_AZIMUTH_BINS };
    let azimuth_bins = ck.opt(t, "azimuth_bins", azimuth_default, |c, e| {
        bins(c, e, 360, "azimuth_bins = 8")
    });
    let profile_bins = ck.opt(t, "profile_bins", DEFAULT_PROFILE_BINS, |c, e| {
        bins(c, e, 100_000, "profile_bins = 100")
    });
    let _ = anchor;
    let pol = polarisation.zip(pol_span);
    let solver = (|| {
        Some(Solver {
            mode: mode?,
            rays: rays?,
            seed: seed? as u64,
            threads: threads?,
            polarisation: polarisation?,
            polar_bins: polar_bins?,
            azimuth_bins: azimuth_bins?,
            profile_bins: profile_bins?,
        })
    })();
    (solver, pol)
}

fn output(ck: &mut Checker<'_>) -> Option<Output> {
    let (t, _) = ck.section("output", "[output]");
    let ctx = "[output]";
    ck.check_keys(t, OUTPUT_KEYS, ctx, &|_| None);
    let matrices = ck.opt(t, "matrices", false, |c, e| c.boolean(e, ctx));
    let plots = ck.opt(t, "plots", true, |c, e| c.boolean(e, ctx));
    Some(Output {
        matrices: matrices?,
        plots: plots?,
    })
}

/// Every material must have data at every simulated wavelength (lightfold never extrapolates).
/// Material ranges are intervals, so the grid's two ends decide.
fn check_material_ranges(ck: &mut Checker<'_>, grid: &WavelengthGrid) {
    let (g_lo, g_hi) = grid.bounds_nm();
    let used = std::mem::take(&mut ck.materials);
    for (m, span, role) in &used {
        for wl in [g_lo, g_hi] {
            if let Err(MaterialError::OutOfRange { min_nm, max_nm, .. }) = m.index_at(wl) {
                ck.at(
                    Some(span),
                    format!(
                        "material `{}` ({role}) has no data at {wl} nm: its data cover \
                         {min_nm}–{max_nm} nm",
                        m.id()
                    ),
                    format!(
                        "every simulated wavelength ({g_lo}–{g_hi} nm) inside the data range of \
                         every material; lightfold never extrapolates"
                    ),
                    format!(
                        "narrow `wavelengths_nm` in [light] to {}–{} nm, or choose a material \
                         whose data cover {g_lo}–{g_hi} nm (`lightfold materials` lists ranges)",
                        g_lo.max(min_nm),
                        g_hi.min(max_nm)
                    ),
                );
                break;
            }
        }
    }
    ck.materials = used;
}

/// Light enters from the medium above: it must not absorb (Fresnel from an absorbing incidence
/// medium is not defined the usual way, and its absorption would go unaccounted).
fn check_transparent_above(ck: &mut Checker<'_>, above: &Medium, grid: &WavelengthGrid) {
    let span = ck
        .materials
        .iter()
        .find(|(_, _, role)| role == "[above]")
        .map(|(_, s, _)| s.clone());
    for &wl in grid.as_slice() {
        if let Ok(n) = above.material.index_at(wl)
            && n.im > 0.0
        {
            ck.at(
                span.as_ref(),
                format!(
                    "the medium above, `{}`, absorbs (k = {} at {wl} nm)",
                    above.material.id(),
                    n.im
                ),
                "a transparent incidence medium (k = 0), e.g. air",
                "put absorbing media in the stack as thick layers under an interface, with \
                     air (or a transparent medium) above",
            );
            return;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_names_follow_position() {
        let k = [
            Some(Kind::Interface),
            Some(Kind::Layer),
            Some(Kind::Interface),
            Some(Kind::Layer),
            Some(Kind::Interface),
        ];
        assert_eq!(
            default_names(&k),
            ["front", "layer-1", "interface-2", "layer-2", "rear"]
        );
    }

    #[test]
    fn silicon_ids_but_not_oxides_or_nitrides() {
        assert!(is_silicon(&materials::by_id("si").unwrap()));
        assert!(!is_silicon(&materials::by_id("sio2").unwrap()));
        assert!(!is_silicon(&materials::by_id("si3n4").unwrap()));
    }
}
