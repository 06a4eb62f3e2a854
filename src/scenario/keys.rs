//! Numeric key paths into a scenario, for sweeps: `light.polar_angle_deg`,
//! `stack.wafer.thickness_um`, `stack.front.coating.0.thickness_nm`,
//! `stack.front.texture.mean_height_um`, `solver.rays`, …
//!
//! [`set_number`] edits the TOML text in place (the value's own characters are replaced, so
//! comments and layout survive); a key the file leaves at its default is added. A texture
//! named by reference is copied inline (its file's keys, with the new value) so that each
//! sweep point is a self-contained scenario. The result is not validated here: load it with
//! [`super::Scenario::from_str`].

use std::path::Path;

use super::ScenarioError;
use super::geometries::{self, GeometrySource};
use super::raw::{Entry, Node, RawScenario, RawValue, Span, find};
use super::validate::{DEFAULT_WEIGHTING_BAND_NM, Kind, element_names, kind_of};
use crate::texture::file::{KINDS, edit_distance, keys_of};

/// Keys whose values are whole numbers.
const WHOLE_LEAVES: &[&str] = &[
    "rays",
    "max_rays",
    "seed",
    "threads",
    "polar_bins",
    "azimuth_bins",
    "profile_bins",
    "pyramid_count",
];

const LIGHT_NUMERIC: &[&str] = &[
    "polar_angle_deg",
    "azimuth_deg",
    "weighting_band_nm.0",
    "weighting_band_nm.1",
    "polarisation.linear_deg",
];

const SOLVER_NUMERIC: &[&str] = &[
    "rays",
    "target_std_error",
    "max_rays",
    "seed",
    "threads",
    "polar_bins",
    "azimuth_bins",
    "profile_bins",
];

/// Random-pyramid size keys: offered only when the texture already uses them (the others do
/// not apply to its size distribution).
const SIZE_KEYS: &[&str] = &[
    "mean_height_um",
    "height_spread_rel",
    "mean_base_um",
    "base_spread_rel",
    "min_height_um",
    "max_height_um",
    "min_base_um",
    "max_base_um",
];

/// Texture keys that are not numbers.
const TEXTURE_NON_NUMERIC: &[&str] = &["size_distribution", "inverted", "image"];

fn key_error(key: &str, problem: String, expected: String, fix: String) -> ScenarioError {
    ScenarioError::Key {
        key: key.to_string(),
        problem,
        expected,
        fix,
    }
}

fn parse(text: &str, base: Option<&Path>) -> Result<RawScenario, ScenarioError> {
    RawScenario::parse(text, Path::new("scenario"), base)
}

/// The stack element tables, in order (empty when `stack` is not an array of tables).
fn stack_tables(root: &[Entry]) -> Vec<(&[Entry], &Node)> {
    match find(root, "stack").map(|e| &e.node.value) {
        Some(RawValue::Array(items)) => items
            .iter()
            .filter_map(|n| n.value.as_table().map(|t| (t, n)))
            .collect(),
        _ => Vec::new(),
    }
}

/// A texture referenced by name or path → its file's table and the folder its relative paths
/// start from.
fn referenced_texture(
    reference: &str,
    base: Option<&Path>,
) -> Option<(toml::Table, Option<std::path::PathBuf>)> {
    let (text, dir) = if geometries::is_path(reference) {
        let path = base?.join(reference);
        let text = std::fs::read_to_string(&path).ok()?;
        (text, path.parent().map(Path::to_path_buf))
    } else {
        match geometries::find_geometry(reference, base).ok()? {
            GeometrySource::File(path) => {
                let text = std::fs::read_to_string(&path).ok()?;
                (text, path.parent().map(Path::to_path_buf))
            }
            GeometrySource::Embedded(_, text) => (text.to_string(), None),
        }
    };
    let table: toml::Table = toml::from_str(&text).ok()?;
    Some((table, dir))
}

/// Numeric keys of a texture table of the given kind (present size keys, other numbers).
fn texture_keys(kind: &str, present: &[String]) -> Vec<String> {
    if !KINDS.contains(&kind) {
        return Vec::new();
    }
    keys_of(kind)
        .iter()
        .filter(|k| !TEXTURE_NON_NUMERIC.contains(k))
        .filter(|k| !SIZE_KEYS.contains(k) || present.iter().any(|p| p == *k))
        .map(|k| k.to_string())
        .collect()
}

/// Every numeric key path of the scenario that [`set_number`] accepts, in file order.
/// `base` is the scenario's folder (for textures named by reference; `None`: built-in only).
pub fn numeric_keys(text: &str, base: Option<&Path>) -> Result<Vec<String>, ScenarioError> {
    let raw = parse(text, base)?;
    Ok(keys_of_raw(&raw))
}

