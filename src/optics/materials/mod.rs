//! Complex refractive index N(λ) = n + ik (k ≥ 0) of materials versus vacuum wavelength in nm.
//!
//! A [`Material`] is a named dispersion model ([`Dispersion`]) with a citation and an explicit
//! validity range; [`Material::index_at`] never extrapolates. Sources of materials:
//!
//! * the built-in [`library()`] (`data/nk/*.csv` embedded in the binary, citations in
//!   `data/nk/SOURCES.md`), looked up with [`by_id`];
//! * a user's CSV file (`wavelength_nm,n,k`, see [`Material::from_csv_file`]);
//! * a literal constant index such as `2.05+0.001i`.
//!
//! [`resolve`] turns what a user writes into a material. Invariant: every material returns
//! k ≥ 0 and n > 0 inside its range. Not here: film stacks (`thinfilm`).

mod csv;
mod library;
pub mod models;

pub use library::ALIASES;
pub use models::{
    Cauchy, Dispersion, DrudeLorentz, DrudeTerm, HC_EV_NM, LorentzOscillator, Sellmeier, Table,
    TaucLorentz,
};

use crate::optics::Index;
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// Relative slack at the ends of a validity range, so that a grid end computed with
/// round-off (e.g. 300 + 9 × 100) still counts as inside. Common practice, no source.
const RANGE_SLACK_REL: f64 = 1e-9;

/// Why a material could not be found, read or evaluated.
#[derive(Debug, thiserror::Error)]
pub enum MaterialError {
    /// The wavelength lies outside the material's data.
    #[error(
        "material `{id}` has no data at {wavelength_nm} nm: its data cover {min_nm}–{max_nm} nm \
         and lightfold never extrapolates\n  fix: keep wavelengths within {min_nm}–{max_nm} nm \
         or choose a material whose data cover {wavelength_nm} nm (`lightfold materials` lists \
         the ranges)"
    )]
    OutOfRange {
        id: String,
        wavelength_nm: f64,
        min_nm: f64,
        max_nm: f64,
    },
    /// The wavelength itself is not a positive finite number.
    #[error(
        "wavelength {wavelength_nm} nm asked of material `{id}` is not a positive finite number"
    )]
    BadWavelength { id: String, wavelength_nm: f64 },
    /// No library material has this id.
    #[error(
        "unknown material `{id}`{}\n  fix: run `lightfold materials` to list the library; \
         a file path must contain `/` or end in `.csv`; a constant index is written like \
         `2.05+0.001i`",
        suggestion_text(.suggestions)
    )]
    Unknown {
        id: String,
        suggestions: Vec<String>,
    },
    /// A literal index did not parse or is unphysical.
    #[error(
        "`{text}` is not a usable refractive index: {problem}\n  expected: n or n+ki with \
         n > 0 and k ≥ 0, e.g. `3.5`, `1.5+0i`, `2.05+0.001i`"
    )]
    BadLiteral { text: String, problem: String },
    /// A material file has a bad line.
    #[error("{}:{line}: {problem}\n  expected: {expected}\n  fix: {fix}", path.display())]
    BadFile {
        path: PathBuf,
        line: usize,
        problem: String,
        expected: String,
        fix: String,
    },
    /// A material file could not be read.
    #[error("{}: cannot read material file: {source}", path.display())]
    Read {
        path: PathBuf,
        source: std::io::Error,
    },
    /// Model parameters are out of their domain.
    #[error("invalid {model} model: {problem}")]
    InvalidModel {
        model: &'static str,
        problem: String,
    },
}

fn suggestion_text(suggestions: &[String]) -> String {
    if suggestions.is_empty() {
        String::new()
    } else {
        let quoted: Vec<String> = suggestions.iter().map(|s| format!("`{s}`")).collect();
        format!("; did you mean {}?", quoted.join(", "))
    }
}

