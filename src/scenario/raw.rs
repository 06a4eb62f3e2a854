//! The scenario as written: a tree of TOML values, every key and value with its byte span in
//! the source text. Nothing is checked here beyond TOML syntax; `validate` walks the tree.

use std::fmt;
use std::ops::Range;
use std::path::{Path, PathBuf};

use serde::de::{Deserialize, Deserializer, MapAccess, SeqAccess, Visitor};

use super::{Problem, ScenarioError};
use crate::texture::file::line_col;

/// Byte range in the source text.
pub type Span = Range<usize>;

/// A TOML value with spans on every nested key and value.
#[derive(Clone, Debug, PartialEq)]
pub enum RawValue {
    /// A string.
    String(String),
    /// A whole number.
    Integer(i64),
    /// A floating-point number.
    Float(f64),
    /// `true` or `false`.
    Boolean(bool),
    /// A date or time (no scenario key takes one; kept to report it).
    Datetime(String),
    /// An array.
    Array(Vec<Node>),
    /// A table (inline or with a header), keys in file order.
    Table(Vec<Entry>),
}

/// A value and its span.
#[derive(Clone, Debug, PartialEq)]
pub struct Node {
    /// The value.
    pub value: RawValue,
    /// Where it is written.
    pub span: Span,
}

/// A key of a table, its span and its value.
#[derive(Clone, Debug, PartialEq)]
pub struct Entry {
    /// The key (last segment of a dotted key).
    pub key: String,
    /// Where the key is written.
    pub key_span: Span,
    /// The value.
    pub node: Node,
}

impl RawValue {
    /// TOML's name of the value's type, for messages.
    pub fn type_name(&self) -> &'static str {
        match self {
            RawValue::String(_) => "string",
            RawValue::Integer(_) => "integer",
            RawValue::Float(_) => "float",
            RawValue::Boolean(_) => "boolean",
            RawValue::Datetime(_) => "datetime",
            RawValue::Array(_) => "array",
            RawValue::Table(_) => "table",
        }
    }

    /// The same value without spans.
    pub fn to_toml(&self) -> toml::Value {
        match self {
            RawValue::String(s) => toml::Value::String(s.clone()),
            RawValue::Integer(v) => toml::Value::Integer(*v),
            RawValue::Float(v) => toml::Value::Float(*v),
            RawValue::Boolean(b) => toml::Value::Boolean(*b),
            RawValue::Datetime(s) => s
                .parse::<toml::value::Datetime>()
                .map_or_else(|_| toml::Value::String(s.clone()), toml::Value::Datetime),
            RawValue::Array(a) => toml::Value::Array(a.iter().map(|n| n.value.to_toml()).collect()),
            RawValue::Table(t) => toml::Value::Table(
                t.iter()
                    .map(|e| (e.key.clone(), e.node.value.to_toml()))
                    .collect(),
            ),
        }
    }

    /// The entries, if this is a table.
    pub fn as_table(&self) -> Option<&[Entry]> {
        match self {
            RawValue::Table(t) => Some(t),
            _ => None,
        }
    }
}

/// The entry named `key` in `entries`.
pub fn find<'a>(entries: &'a [Entry], key: &str) -> Option<&'a Entry> {
    entries.iter().find(|e| e.key == key)
}

/// toml's private marker for datetimes inside its serde data model.
const DATETIME_FIELD: &str = "$__toml_private_datetime";

// The serde protocol of `toml::Spanned` (serde_spanned 0.6): a struct with these name and
// fields, answered by toml's deserializers with a map {start, end, value}. We speak it
// directly because toml 0.8 gives no span for some keys (inner segments of dotted keys), where
// `Spanned<String>` fails; a key or value without a span gets its parent's span instead.
// `tests/scenario_parse.rs` pins the behaviour.
const SPANNED_NAME: &str = "$__serde_spanned_private_Spanned";
const SPANNED_START: &str = "$__serde_spanned_private_start";
const SPANNED_END: &str = "$__serde_spanned_private_end";
const SPANNED_VALUE: &str = "$__serde_spanned_private_value";
const SPANNED_FIELDS: &[&str] = &[SPANNED_START, SPANNED_END, SPANNED_VALUE];