fn keys_of_raw(raw: &RawScenario) -> Vec<String> {
    let mut out: Vec<String> = LIGHT_NUMERIC.iter().map(|k| format!("light.{k}")).collect();
    let stack = stack_tables(&raw.root);
    let tables: Vec<&[Entry]> = stack.iter().map(|(t, _)| *t).collect();
    let names = element_names(&tables);
    for ((t, _), name) in stack.iter().zip(&names) {
        match kind_of(t) {
            Some(Kind::Layer) => out.push(format!("stack.{name}.thickness_um")),
            Some(Kind::Interface) => {
                if let Some(RawValue::Array(films)) = find(t, "coating").map(|e| &e.node.value) {
                    for k in 0..films.len() {
                        out.push(format!("stack.{name}.coating.{k}.thickness_nm"));
                    }
                }
                let (kind, present): (String, Vec<String>) = match find(t, "texture")
                    .map(|e| &e.node.value)
                {
                    Some(RawValue::Table(tt)) => (
                        match find(tt, "kind").map(|e| &e.node.value) {
                            Some(RawValue::String(s)) => s.clone(),
                            _ => String::new(),
                        },
                        tt.iter().map(|e| e.key.clone()).collect(),
                    ),
                    Some(RawValue::String(r)) => match referenced_texture(r, raw.base.as_deref()) {
                        Some((tt, _)) => (
                            tt.get("kind")
                                .and_then(|v| v.as_str())
                                .unwrap_or("")
                                .to_string(),
                            tt.keys().cloned().collect(),
                        ),
                        None => (String::new(), Vec::new()),
                    },
                    _ => (String::new(), Vec::new()),
                };
                for k in texture_keys(&kind, &present) {
                    out.push(format!("stack.{name}.texture.{k}"));
                }
            }
            None => {}
        }
    }
    out.extend(SOLVER_NUMERIC.iter().map(|k| format!("solver.{k}")));
    out
}