/// A material: id, name, citation and dispersion model. Cheap to clone (shared data),
/// `Send + Sync`.
#[derive(Clone, Debug)]
pub struct Material(Arc<Inner>);

#[derive(Debug)]
struct Inner {
    id: String,
    name: String,
    source: String,
    short_source: String,
    model: Dispersion,
}

impl Material {
    /// A material from any model. `id` should be short and readable; `source` cites the data.
    pub fn new(
        id: impl Into<String>,
        name: impl Into<String>,
        source: impl Into<String>,
        model: Dispersion,
    ) -> Material {
        let source = source.into();
        Material(Arc::new(Inner {
            id: id.into(),
            name: name.into(),
            short_source: source.clone(),
            source,
            model,
        }))
    }

    /// A material with the same index at every wavelength. `index` must have n > 0 and
    /// k ≥ 0 (text from users goes through [`resolve`], which checks this).
    pub fn constant(id: &str, index: Index) -> Material {
        debug_assert!(
            index.re > 0.0 && index.im >= 0.0,
            "constant index {index} must have n > 0, k ≥ 0"
        );
        Material::new(
            id,
            format!("constant N = {}", format_index(index)),
            "user-given constant index",
            Dispersion::Constant(index),
        )
    }

    /// Read a user's n, k file (format in the `csv` module doc: `wavelength_nm,n,k`, `#`
    /// comments, optional `# material:` and `# reference:` lines). The id is the path as
    /// written; errors name file:line.
    pub fn from_csv_file(path: impl AsRef<Path>) -> Result<Material, MaterialError> {
        let path = path.as_ref();
        let text = std::fs::read_to_string(path).map_err(|source| MaterialError::Read {
            path: path.to_path_buf(),
            source,
        })?;
        let parsed = csv::parse(&text, path)?;
        let id = path.display().to_string();
        let source = parsed
            .reference
            .unwrap_or_else(|| format!("user file {id} (no `# reference:` line)"));
        Ok(Material(Arc::new(Inner {
            name: parsed.name.unwrap_or_else(|| id.clone()),
            source,
            short_source: format!("user file {id}"),
            model: Dispersion::Tabulated(parsed.table),
            id,
        })))
    }

    /// Stable readable id, e.g. `si-green2008`.
    pub fn id(&self) -> &str {
        &self.0.id
    }

    /// Descriptive name, e.g. "crystalline Si (intrinsic, 300 K)".
    pub fn name(&self) -> &str {
        &self.0.name
    }

    /// Full citation of the original publication of the data.
    pub fn source(&self) -> &str {
        &self.0.source
    }

    /// One-line citation, e.g. "Green, Sol. Energy Mater. Sol. Cells 92, 1305 (2008)".
    pub fn short_source(&self) -> &str {
        &self.0.short_source
    }

    /// The dispersion model.
    pub fn model(&self) -> &Dispersion {
        &self.0.model
    }

    /// Validity range (min, max) in nm, inclusive; (0, ∞) for a constant.
    pub fn range_nm(&self) -> (f64, f64) {
        self.0.model.range_nm()
    }

    /// N = n + ik at a vacuum wavelength in nm.
    ///
    /// Outside the data range → [`MaterialError::OutOfRange`] naming material, range and
    /// wavelength: never extrapolates. A wavelength that is not positive and finite →
    /// [`MaterialError::BadWavelength`].
    pub fn index_at(&self, wavelength_nm: f64) -> Result<Index, MaterialError> {
        if !(wavelength_nm.is_finite() && wavelength_nm > 0.0) {
            return Err(MaterialError::BadWavelength {
                id: self.id().to_string(),
                wavelength_nm,
            });
        }
        let (lo, hi) = self.range_nm();
        let inside = wavelength_nm >= lo * (1.0 - RANGE_SLACK_REL)
            && wavelength_nm <= hi * (1.0 + RANGE_SLACK_REL);
        if !inside {
            return Err(MaterialError::OutOfRange {
                id: self.id().to_string(),
                wavelength_nm,
                min_nm: lo,
                max_nm: hi,
            });
        }
        Ok(self.0.model.index_in_range(wavelength_nm.clamp(lo, hi)))
    }

