//! Texture files: our TOML schema, its loader and the errors it reports.
//!
//! A texture file (see `geometries/`) is a TOML table; the same table may sit inline in a
//! scenario (embed [`RawTexture`] in the scenario's raw schema, keep the text for positions).
//! Lengths in µm, angles in degrees. Keys by `kind`:
//!
//! | kind | keys (default) |
//! | --- | --- |
//! | `planar` | — |
//! | `ideal-specular`, `ideal-lambertian` | — (contract in [`super::ideal`]) |
//! | `regular-pyramids` | `base_um`; `base_angle_deg` (54.7356); `period_um` (= base); `rotation_deg` (0); `inverted` (false) |
//! | `v-grooves` | `period_um`; `angle_deg` (54.7356) |
//! | `random-pyramids` | `size_distribution` (`"log-normal"` or `"uniform"`); log-normal: `mean_height_um` + `height_spread_rel` (0) or `mean_base_um` + `base_spread_rel` (0); uniform: `min_height_um` + `max_height_um` or `min_base_um` + `max_base_um`; `base_angle_deg` (54.7356); `angle_spread_deg` (0); `pyramid_count` (400); `coverage` (0.99, target covered fraction); `seed` (1) |
//! | `height-map` | `image` (path relative to the file); `pixel_um`; `height_scale_um` (height of full-scale grey) |
//!
//! Every kind also accepts `description` (free text). Checks: facet angles in (0°, 90°),
//! lengths > 0, period ≥ base, spreads ≥ 0, coverage in (0, 1), integer counts and seeds.
//! Invariant: every problem in a table is reported, sorted by line, with file:line:column when
//! the text is known, what was expected and a fix (a did-you-mean for misspelt keys, by edit
//! distance). Not here: how a scenario places textures on interfaces (`scenario`).

use std::fmt;
use std::ops::Range;
use std::path::{Path, PathBuf};

use serde::de::{Deserialize, Deserializer, MapAccess, Visitor};
use toml::Spanned;

use super::random::{RandomPyramidsSpec, SizeDistribution, SizeOf};
use super::{
    HeightMap, IdealLambertian, IdealSpecular, Planar, RandomPyramids, RegularPyramids,
    SI_111_ANGLE_DEG, Texture, VGrooves,
};
use crate::texture::pyramids::RegularPyramidsSpec;

/// What went wrong while building a texture.
#[derive(Debug, thiserror::Error)]
pub enum TextureError {
    /// A file could not be read.
    #[error("{}: cannot read: {source}", file.display())]
    Read {
        /// The file.
        file: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// The file is not valid TOML.
    #[error("{}:{line}:{col}: not valid TOML: {message}\n  fix: correct the syntax at that position", file.display())]
    Syntax {
        /// The file.
        file: PathBuf,
        /// Line, 1-based.
        line: usize,
        /// Column, 1-based.
        col: usize,
        /// Parser message.
        message: String,
    },
    /// One or more keys are missing, unknown, of the wrong type or out of range.
    #[error("{}", render_problems(file, problems))]
    Invalid {
        /// The file.
        file: PathBuf,
        /// Every problem found, sorted by position.
        problems: Vec<Problem>,
    },
    /// A height-map image is unusable.
    #[error("{}: {problem}\n  expected: {expected}\n  fix: {fix}", file.display())]
    Image {
        /// The image file.
        file: PathBuf,
        /// What is wrong.
        problem: String,
        /// What is accepted.
        expected: String,
        /// How to fix it.
        fix: String,
    },
    /// A constructor was given an invalid parameter (programmatic use).
    #[error("invalid texture parameter: {problem}\n  expected: {expected}\n  fix: {fix}")]
    Parameter {
        /// What is wrong.
        problem: String,
        /// What is accepted.
        expected: String,
        /// How to fix it.
        fix: String,
    },
}

impl TextureError {
    pub(crate) fn parameter(
        problem: impl Into<String>,
        expected: impl Into<String>,
        fix: impl Into<String>,
    ) -> TextureError {
        TextureError::Parameter {
            problem: problem.into(),
            expected: expected.into(),
            fix: fix.into(),
        }
    }
}

/// One problem in a texture table.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Problem {
    /// Line, 1-based; 0 when the table came without source text.
    pub line: usize,
    /// Column, 1-based; 0 when unknown.
    pub col: usize,
    /// What is wrong.
    pub problem: String,
    /// What is accepted.
    pub expected: String,
    /// How to fix it.
    pub fix: String,
}