/// Marks a span the parser did not give (replaced by the parent's span after parsing).
const NO_SPAN: Span = usize::MAX..usize::MAX;

/// A table key and its span, if the parser gives one.
struct Key {
    name: String,
    span: Span,
}

impl<'de> Deserialize<'de> for Key {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct KeyVisitor;
        impl<'de> Visitor<'de> for KeyVisitor {
            type Value = Key;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a key")
            }
            fn visit_str<E>(self, v: &str) -> Result<Key, E> {
                Ok(Key {
                    name: v.to_string(),
                    span: NO_SPAN,
                })
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Key, A::Error> {
                let (start, end, name) = spanned_fields::<A, String>(&mut map)?;
                Ok(Key {
                    name,
                    span: start..end,
                })
            }
        }
        d.deserialize_struct(SPANNED_NAME, SPANNED_FIELDS, KeyVisitor)
    }
}

/// Reads the {start, end, value} map of the spanned protocol.
fn spanned_fields<'de, A: MapAccess<'de>, T: Deserialize<'de>>(
    map: &mut A,
) -> Result<(usize, usize, T), A::Error> {
    use serde::de::Error;
    let mut start = None;
    let mut end = None;
    let mut value = None;
    while let Some(k) = map.next_key::<String>()? {
        match k.as_str() {
            SPANNED_START => start = Some(map.next_value::<usize>()?),
            SPANNED_END => end = Some(map.next_value::<usize>()?),
            SPANNED_VALUE => value = Some(map.next_value::<T>()?),
            other => return Err(A::Error::custom(format!("unexpected span field {other}"))),
        }
    }
    match (start, end, value) {
        (Some(s), Some(e), Some(v)) => Ok((s, e, v)),
        _ => Err(A::Error::custom("incomplete span")),
    }
}

struct ValueVisitor {
    /// Whether a map may be the spanned protocol (true when asked as a `Node`).
    spanned: bool,
}

/// What a visitor produces: a value with its span when the parser gave one.
struct Visited(RawValue, Span);

impl<'de> Visitor<'de> for ValueVisitor {
    type Value = Visited;
    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        f.write_str("a TOML value")
    }
    fn visit_bool<E>(self, v: bool) -> Result<Visited, E> {
        Ok(Visited(RawValue::Boolean(v), NO_SPAN))
    }
    fn visit_i64<E>(self, v: i64) -> Result<Visited, E> {
        Ok(Visited(RawValue::Integer(v), NO_SPAN))
    }
    fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<Visited, E> {
        i64::try_from(v)
            .map(|v| Visited(RawValue::Integer(v), NO_SPAN))
            .map_err(|_| E::custom("integer too large"))
    }
    fn visit_f64<E>(self, v: f64) -> Result<Visited, E> {
        Ok(Visited(RawValue::Float(v), NO_SPAN))
    }
    fn visit_str<E>(self, v: &str) -> Result<Visited, E> {
        Ok(Visited(RawValue::String(v.to_string()), NO_SPAN))
    }
    fn visit_string<E>(self, v: String) -> Result<Visited, E> {
        Ok(Visited(RawValue::String(v), NO_SPAN))
    }
    fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Visited, A::Error> {
        let mut items = Vec::new();
        while let Some(node) = seq.next_element::<Node>()? {
            items.push(node);
        }
        Ok(Visited(RawValue::Array(items), NO_SPAN))
    }
    fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Visited, A::Error> {
        let mut entries = Vec::new();
        let Some(first) = map.next_key::<Key>()? else {
            return Ok(Visited(RawValue::Table(entries), NO_SPAN));
        };
        if self.spanned && first.name == SPANNED_START {
            // The spanned protocol: start, end, value.
            use serde::de::Error;
            let start = map.next_value::<usize>()?;
            let mut end = None;
            let mut value = None;
            while let Some(k) = map.next_key::<String>()? {
                match k.as_str() {
                    SPANNED_END => end = Some(map.next_value::<usize>()?),
                    SPANNED_VALUE => value = Some(map.next_value::<RawValue>()?),
                    other => {
                        return Err(A::Error::custom(format!("unexpected span field {other}")));
                    }
                }
            }
            return match (end, value) {
                (Some(end), Some(v)) => Ok(Visited(v, start..end)),
                _ => Err(A::Error::custom("incomplete span")),
            };
        }
        if first.name == DATETIME_FIELD {
            let text: String = map.next_value()?;
            return Ok(Visited(RawValue::Datetime(text), NO_SPAN));
        }
        let mut key = Some(first);
        while let Some(k) = key
            .take()
            .map_or_else(|| map.next_key::<Key>(), |k| Ok(Some(k)))?
        {
            let node = map.next_value::<Node>()?;
            entries.push(Entry {
                key: k.name,
                key_span: k.span,
                node,
            });
        }
        Ok(Visited(RawValue::Table(entries), NO_SPAN))
    }
}