    /// Whether k > 0 somewhere in the validity range.
    pub fn is_absorbing_anywhere(&self) -> bool {
        self.0.model.is_absorbing_anywhere()
    }
}

/// Text form of an index, `n+ki` (or `n` when k = 0).
pub fn format_index(index: Index) -> String {
    if index.im == 0.0 {
        format!("{}", index.re)
    } else {
        format!("{}+{}i", index.re, index.im)
    }
}

/// The built-in library, sorted by id (aliases are in [`ALIASES`], not in this list).
pub fn library() -> &'static [Material] {
    library::library()
}

/// Library id (or alias, case-insensitive) → material. Unknown id →
/// [`MaterialError::Unknown`] with up to three nearest ids by edit distance.
pub fn by_id(id: &str) -> Result<Material, MaterialError> {
    let wanted = id.trim().to_ascii_lowercase();
    let canonical = ALIASES
        .iter()
        .find(|(alias, _)| *alias == wanted)
        .map_or(wanted.as_str(), |(_, full)| full);
    let lib = library();
    match lib.binary_search_by(|m| m.id().cmp(canonical)) {
        Ok(i) => Ok(lib[i].clone()),
        Err(_) => Err(MaterialError::Unknown {
            id: id.to_string(),
            suggestions: suggestions(&wanted),
        }),
    }
}

/// Up to three ids (or aliases) nearest to `wanted`. Distance: the smaller of the edit
/// distance to the whole id and to its material part (before the first `-`), so `sinx`
/// finds every `sinx-…` entry. Candidates farther than max(2, len/3) edits are dropped.
fn suggestions(wanted: &str) -> Vec<String> {
    let limit = 2.max(wanted.chars().count() / 3);
    let mut scored: Vec<(usize, String)> = library()
        .iter()
        .map(|m| m.id().to_string())
        .chain(ALIASES.iter().map(|(a, _)| a.to_string()))
        .map(|cand| {
            let head = cand.split('-').next().unwrap_or(&cand);
            let d = edit_distance(wanted, &cand).min(edit_distance(wanted, head));
            (d, cand)
        })
        .filter(|(d, _)| *d <= limit)
        .collect();
    scored.sort();
    scored.into_iter().take(3).map(|(_, c)| c).collect()
}

/// Levenshtein distance over chars.
fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    let mut cur = vec![0; b.len() + 1];
    for (i, ca) in a.chars().enumerate() {
        cur[0] = i + 1;
        for (j, &cb) in b.iter().enumerate() {
            let sub = prev[j] + usize::from(ca != cb);
            cur[j + 1] = sub.min(prev[j + 1] + 1).min(cur[j] + 1);
        }
        std::mem::swap(&mut prev, &mut cur);
    }
    prev[b.len()]
}

/// What a user writes for a material → the material. Decided in this order:
///
/// 1. **file** if the text contains `/` or `\`, or ends in `.csv` (any case): read with
///    [`Material::from_csv_file`] (write `./film.csv` for a file in the current folder);
/// 2. **literal index** if it starts with a digit, `.`, `+` or `-`: `3.5`, `1.5+0i`,
///    `2.05+0.001i` (`j` also accepted; spaces ignored). n > 0 and k ≥ 0 are required;
///    a negative k is rejected with a hint about the n − ik convention;
/// 3. otherwise a **library id** or alias via [`by_id`] (ids start with a letter).
pub fn resolve(spec: &str) -> Result<Material, MaterialError> {
    let text = spec.trim();
    if text.is_empty() {
        return Err(MaterialError::Unknown {
            id: "(empty text)".to_string(),
            suggestions: Vec::new(),
        });
    }
    let looks_like_path =
        text.contains('/') || text.contains('\\') || text.to_ascii_lowercase().ends_with(".csv");
    if looks_like_path {
        return Material::from_csv_file(text);
    }
    let first = text.chars().next().unwrap_or(' ');
    if first.is_ascii_digit() || matches!(first, '.' | '+' | '-') {
        let index = parse_literal(text)?;
        return Ok(Material::constant(&format_index(index), index));
    }
    by_id(text)
}