fn render_problems(file: &Path, problems: &[Problem]) -> String {
    let mut out = String::new();
    for (k, p) in problems.iter().enumerate() {
        if k > 0 {
            out.push('\n');
        }
        if p.line > 0 {
            out += &format!("{}:{}:{}: ", file.display(), p.line, p.col);
        } else {
            out += &format!("{}: ", file.display());
        }
        out += &format!(
            "{}\n  expected: {}\n  fix: {}",
            p.problem, p.expected, p.fix
        );
    }
    out
}

/// One key of a texture table with its source spans (byte ranges), if known.
#[derive(Clone, Debug, PartialEq)]
pub struct RawEntry {
    /// The key.
    pub key: String,
    /// Byte range of the key in the source text.
    pub key_span: Option<Range<usize>>,
    /// The value.
    pub value: toml::Value,
    /// Byte range of the value in the source text.
    pub value_span: Option<Range<usize>>,
}

/// A texture table as written, keys in file order with their spans; deserialise it from TOML
/// (top level of a texture file, or a table inside a scenario) and call [`RawTexture::build`].
#[derive(Clone, Debug, Default, PartialEq)]
pub struct RawTexture {
    /// The keys.
    pub entries: Vec<RawEntry>,
}

impl<'de> Deserialize<'de> for RawTexture {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct TableVisitor;
        impl<'de> Visitor<'de> for TableVisitor {
            type Value = RawTexture;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a texture table")
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<RawTexture, A::Error> {
                let mut entries = Vec::new();
                while let Some(key) = map.next_key::<Spanned<String>>()? {
                    let value = map.next_value::<Spanned<toml::Value>>()?;
                    let key_span = key.span();
                    let value_span = value.span();
                    entries.push(RawEntry {
                        key: key.into_inner(),
                        key_span: Some(key_span),
                        value: value.into_inner(),
                        value_span: Some(value_span),
                    });
                }
                Ok(RawTexture { entries })
            }
        }
        d.deserialize_map(TableVisitor)
    }
}

impl RawTexture {
    /// A table without source positions (problems are then reported without line numbers).
    pub fn from_table(table: &toml::Table) -> RawTexture {
        RawTexture {
            entries: table
                .iter()
                .map(|(k, v)| RawEntry {
                    key: k.clone(),
                    key_span: None,
                    value: v.clone(),
                    value_span: None,
                })
                .collect(),
        }
    }

    /// Validates the table and builds the texture. `file` names the source in messages and
    /// anchors relative image paths; `text` is the source text the spans refer to (for
    /// line:column), if available.
    pub fn build(&self, file: &Path, text: Option<&str>) -> Result<Box<dyn Texture>, TextureError> {
        let mut ctx = Ctx {
            raw: self,
            text,
            problems: Vec::new(),
        };
        let built = ctx.build(file);
        ctx.flag_unknown_keys();
        ctx.problems.sort_by_key(|p| (p.line, p.col));
        ctx.problems.dedup();
        match built {
            Some(t) if ctx.problems.is_empty() => Ok(t),
            _ => {
                if ctx.problems.is_empty() {
                    ctx.problems.push(Problem {
                        line: 0,
                        col: 0,
                        problem: "the texture could not be built".into(),
                        expected: "a valid texture table".into(),
                        fix: "check the keys against the texture schema".into(),
                    });
                }
                Err(TextureError::Invalid {
                    file: file.to_path_buf(),
                    problems: ctx.problems,
                })
            }
        }
    }
}

/// Reads and builds a texture file.
pub fn from_file(path: impl AsRef<Path>) -> Result<Box<dyn Texture>, TextureError> {
    let path = path.as_ref();
    let text = std::fs::read_to_string(path).map_err(|source| TextureError::Read {
        file: path.to_path_buf(),
        source,
    })?;
    from_toml_str(&text, path)
}

/// Builds a texture from TOML text; `file` names it in messages and anchors relative paths.
pub fn from_toml_str(text: &str, file: &Path) -> Result<Box<dyn Texture>, TextureError> {
    let raw: RawTexture = toml::from_str(text).map_err(|e| {
        let (line, col) = e.span().map_or((0, 0), |s| line_col(text, s.start));
        TextureError::Syntax {
            file: file.to_path_buf(),
            line,
            col,
            message: e.message().trim().to_string(),
        }
    })?;
    raw.build(file, Some(text))
}