impl<'de> Deserialize<'de> for RawValue {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        d.deserialize_any(ValueVisitor { spanned: false })
            .map(|v| v.0)
    }
}

impl<'de> Deserialize<'de> for Node {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let Visited(value, span) =
            d.deserialize_struct(SPANNED_NAME, SPANNED_FIELDS, ValueVisitor { spanned: true })?;
        Ok(Node { value, span })
    }
}

/// Replaces missing spans by the nearest enclosing one.
fn fill_spans(entries: &mut [Entry], parent: &Span) {
    for e in entries {
        if e.key_span == NO_SPAN {
            e.key_span = parent.clone();
        }
        let key_span = e.key_span.clone();
        fill_node(&mut e.node, &key_span);
    }
}

fn fill_node(node: &mut Node, parent: &Span) {
    if node.span == NO_SPAN {
        node.span = parent.clone();
    }
    let span = node.span.clone();
    match &mut node.value {
        RawValue::Table(t) => fill_spans(t, &span),
        RawValue::Array(a) => {
            for n in a {
                fill_node(n, &span);
            }
        }
        _ => {}
    }
}

/// A scenario as written: its text, where it came from, and the parsed tree with spans.
#[derive(Clone, Debug)]
pub struct RawScenario {
    /// The TOML text.
    pub text: String,
    /// The file named in messages (the scenario path, or `<embedded demo>`).
    pub file: PathBuf,
    /// Folder that relative paths (spectrum, materials, textures) start from; `None` for
    /// embedded text, which may refer only to built-in data.
    pub base: Option<PathBuf>,
    /// The top-level table.
    pub root: Vec<Entry>,
}

impl RawScenario {
    /// Parses TOML text; `file` names it in messages, `base` anchors relative paths.
    /// A syntax error gives [`ScenarioError::Invalid`] with one problem at its position.
    pub fn parse(text: &str, file: &Path, base: Option<&Path>) -> Result<Self, ScenarioError> {
        let root = match toml::from_str::<RawValue>(text) {
            Ok(RawValue::Table(mut t)) => {
                fill_spans(&mut t, &(0..0));
                t
            }
            Ok(_) => Vec::new(),
            Err(e) => {
                let (line, col) = e.span().map_or((0, 0), |s| line_col(text, s.start));
                let message = e.message().trim().replace('\n', " ");
                let fix = if message.contains("duplicate key `stack`") {
                    "write every stack element under its own [[stack]] header (double brackets); \
                     a single [stack] cannot be mixed with them"
                } else if message.contains("duplicate key") {
                    "each key and each [table] may appear only once: remove or merge the repeat"
                } else {
                    "correct the syntax at that position"
                };
                return Err(ScenarioError::Invalid {
                    file: file.to_path_buf(),
                    problems: vec![Problem {
                        file: file.to_path_buf(),
                        line,
                        col,
                        problem: format!("not valid TOML: {message}"),
                        expected: "TOML syntax: `key = value` lines, `[table]` and `[[stack]]` \
                                   headers, strings in double quotes"
                            .into(),
                        fix: fix.into(),
                    }],
                });
            }
        };
        Ok(RawScenario {
            text: text.to_string(),
            file: file.to_path_buf(),
            base: base.map(Path::to_path_buf),
            root,
        })
    }

    /// 1-based line and column of a byte offset in the text.
    pub fn line_col(&self, pos: usize) -> (usize, usize) {
        line_col(&self.text, pos)
    }
}