/// Parse `n`, `n+ki`, `n-ki` (rejected: k < 0), with `i` or `j`; spaces ignored.
pub fn parse_literal(text: &str) -> Result<Index, MaterialError> {
    let fail = |problem: &str| MaterialError::BadLiteral {
        text: text.to_string(),
        problem: problem.to_string(),
    };
    let s: String = text.chars().filter(|c| !c.is_whitespace()).collect();
    let number = |t: &str| t.parse::<f64>().ok().filter(|v| v.is_finite());

    let (re, im) = match s.strip_suffix(['i', 'j']) {
        None => (
            number(&s).ok_or_else(|| fail("not a number (write the real part n, e.g. 3.5)"))?,
            0.0,
        ),
        Some(body) => {
            // Split at the last sign that is not the leading one and not an exponent sign.
            let bytes = body.as_bytes();
            let split = (1..bytes.len())
                .rev()
                .find(|&p| matches!(bytes[p], b'+' | b'-') && !matches!(bytes[p - 1], b'e' | b'E'))
                .ok_or_else(|| fail("an imaginary part needs a real part too, e.g. 2.05+0.001i"))?;
            let (re_txt, im_txt) = body.split_at(split);
            let re = number(re_txt).ok_or_else(|| fail("the real part is not a number"))?;
            let im = match im_txt {
                "+" => 1.0,
                "-" => -1.0,
                t => number(t).ok_or_else(|| fail("the imaginary part is not a number"))?,
            };
            (re, im)
        }
    };
    if re <= 0.0 {
        return Err(fail("n must be > 0"));
    }
    if im < 0.0 {
        return Err(fail(
            "k < 0: lightfold writes N = n + ik with k ≥ 0 for absorption; if your value \
             uses the n − ik convention, flip the sign of k",
        ));
    }
    Ok(Index::new(re, im))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_built_in_entry_loads_and_is_valid_over_its_range() {
        let lib = library();
        assert!(lib.len() >= 30);
        assert!(
            lib.windows(2).all(|w| w[0].id() < w[1].id()),
            "sorted, unique ids"
        );
        for m in lib {
            assert!(
                m.id()
                    .chars()
                    .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || "-.".contains(c))
            );
            let (lo, hi) = m.range_nm();
            let hi = hi.min(3000.0);
            for i in 0..=50 {
                let wl = (lo.max(150.0)) + (hi - lo.max(150.0)) * f64::from(i) / 50.0;
                let n = m.index_at(wl).unwrap();
                assert!(n.re > 0.0 && n.im >= 0.0, "{} at {wl}: {n}", m.id());
            }
        }
    }

    #[test]
    fn edit_distance_counts_edits() {
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("", "abc"), 3);
        assert_eq!(edit_distance("si", "si"), 0);
    }

    #[test]
    fn material_is_send_and_sync() {
        fn check<T: Send + Sync>() {}
        check::<Material>();
    }

    #[test]
    fn literal_forms() {
        assert_eq!(parse_literal("3.5").unwrap(), Index::new(3.5, 0.0));
        assert_eq!(parse_literal("1.5+0i").unwrap(), Index::new(1.5, 0.0));
        assert_eq!(
            parse_literal("2.05 + 0.001i").unwrap(),
            Index::new(2.05, 0.001)
        );
        assert_eq!(parse_literal("1e0+2e-3j").unwrap(), Index::new(1.0, 0.002));
        assert!(parse_literal("2.05-0.001i").is_err());
        assert!(parse_literal("0.001i").is_err());
        assert!(parse_literal("abc").is_err());
    }
}