/// Sets the number at `key` and returns the new scenario text.
///
/// * `text` – the scenario TOML; `base` – its folder (relative texture paths and project
///   geometries), `None` for built-in text.
/// * `key` – a numeric key path (see [`numeric_keys`]); stack elements by name (explicit or
///   default) or by 0-based position; coating films by 0-based position.
/// * `value` – finite; whole for counts (`rays`, `seed`, `*_bins`, `threads`, `pyramid_count`).
///
/// A key that names no number of this scenario → [`ScenarioError::Key`] listing the nearest
/// keys. A TOML syntax error → [`ScenarioError::Invalid`].
pub fn set_number(
    text: &str,
    base: Option<&Path>,
    key: &str,
    value: f64,
) -> Result<String, ScenarioError> {
    let raw = parse(text, base)?;
    let known = keys_of_raw(&raw);

    // Normalise `stack.<index>` to `stack.<name>`.
    let segs: Vec<&str> = key.trim().split('.').collect();
    let stack = stack_tables(&raw.root);
    let tables: Vec<&[Entry]> = stack.iter().map(|(t, _)| *t).collect();
    let names = element_names(&tables);
    let mut norm: Vec<String> = segs.iter().map(|s| s.to_string()).collect();
    if norm.len() > 2
        && norm[0] == "stack"
        && let Ok(i) = norm[1].parse::<usize>()
        && let Some(n) = names.get(i)
    {
        norm[1] = n.clone();
    }
    let canonical = norm.join(".");
    if !known.contains(&canonical) {
        let mut near: Vec<(usize, &String)> = known
            .iter()
            .map(|k| (edit_distance(&canonical, k), k))
            .collect();
        near.sort();
        let similar: Vec<String> = near.iter().take(4).map(|(_, k)| format!("`{k}`")).collect();
        let fix = match near.first() {
            Some((d, k)) if *d <= (k.len() / 4).max(2) => format!("did you mean `{k}`?"),
            _ => "run `lightfold check` on the scenario to see its stack names; keys are \
                  section.key or stack.<name>.key"
                .into(),
        };
        return Err(key_error(
            key,
            "names no number in this scenario".into(),
            format!(
                "a numeric key of this scenario; the nearest: {}",
                similar.join(", ")
            ),
            fix,
        ));
    }
    if !value.is_finite() {
        return Err(key_error(
            key,
            format!("value {value} is not a finite number"),
            "a finite number".into(),
            "check the sweep range".into(),
        ));
    }
    let leaf = norm.last().map(String::as_str).unwrap_or("");
    let is_texture = norm.len() == 4 && norm[0] == "stack" && norm[2] == "texture";
    let whole = WHOLE_LEAVES.contains(&leaf) || (is_texture && leaf == "seed");
    let value_text = if whole {
        if value.fract() != 0.0 || value.abs() > 9.0e15 {
            return Err(key_error(
                key,
                format!("value {value} is not a whole number"),
                "a whole number (a count or a seed)".into(),
                "use whole-number steps for this key".into(),
            ));
        }
        format!("{}", value as i64)
    } else {
        format_float(value)
    };

    let editor = Editor { raw: &raw };
    match norm[0].as_str() {
        "light" => {
            let light = find(&raw.root, "light");
            match (norm[1].as_str(), norm.len()) {
                ("weighting_band_nm", 3) => {
                    let idx: usize = norm[2].parse().unwrap_or(0);
                    let band = light
                        .and_then(|l| l.node.value.as_table())
                        .and_then(|t| find(t, "weighting_band_nm"));
                    match band.map(|b| (&b.node.value, b)) {
                        Some((RawValue::Array(items), _)) if items.len() == 2 => {
                            Ok(editor.replace(&items[idx].span, &value_text))
                        }
                        _ => {
                            let (lo, hi) = DEFAULT_WEIGHTING_BAND_NM;
                            let mut pair = [format_float(lo), format_float(hi)];
                            pair[idx] = value_text;
                            let v = format!("[{}, {}]", pair[0], pair[1]);
                            match band {
                                Some(b) => Ok(editor.replace(&b.node.span, &v)),
                                None => {
                                    editor.set_in_section("light", "weighting_band_nm", &v, key)
                                }
                            }
                        }
                    }
                }
                ("polarisation", 3) => {
                    let pol = light
                        .and_then(|l| l.node.value.as_table())
                        .and_then(|t| find(t, "polarisation"));
                    match pol {
                        Some(p) => match &p.node.value {
                            RawValue::Table(t) => match find(t, "linear_deg") {
                                Some(e) => Ok(editor.replace(&e.node.span, &value_text)),
                                None => {
                                    editor.insert(Some(&p.node), t, "linear_deg", &value_text, key)
                                }
                            },
                            _ => Ok(editor.replace(
                                &p.node.span,
                                &format!("{{ linear_deg = {value_text} }}"),
                            )),
                        },
                        None => editor.set_in_section(
                            "light",
                            "polarisation",
                            &format!("{{ linear_deg = {value_text} }}"),
                            key,
                        ),
                    }
                }
                (k, 2) => editor.set_in_section("light", k, &value_text, key),
                _ => unreachable_key(key),
            }
        }
        "solver" => editor.set_in_section("solver", &norm[1], &value_text, key),
        "stack" => {
            let i = names.iter().position(|n| *n == norm[1]).unwrap_or(0);
            let (t, node) = stack[i];
            match norm[2].as_str() {
                "thickness_um" => match find(t, "thickness_um") {
                    Some(e) => Ok(editor.replace(&e.node.span, &value_text)),
                    None => editor.insert(Some(node), t, "thickness_um", &value_text, key),
                },
                "coating" => {
                    let idx: usize = norm[3].parse().unwrap_or(0);
                    let film = match find(t, "coating").map(|e| &e.node.value) {
                        Some(RawValue::Array(films)) => films.get(idx),
                        _ => None,
                    };
                    let Some(film) = film else {
                        return unreachable_key(key);
                    };
                    let Some(ft) = film.value.as_table() else {
                        return unreachable_key(key);
                    };
                    match find(ft, "thickness_nm") {
                        Some(e) => Ok(editor.replace(&e.node.span, &value_text)),
                        None => editor.insert(Some(film), ft, "thickness_nm", &value_text, key),
                    }
                }
                "texture" => {
                    let Some(tex) = find(t, "texture") else {
                        return unreachable_key(key);
                    };
                    match &tex.node.value {
                        RawValue::Table(tt) => match find(tt, leaf) {
                            Some(e) => Ok(editor.replace(&e.node.span, &value_text)),
                            None => editor.insert(Some(&tex.node), tt, leaf, &value_text, key),
                        },
                        RawValue::String(reference) => {
                            let Some((mut table, dir)) =
                                referenced_texture(reference, raw.base.as_deref())
                            else {
                                return unreachable_key(key);
                            };
                            table.remove("description");
                            let v: toml::Value = if whole {
                                toml::Value::Integer(value as i64)
                            } else {
                                toml::Value::Float(value)
                            };
                            table.insert(leaf.to_string(), v);
                            if let (Some(toml::Value::String(img)), Some(dir)) =
                                (table.get("image").cloned(), dir)
                            {
                                let abs = dir.join(img);
                                table.insert(
                                    "image".into(),
                                    toml::Value::String(abs.to_string_lossy().into_owned()),
                                );
                            }
                            Ok(editor.replace(&tex.node.span, &inline_table(&table)))
                        }
                        _ => unreachable_key(key),
                    }
                }
                _ => unreachable_key(key),
            }
        }
        _ => unreachable_key(key),
    }
}

fn unreachable_key(key: &str) -> Result<String, ScenarioError> {
    Err(key_error(
        key,
        "cannot be set in this scenario's layout".into(),
        "a key written as `key = value` in a table".into(),
        "write the key in the file once (any value), then sweep it".into(),
    ))
}