/// Builds a texture from a parsed table (no positions in messages); `file` names its source
/// and anchors relative image paths.
pub fn from_table(table: &toml::Table, file: &Path) -> Result<Box<dyn Texture>, TextureError> {
    RawTexture::from_table(table).build(file, None)
}

/// 1-based line and column (in characters) of byte offset `pos` in `text`.
pub fn line_col(text: &str, pos: usize) -> (usize, usize) {
    let mut pos = pos.min(text.len());
    while !text.is_char_boundary(pos) {
        pos -= 1;
    }
    let before = &text[..pos];
    let line = before.matches('\n').count() + 1;
    let col = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    (line, col)
}

/// Levenshtein edit distance (V. I. Levenshtein, Sov. Phys. Dokl. 10, 707 (1966)).
pub fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut prev = row[0];
        row[0] = i + 1;
        for (j, &cb) in b.iter().enumerate() {
            let cur = row[j + 1];
            row[j + 1] = (prev + usize::from(ca != cb)).min(row[j] + 1).min(cur + 1);
            prev = cur;
        }
    }
    row[b.len()]
}

/// The closest of `options` to `word`, if close enough to be a plausible misspelling
/// (at most max(2, len/3) edits from it). Shared by the scenario loader.
pub fn did_you_mean<'a>(word: &str, options: &[&'a str]) -> Option<&'a str> {
    options
        .iter()
        .map(|o| (edit_distance(word, o), *o))
        .filter(|(d, o)| *d <= (o.len() / 3).max(2))
        .min_by_key(|(d, _)| *d)
        .map(|(_, o)| o)
}

/// The texture kinds a table may name.
pub const KINDS: &[&str] = &[
    "planar",
    "ideal-specular",
    "ideal-lambertian",
    "regular-pyramids",
    "v-grooves",
    "random-pyramids",
    "height-map",
];

/// Keys accepted by each kind (besides `kind` and `description`); empty for an unknown kind.
pub fn keys_of(kind: &str) -> &'static [&'static str] {
    match kind {
        "regular-pyramids" => &[
            "base_um",
            "base_angle_deg",
            "period_um",
            "rotation_deg",
            "inverted",
        ],
        "v-grooves" => &["period_um", "angle_deg"],
        "random-pyramids" => &[
            "size_distribution",
            "mean_height_um",
            "height_spread_rel",
            "mean_base_um",
            "base_spread_rel",
            "min_height_um",
            "max_height_um",
            "min_base_um",
            "max_base_um",
            "base_angle_deg",
            "angle_spread_deg",
            "pyramid_count",
            "coverage",
            "seed",
        ],
        "height-map" => &["image", "pixel_um", "height_scale_um"],
        _ => &[],
    }
}

struct Ctx<'a> {
    raw: &'a RawTexture,
    text: Option<&'a str>,
    problems: Vec<Problem>,
}

impl Ctx<'_> {
    fn pos(&self, span: &Option<Range<usize>>) -> (usize, usize) {
        match (self.text, span) {
            (Some(t), Some(s)) => line_col(t, s.start),
            _ => (0, 0),
        }
    }

    fn problem_at(
        &mut self,
        span: &Option<Range<usize>>,
        problem: String,
        expected: String,
        fix: String,
    ) {
        let (line, col) = self.pos(span);
        self.problems.push(Problem {
            line,
            col,
            problem,
            expected,
            fix,
        });
    }

    fn find(&self, key: &str) -> Option<usize> {
        self.raw.entries.iter().position(|e| e.key == key)
    }

    /// Position to report a missing key at: the `kind` value, else the table start.
    fn anchor(&self) -> Option<Range<usize>> {
        self.raw
            .entries
            .iter()
            .find(|e| e.key == "kind")
            .and_then(|e| e.key_span.clone())
    }

    fn missing(&mut self, key: &str, kind: &str, expected: &str) {
        let anchor = self.anchor();
        self.problem_at(
            &anchor,
            format!("missing key `{key}` for kind = \"{kind}\""),
            expected.to_string(),
            format!("add `{key} = ...`"),
        );
    }

    /// A number (float or integer), if present and of the right type.
    fn number(&mut self, key: &str) -> Option<(f64, Option<Range<usize>>)> {
        let k = self.find(key)?;
        let e = &self.raw.entries[k];
        let span = e.value_span.clone();
        match e.value {
            toml::Value::Float(v) => Some((v, span)),
            toml::Value::Integer(v) => Some((v as f64, span)),
            ref other => {
                let got = other.type_str();
                self.problem_at(
                    &span,
                    format!("`{key}` is a {got}"),
                    "a number".into(),
                    format!("write `{key} = 1.5` (no quotes)"),
                );
                None
            }
        }
    }

    /// A length in µm, > 0.
    fn length(&mut self, key: &str) -> Option<f64> {
        let (v, span) = self.number(key)?;
        if v.is_finite() && v > 0.0 {
            Some(v)
        } else {
            self.problem_at(
                &span,
                format!("`{key}` = {v} µm is not a positive length"),
                "a length > 0 in µm".into(),
                format!("set `{key}` to a positive number"),
            );
            None
        }
    }

    fn required_length(&mut self, key: &str, kind: &str) -> Option<f64> {
        if self.raw.entries.iter().any(|e| e.key == key) {
            self.length(key)
        } else {
            self.missing(key, kind, "a length > 0 in µm");
            None
        }
    }

    /// A facet angle in degrees, in (0, 90); `default` when absent.
    fn angle(&mut self, key: &str, default: f64) -> Option<f64> {
        let Some((v, span)) = self.number(key) else {
            return (!self.raw.entries.iter().any(|e| e.key == key)).then_some(default);
        };
        if v > 0.0 && v < 90.0 {
            Some(v)
        } else {
            self.problem_at(
                &span,
                format!("`{key}` = {v}° is out of range"),
                "a facet angle strictly between 0° and 90° (54.7356° for {111} facets on (100) Si)"
                    .into(),
                format!("set `{key}` between 0 and 90"),
            );
            None
        }
    }

    /// A number ≥ 0; `default` when absent.
    fn non_negative(&mut self, key: &str, default: f64, what: &str) -> Option<f64> {
        let Some((v, span)) = self.number(key) else {
            return (!self.raw.entries.iter().any(|e| e.key == key)).then_some(default);
        };
        if v.is_finite() && v >= 0.0 {
            Some(v)
        } else {
            self.problem_at(
                &span,
                format!("`{key}` = {v} is negative"),
                format!("{what} ≥ 0"),
                format!("set `{key}` to 0 or more"),
            );
            None
        }
    }

    fn integer(
        &mut self,
        key: &str,
        default: i64,
        range: Range<i64>,
        expected: &str,
    ) -> Option<i64> {
        let Some(k) = self.find(key) else {
            return Some(default);
        };
        let e = &self.raw.entries[k];
        let span = e.value_span.clone();
        match e.value {
            toml::Value::Integer(v) if range.contains(&v) => Some(v),
            toml::Value::Integer(v) => {
                self.problem_at(
                    &span,
                    format!("`{key}` = {v} is out of range"),
                    expected.into(),
                    format!("set `{key}` within {}..{}", range.start, range.end - 1),
                );
                None
            }
            ref other => {
                let got = other.type_str();
                self.problem_at(
                    &span,
                    format!("`{key}` is a {got}"),
                    expected.into(),
                    format!("write `{key}` as a whole number, e.g. `{key} = {default}`"),
                );
                None
            }
        }
    }

    fn boolean(&mut self, key: &str, default: bool) -> Option<bool> {
        let Some(k) = self.find(key) else {
            return Some(default);
        };
        let e = &self.raw.entries[k];
        let span = e.value_span.clone();
        match e.value {
            toml::Value::Boolean(b) => Some(b),
            ref other => {
                let got = other.type_str();
                self.problem_at(
                    &span,
                    format!("`{key}` is a {got}"),
                    "true or false".into(),
                    format!("write `{key} = true` or `{key} = false`"),
                );
                None
            }
        }
    }

    fn string(&mut self, key: &str) -> Option<(String, Option<Range<usize>>)> {
        let k = self.find(key)?;
        let e = &self.raw.entries[k];
        let span = e.value_span.clone();
        match &e.value {
            toml::Value::String(s) => Some((s.clone(), span)),
            other => {
                let got = other.type_str();
                self.problem_at(
                    &span,
                    format!("`{key}` is a {got}"),
                    "a string in quotes".into(),
                    format!("write `{key} = \"...\"`"),
                );
                None
            }
        }
    }

    fn flag_unknown_keys(&mut self) {
        let kind = self
            .raw
            .entries
            .iter()
            .find(|e| e.key == "kind")
            .and_then(|e| e.value.as_str())
            .unwrap_or("");
        if !KINDS.contains(&kind) {
            return; // only the kind is reported until it is known
        }
        let mut allowed: Vec<&str> = vec!["kind", "description"];
        allowed.extend_from_slice(keys_of(kind));
        for e in &self.raw.entries {
            if allowed.contains(&e.key.as_str()) {
                continue;
            }
            let fix = match did_you_mean(&e.key, &allowed) {
                Some(s) => format!("did you mean `{s}`?"),
                None => "remove the key or check its spelling".to_string(),
            };
            let (line, col) = self.pos(&e.key_span);
            self.problems.push(Problem {
                line,
                col,
                problem: format!("unknown key `{}` for kind = \"{kind}\"", e.key),
                expected: format!("one of {}", allowed.join(", ")),
                fix,
            });
        }
    }

    fn build(&mut self, file: &Path) -> Option<Box<dyn Texture>> {
        // Kind
        let Some((kind, kind_span)) = self.string("kind") else {
            if !self.raw.entries.iter().any(|e| e.key == "kind") {
                self.problems.push(Problem {
                    line: 0,
                    col: 0,
                    problem: "missing key `kind`".into(),
                    expected: format!("one of {}", KINDS.join(", ")),
                    fix: "add e.g. `kind = \"random-pyramids\"`".into(),
                });
            }
            return None;
        };
        if !KINDS.contains(&kind.as_str()) {
            let fix = match did_you_mean(&kind, KINDS) {
                Some(s) => format!("did you mean \"{s}\"?"),
                None => "use one of the listed kinds".to_string(),
            };
            self.problem_at(
                &kind_span,
                format!("unknown texture kind \"{kind}\""),
                format!("one of {}", KINDS.join(", ")),
                fix,
            );
            return None;
        }
        let _description = self.string("description"); // type-checked, free text
        match kind.as_str() {
            "planar" => Some(Box::new(Planar)),
            "ideal-specular" => Some(Box::new(IdealSpecular)),
            "ideal-lambertian" => Some(Box::new(IdealLambertian)),
            "regular-pyramids" => self.regular(),
            "v-grooves" => self.grooves(),
            "random-pyramids" => self.random(),
            "height-map" => self.height_map(file),
            _ => None,
        }
    }

    fn regular(&mut self) -> Option<Box<dyn Texture>> {
        let base = self.required_length("base_um", "regular-pyramids");
        let angle = self.angle("base_angle_deg", SI_111_ANGLE_DEG);
        let has_period = self.raw.entries.iter().any(|e| e.key == "period_um");
        let period = if has_period {
            self.length("period_um")
        } else {
            base
        };
        let rotation = match self.number("rotation_deg") {
            Some((v, _)) => Some(v),
            None => (!self.raw.entries.iter().any(|e| e.key == "rotation_deg")).then_some(0.0),
        };
        let inverted = self.boolean("inverted", false);
        if let (Some(b), Some(p), true) = (base, period, has_period)
            && p < b
        {
            let span = self
                .raw
                .entries
                .iter()
                .find(|e| e.key == "period_um")
                .and_then(|e| e.value_span.clone());
            self.problem_at(
                &span,
                format!("`period_um` = {p} µm is smaller than `base_um` = {b} µm"),
                "period_um ≥ base_um (the difference is a flat gap; pyramids may touch, not overlap)".into(),
                "increase period_um or reduce base_um".into(),
            );
            return None;
        }
        let spec = RegularPyramidsSpec {
            base_um: base?,
            base_angle_deg: angle?,
            period_um: period?,
            rotation_deg: rotation?,
            inverted: inverted?,
        };
        self.finish(RegularPyramids::new(spec))
    }

    fn grooves(&mut self) -> Option<Box<dyn Texture>> {
        let period = self.required_length("period_um", "v-grooves");
        let angle = self.angle("angle_deg", SI_111_ANGLE_DEG);
        self.finish(VGrooves::new(period?, angle?))
    }

    fn random(&mut self) -> Option<Box<dyn Texture>> {
        let dist = match self.string("size_distribution") {
            Some((s, span)) => match s.as_str() {
                "log-normal" | "uniform" => Some(s),
                _ => {
                    let fix = match did_you_mean(&s, &["log-normal", "uniform"]) {
                        Some(m) => format!("did you mean \"{m}\"?"),
                        None => "use \"log-normal\" or \"uniform\"".into(),
                    };
                    self.problem_at(
                        &span,
                        format!("unknown size_distribution \"{s}\""),
                        "\"log-normal\" or \"uniform\"".into(),
                        fix,
                    );
                    None
                }
            },
            None => (!self
                .raw
                .entries
                .iter()
                .any(|e| e.key == "size_distribution"))
            .then(|| "log-normal".to_string()),
        };
        let present = |c: &Self, k: &str| c.raw.entries.iter().any(|e| e.key == k);
        // Which dimension the sizes describe, from the keys given.
        let (height_keys, base_keys): (&[&str], &[&str]) = match dist.as_deref() {
            Some("uniform") => (
                &["min_height_um", "max_height_um"],
                &["min_base_um", "max_base_um"],
            ),
            _ => (
                &["mean_height_um", "height_spread_rel"],
                &["mean_base_um", "base_spread_rel"],
            ),
        };
        let other_keys: &[&str] = match dist.as_deref() {
            Some("uniform") => &[
                "mean_height_um",
                "height_spread_rel",
                "mean_base_um",
                "base_spread_rel",
            ],
            _ => &[
                "min_height_um",
                "max_height_um",
                "min_base_um",
                "max_base_um",
            ],
        };
        for &k in other_keys {
            if let Some(i) = self.find(k) {
                let span = self.raw.entries[i].key_span.clone();
                let d = dist.clone().unwrap_or_default();
                self.problem_at(
                    &span,
                    format!("`{k}` does not apply to size_distribution = \"{d}\""),
                    format!(
                        "for \"{d}\": {} or {}",
                        height_keys.join(" + "),
                        base_keys.join(" + ")
                    ),
                    "remove the key or change size_distribution".into(),
                );
            }
        }
        let uses_height = height_keys.iter().any(|k| present(self, k));
        let uses_base = base_keys.iter().any(|k| present(self, k));
        if uses_height && uses_base {
            let k = base_keys
                .iter()
                .find(|k| present(self, k))
                .copied()
                .unwrap_or("");
            let span = self
                .raw
                .entries
                .iter()
                .find(|e| e.key == k)
                .and_then(|e| e.key_span.clone());
            self.problem_at(
                &span,
                format!(
                    "both height keys ({}) and base keys ({}) are given",
                    height_keys.join(", "),
                    base_keys.join(", ")
                ),
                "sizes given either as heights or as bases".into(),
                "keep one set".into(),
            );
        }
        let (size_of, keys) = if uses_base && !uses_height {
            (SizeOf::Base, base_keys)
        } else {
            (SizeOf::Height, height_keys)
        };
        let size = match dist.as_deref() {
            Some("uniform") => {
                let lo = self.required_length(keys[0], "random-pyramids");
                let hi = self.required_length(keys[1], "random-pyramids");
                if let (Some(a), Some(b)) = (lo, hi)
                    && b < a
                {
                    let span = self
                        .raw
                        .entries
                        .iter()
                        .find(|e| e.key == keys[1])
                        .and_then(|e| e.value_span.clone());
                    self.problem_at(
                        &span,
                        format!("`{}` = {b} µm is below `{}` = {a} µm", keys[1], keys[0]),
                        "maximum ≥ minimum".into(),
                        "swap the two values".into(),
                    );
                }
                lo.zip(hi)
                    .map(|(min_um, max_um)| SizeDistribution::Uniform { min_um, max_um })
            }
            Some(_) => {
                let mean = self.required_length(keys[0], "random-pyramids");
                let spread =
                    self.non_negative(keys[1], 0.0, "a relative standard deviation (σ/mean)");
                mean.zip(spread)
                    .map(|(mean_um, spread_rel)| SizeDistribution::LogNormal {
                        mean_um,
                        spread_rel,
                    })
            }
            None => None,
        };
        let angle = self.angle("base_angle_deg", SI_111_ANGLE_DEG);
        let angle_spread =
            self.non_negative("angle_spread_deg", 0.0, "a standard deviation in degrees");
        let count = self.integer(
            "pyramid_count",
            400,
            1..100_001,
            "a whole number of pyramids, 1 to 100000",
        );
        let coverage = match self.number("coverage") {
            Some((c, span)) => {
                if c > 0.0 && c < 1.0 {
                    Some(c)
                } else {
                    self.problem_at(
                        &span,
                        format!("`coverage` = {c} is out of range"),
                        "a target covered fraction strictly between 0 and 1".into(),
                        "set e.g. `coverage = 0.99`".into(),
                    );
                    None
                }
            }
            None => (!present(self, "coverage")).then_some(0.99),
        };
        let seed = self.integer("seed", 1, 0..i64::MAX, "a whole number ≥ 0");
        let spec = RandomPyramidsSpec {
            size: size?,
            size_of,
            base_angle_deg: angle?,
            angle_spread_deg: angle_spread?,
            pyramid_count: count? as usize,
            coverage_target: coverage?,
            seed: seed? as u64,
        };
        self.finish(RandomPyramids::new(spec))
    }

    fn height_map(&mut self, file: &Path) -> Option<Box<dyn Texture>> {
        let image = match self.string("image") {
            Some(v) => Some(v),
            None => {
                if !self.raw.entries.iter().any(|e| e.key == "image") {
                    self.missing(
                        "image",
                        "height-map",
                        "the path of an 8- or 16-bit grayscale PNG or TIFF, relative to this file",
                    );
                }
                None
            }
        };
        let pixel = self.required_length("pixel_um", "height-map");
        let scale = self.required_length("height_scale_um", "height-map");
        let (image, span) = image?;
        let path = file.parent().unwrap_or(Path::new("")).join(&image);
        match HeightMap::from_image(&path, pixel?, scale?) {
            Ok(m) => Some(Box::new(m)),
            Err(e) => {
                let (problem, expected, fix) = match e {
                    TextureError::Image {
                        file,
                        problem,
                        expected,
                        fix,
                    } => (
                        format!("image `{}`: {problem}", file.display()),
                        expected,
                        fix,
                    ),
                    TextureError::Read { file, source } => (
                        format!("image `{}` cannot be read: {source}", file.display()),
                        "an existing PNG or TIFF file; relative paths start at this file's folder"
                            .to_string(),
                        "correct the path".to_string(),
                    ),
                    other => (
                        other.to_string(),
                        "a valid height map".into(),
                        "correct the image".into(),
                    ),
                };
                self.problem_at(&span, problem, expected, fix);
                None
            }
        }
    }

    /// Turns a constructor result into a texture, or a problem at the `kind` line.
    fn finish<T: Texture + 'static>(
        &mut self,
        r: Result<T, TextureError>,
    ) -> Option<Box<dyn Texture>> {
        match r {
            Ok(t) => Some(Box::new(t)),
            Err(TextureError::Parameter {
                problem,
                expected,
                fix,
            }) => {
                let anchor = self.anchor();
                self.problem_at(&anchor, problem, expected, fix);
                None
            }
            Err(other) => {
                let anchor = self.anchor();
                self.problem_at(
                    &anchor,
                    other.to_string(),
                    "a valid texture".into(),
                    "correct the parameters".into(),
                );
                None
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spans_survive_and_positions_are_one_based() {
        let text = "kind = \"regular-pyramids\"\n# a comment\nbase_um = 10\nperiod_um = 12.5\n";
        let raw: RawTexture = toml::from_str(text).unwrap();
        let keys: Vec<&str> = raw.entries.iter().map(|e| e.key.as_str()).collect();
        assert_eq!(keys.len(), 3, "{keys:?}");
        let base = raw.entries.iter().find(|e| e.key == "base_um").unwrap();
        assert_eq!(line_col(text, base.key_span.clone().unwrap().start), (3, 1));
        assert!(raw.build(Path::new("t.toml"), Some(text)).is_ok());
    }

    #[test]
    fn edit_distance_and_suggestions() {
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(
            did_you_mean("mean_hieght_um", keys_of("random-pyramids")),
            Some("mean_height_um")
        );
        assert_eq!(did_you_mean("zzz", keys_of("random-pyramids")), None);
    }
}