/// A float that reads back as a TOML float (`75.0`, `0.002`, `1e-7`).
fn format_float(v: f64) -> String {
    let s = format!("{v}");
    if s.contains('.') || s.contains('e') || s.contains("inf") || s.contains("NaN") {
        s
    } else {
        format!("{s}.0")
    }
}

/// `{ key = value, … }` for a table of plain values.
fn inline_table(t: &toml::Table) -> String {
    let items: Vec<String> = t
        .iter()
        .map(|(k, v)| format!("{k} = {}", inline_value(v)))
        .collect();
    format!("{{ {} }}", items.join(", "))
}

fn inline_value(v: &toml::Value) -> String {
    match v {
        toml::Value::Float(f) => format_float(*f),
        toml::Value::Table(t) => inline_table(t),
        toml::Value::Array(a) => {
            let items: Vec<String> = a.iter().map(inline_value).collect();
            format!("[{}]", items.join(", "))
        }
        other => other.to_string(),
    }
}

struct Editor<'a> {
    raw: &'a RawScenario,
}

impl Editor<'_> {
    fn replace(&self, span: &Span, with: &str) -> String {
        let t = &self.raw.text;
        format!("{}{with}{}", &t[..span.start], &t[span.end..])
    }

    /// Sets `key` in a top-level section, adding the key (or the section) when absent.
    fn set_in_section(
        &self,
        section: &str,
        leaf: &str,
        value: &str,
        full_key: &str,
    ) -> Result<String, ScenarioError> {
        match find(&self.raw.root, section) {
            Some(s) => match &s.node.value {
                RawValue::Table(t) => match find(t, leaf) {
                    Some(e) => Ok(self.replace(&e.node.span, value)),
                    None => self.insert(Some(&s.node), t, leaf, value, full_key),
                },
                _ => unreachable_key(full_key),
            },
            None => {
                let t = &self.raw.text;
                let sep = if t.is_empty() || t.ends_with('\n') {
                    ""
                } else {
                    "\n"
                };
                Ok(format!("{t}{sep}\n[{section}]\n{leaf} = {value}\n"))
            }
        }
    }

    /// Adds `key = value` to a table: inside the braces of an inline table, or after the
    /// last plain entry of a table with a header (before any sub-table header).
    fn insert(
        &self,
        node: Option<&Node>,
        entries: &[Entry],
        key: &str,
        value: &str,
        full_key: &str,
    ) -> Result<String, ScenarioError> {
        let t = &self.raw.text;
        let Some(node) = node else {
            return Ok(format!("{key} = {value}\n{t}"));
        };
        let at = |pos: usize, s: String| format!("{}{s}{}", &t[..pos], &t[pos..]);
        let head = &t[node.span.start..];
        if head.starts_with('{') {
            let close = node.span.end.saturating_sub(1);
            if t.as_bytes().get(close) != Some(&b'}') {
                return unreachable_key(full_key);
            }
            let before = t[..close].trim_end();
            let pos = before.len();
            let s = if entries.is_empty() {
                format!(" {key} = {value}")
            } else {
                format!(", {key} = {value}")
            };
            return Ok(at(pos, s));
        }
        if head.starts_with('[') {
            // End of the last plain entry (inline values), else the end of the header line.
            let plain_end = entries
                .iter()
                .filter(|e| {
                    let s = &t[e.node.span.start..];
                    match e.node.value {
                        RawValue::Table(_) => s.starts_with('{'),
                        RawValue::Array(_) => !s.starts_with("[["),
                        _ => true,
                    }
                })
                .map(|e| e.node.span.end)
                .max();
            let pos = plain_end.unwrap_or_else(|| {
                t[node.span.start..]
                    .find('\n')
                    .map_or(t.len(), |p| node.span.start + p)
            });
            return Ok(at(pos, format!("\n{key} = {value}")));
        }
        unreachable_key(full_key)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn floats_read_back_as_floats() {
        assert_eq!(format_float(75.0), "75.0");
        assert_eq!(format_float(0.002), "0.002");
        assert_eq!(format_float(1e-9), "0.000000001");
        let v: toml::Value = toml::from_str::<toml::Table>(&format!("a = {}", format_float(1e300)))
            .unwrap()["a"]
            .clone();
        assert_eq!(v.as_float(), Some(1e300));
    }

    #[test]
    fn inline_tables_round_trip() {
        let t: toml::Table =
            toml::from_str("kind = \"random-pyramids\"\nmean_height_um = 3.0\nseed = 3\n").unwrap();
        let s = inline_table(&t);
        let back: toml::Table = toml::from_str(&format!("x = {s}")).unwrap();
        assert_eq!(back["x"].as_table().unwrap(), &t);
    }
}
