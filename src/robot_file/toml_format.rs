//! Clamber's own robot file format (TOML), documented field by field in
//! `docs/robot-format.md`.
//!
//! Reading goes in two steps. First serde and the `toml` crate read the document into raw
//! tables: unknown keys are rejected there (`deny_unknown_fields`) and every value keeps its
//! byte span ([`toml::Spanned`]). Then this module checks each value's type and form by
//! hand, so every message can name the key and say what was expected, and builds a
//! [`RobotSpec`] together with a [`SourceMap`] that maps the model builder's errors
//! ([`ModelError::locator`]) back to a line and column in the file.

use std::fmt;
use std::marker::PhantomData;
use std::ops::Range;
use std::path::{Path, PathBuf};

use nalgebra::Vector3;
use serde::de::{self, Deserializer, IgnoredAny, MapAccess, SeqAccess, Visitor};
use serde::Deserialize;
use toml::Spanned;

use super::{line_col, RobotFileError};
use crate::math::{pose_from_xyz_rpy, Pose};
use crate::model::{
    EffectorSpec, Geometry, ItemKind, JointSpec, JointType, Limits, LinkSpec, Locator, MeshSource,
    ModelError, Robot, RobotSpec, Shape,
};

type Span = Range<usize>;

// ---------------------------------------------------------------------------------------
// Raw document, as read by serde

/// Any TOML value, with the spans of array elements kept so an error can point at one.
#[derive(Debug, Clone)]
pub(crate) enum Raw {
    Int(i64),
    Float(f64),
    Str(String),
    Bool(bool),
    Array(Vec<Spanned<Raw>>),
    Table,
    Datetime,
}

impl Raw {
    /// What the value is, for "found ..." in messages.
    pub(crate) fn describe(&self) -> String {
        match self {
            Raw::Int(_) | Raw::Float(_) => "a number".into(),
            Raw::Str(s) => format!("a string (\"{s}\")"),
            Raw::Bool(_) => "a boolean".into(),
            Raw::Array(a) => format!(
                "an array of {} item{}",
                a.len(),
                if a.len() == 1 { "" } else { "s" }
            ),
            Raw::Table => "a table".into(),
            Raw::Datetime => "a date-time".into(),
        }
    }
}

/// The key under which the `toml` crate hands a date-time to `deserialize_any`.
const TOML_DATETIME_KEY: &str = "$__toml_private_datetime";

impl<'de> Deserialize<'de> for Raw {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct RawVisitor;
        impl<'de> Visitor<'de> for RawVisitor {
            type Value = Raw;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a TOML value")
            }
            fn visit_bool<E>(self, v: bool) -> Result<Raw, E> {
                Ok(Raw::Bool(v))
            }
            fn visit_i64<E>(self, v: i64) -> Result<Raw, E> {
                Ok(Raw::Int(v))
            }
            fn visit_u64<E>(self, v: u64) -> Result<Raw, E> {
                Ok(i64::try_from(v).map_or(Raw::Float(v as f64), Raw::Int))
            }
            fn visit_f64<E>(self, v: f64) -> Result<Raw, E> {
                Ok(Raw::Float(v))
            }
            fn visit_str<E>(self, v: &str) -> Result<Raw, E> {
                Ok(Raw::Str(v.to_string()))
            }
            fn visit_string<E>(self, v: String) -> Result<Raw, E> {
                Ok(Raw::Str(v))
            }
            fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Raw, A::Error> {
                let mut items = Vec::new();
                while let Some(item) = seq.next_element::<Spanned<Raw>>()? {
                    items.push(item);
                }
                Ok(Raw::Array(items))
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Raw, A::Error> {
                let mut datetime = false;
                while let Some(key) = map.next_key::<String>()? {
                    datetime |= key == TOML_DATETIME_KEY;
                    map.next_value::<IgnoredAny>()?;
                }
                Ok(if datetime { Raw::Datetime } else { Raw::Table })
            }
        }
        d.deserialize_any(RawVisitor)
    }
}

/// A table type of the document: its key and how it is written, for messages.
pub(crate) trait Section {
    const KEY: &'static str;
    const HEADER: &'static str;
}

fn found<E: de::Error>(key: &str, header: &str, what: &str) -> E {
    E::custom(format!("`{key}` expected {header}, found {what}"))
}

/// An array of tables (`[[link]]`), each element with its span (the span of its header).
pub(crate) struct Tables<T>(pub(crate) Vec<Spanned<T>>);

impl<T> Default for Tables<T> {
    fn default() -> Self {
        Tables(Vec::new())
    }
}

impl<'de, T: Deserialize<'de> + Section> Deserialize<'de> for Tables<T> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V<T>(PhantomData<T>);
        impl<'de, T: Deserialize<'de> + Section> Visitor<'de> for V<T> {
            type Value = Tables<T>;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                write!(f, "an array of tables ({})", T::HEADER)
            }
            fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Self::Value, A::Error> {
                let mut items = Vec::new();
                while let Some(item) = seq.next_element::<Spanned<T>>()? {
                    items.push(item);
                }
                Ok(Tables(items))
            }
            fn visit_map<A: MapAccess<'de>>(self, _: A) -> Result<Self::Value, A::Error> {
                Err(found(
                    T::KEY,
                    &format!("an array of tables, written {}", T::HEADER),
                    "a single table",
                ))
            }
            fn visit_bool<E: de::Error>(self, _: bool) -> Result<Self::Value, E> {
                Err(found(
                    T::KEY,
                    &format!("an array of tables ({})", T::HEADER),
                    "a boolean",
                ))
            }
            fn visit_i64<E: de::Error>(self, _: i64) -> Result<Self::Value, E> {
                Err(found(
                    T::KEY,
                    &format!("an array of tables ({})", T::HEADER),
                    "a number",
                ))
            }
            fn visit_u64<E: de::Error>(self, _: u64) -> Result<Self::Value, E> {
                Err(found(
                    T::KEY,
                    &format!("an array of tables ({})", T::HEADER),
                    "a number",
                ))
            }
            fn visit_f64<E: de::Error>(self, _: f64) -> Result<Self::Value, E> {
                Err(found(
                    T::KEY,
                    &format!("an array of tables ({})", T::HEADER),
                    "a number",
                ))
            }
            fn visit_str<E: de::Error>(self, _: &str) -> Result<Self::Value, E> {
                Err(found(
                    T::KEY,
                    &format!("an array of tables ({})", T::HEADER),
                    "a string",
                ))
            }
        }
        d.deserialize_any(V(PhantomData))
    }
}

/// A single table (`[robot]`).
pub(crate) struct One<T>(pub(crate) T);

impl<'de, T: Deserialize<'de> + Section> Deserialize<'de> for One<T> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V<T>(PhantomData<T>);
        impl<'de, T: Deserialize<'de> + Section> Visitor<'de> for V<T> {
            type Value = One<T>;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                write!(f, "a table ({})", T::HEADER)
            }
            fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<Self::Value, A::Error> {
                T::deserialize(de::value::MapAccessDeserializer::new(map)).map(One)
            }
            fn visit_seq<A: SeqAccess<'de>>(self, _: A) -> Result<Self::Value, A::Error> {
                Err(found(
                    T::KEY,
                    &format!("a single table ({})", T::HEADER),
                    "an array",
                ))
            }
            fn visit_bool<E: de::Error>(self, _: bool) -> Result<Self::Value, E> {
                Err(found(
                    T::KEY,
                    &format!("a table ({})", T::HEADER),
                    "a boolean",
                ))
            }
            fn visit_i64<E: de::Error>(self, _: i64) -> Result<Self::Value, E> {
                Err(found(
                    T::KEY,
                    &format!("a table ({})", T::HEADER),
                    "a number",
                ))
            }
            fn visit_u64<E: de::Error>(self, _: u64) -> Result<Self::Value, E> {
                Err(found(
                    T::KEY,
                    &format!("a table ({})", T::HEADER),
                    "a number",
                ))
            }
            fn visit_f64<E: de::Error>(self, _: f64) -> Result<Self::Value, E> {
                Err(found(
                    T::KEY,
                    &format!("a table ({})", T::HEADER),
                    "a number",
                ))
            }
            fn visit_str<E: de::Error>(self, _: &str) -> Result<Self::Value, E> {
                Err(found(
                    T::KEY,
                    &format!("a table ({})", T::HEADER),
                    "a string",
                ))
            }
        }
        d.deserialize_any(V(PhantomData))
    }
}

pub(crate) type Field = Option<Spanned<Raw>>;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct FileRaw {
    robot: Option<Spanned<One<RobotRaw>>>,
    collision: Option<Spanned<One<CollisionRaw>>>,
    #[serde(default)]
    link: Tables<LinkRaw>,
    #[serde(default)]
    joint: Tables<JointRaw>,
    #[serde(default)]
    effector: Tables<EffectorRaw>,
}
const FILE_KEYS: &[&str] = &["robot", "collision", "link", "joint", "effector"];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RobotRaw {
    name: Field,
}
impl Section for RobotRaw {
    const KEY: &'static str = "robot";
    const HEADER: &'static str = "[robot]";
}
const ROBOT_KEYS: &[&str] = &["name"];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct CollisionRaw {
    ignore_adjacent: Field,
    ignore: Field,
}
impl Section for CollisionRaw {
    const KEY: &'static str = "collision";
    const HEADER: &'static str = "[collision]";
}
pub(crate) const COLLISION_KEYS: &[&str] = &["ignore_adjacent", "ignore"];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct LinkRaw {
    name: Field,
    #[serde(default)]
    shape: Tables<ShapeRaw>,
}
impl Section for LinkRaw {
    const KEY: &'static str = "link";
    const HEADER: &'static str = "[[link]]";
}
pub(crate) const LINK_KEYS: &[&str] = &["name", "shape"];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
#[derive(Default)]
pub(crate) struct ShapeRaw {
    #[serde(rename = "type")]
    pub(crate) kind: Field,
    pub(crate) radius: Field,
    pub(crate) length: Field,
    pub(crate) size: Field,
    pub(crate) file: Field,
    pub(crate) scale: Field,
    pub(crate) convex: Field,
    pub(crate) xyz: Field,
    pub(crate) rpy: Field,
}
impl Section for ShapeRaw {
    const KEY: &'static str = "shape";
    const HEADER: &'static str = "[[link.shape]]";
}
pub(crate) const SHAPE_KEYS: &[&str] = &[
    "type", "radius", "length", "size", "file", "scale", "convex", "xyz", "rpy",
];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct JointRaw {
    name: Field,
    #[serde(rename = "type")]
    kind: Field,
    parent: Field,
    child: Field,
    xyz: Field,
    rpy: Field,
    axis: Field,
    lower: Field,
    upper: Field,
    velocity: Field,
    acceleration: Field,
    passive: Field,
}
impl Section for JointRaw {
    const KEY: &'static str = "joint";
    const HEADER: &'static str = "[[joint]]";
}
pub(crate) const JOINT_KEYS: &[&str] = &[
    "name",
    "type",
    "parent",
    "child",
    "xyz",
    "rpy",
    "axis",
    "lower",
    "upper",
    "velocity",
    "acceleration",
    "passive",
];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct EffectorRaw {
    name: Field,
    link: Field,
    xyz: Field,
    rpy: Field,
}
impl Section for EffectorRaw {
    const KEY: &'static str = "effector";
    const HEADER: &'static str = "[[effector]]";
}
pub(crate) const EFFECTOR_KEYS: &[&str] = &["name", "link", "xyz", "rpy"];

/// Where each set of keys is allowed, to name the table in an unknown-key message.
const SECTIONS: &[(&str, &[&str])] = &[
    ("at the top level", FILE_KEYS),
    ("in [robot]", ROBOT_KEYS),
    ("in [collision]", COLLISION_KEYS),
    ("in [[link]]", LINK_KEYS),
    ("in [[link.shape]]", SHAPE_KEYS),
    ("in [[joint]]", JOINT_KEYS),
    ("in [[effector]]", EFFECTOR_KEYS),
];

const JOINT_TYPES: &[&str] = &["revolute", "prismatic", "fixed", "floating"];
pub(crate) const SHAPE_TYPES: &[&str] = &["sphere", "box", "capsule", "cylinder", "mesh"];

// ---------------------------------------------------------------------------------------
// Suggestions

/// The expected word closest to `got`, when it is close enough to be a likely typo.
/// Uses the Damerau-Levenshtein distance from `strsim` (transpositions count as one edit),
/// allowing about one edit per three characters.
pub(crate) fn suggest<'a>(got: &str, expected: &[&'a str]) -> Option<&'a str> {
    let got_lower = got.to_ascii_lowercase();
    expected
        .iter()
        .map(|&e| (strsim::damerau_levenshtein(&got_lower, e), e))
        .filter(|&(d, e)| d <= (e.chars().count().max(got.chars().count()) / 3).max(1))
        .min_by_key(|&(d, _)| d)
        .map(|(_, e)| e)
}

pub(crate) fn did_you_mean(got: &str, expected: &[&str]) -> String {
    suggest(got, expected)
        .map(|s| format!("; did you mean `{s}`?"))
        .unwrap_or_default()
}

pub(crate) fn backticked(words: &[&str]) -> String {
    words
        .iter()
        .map(|w| format!("`{w}`"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Words between backticks in `s`, in order.
fn backticked_words(s: &str) -> Vec<&str> {
    s.split('`').skip(1).step_by(2).collect()
}

/// Rewrite serde's "unknown field `x`, expected one of `a`, `b`" into our wording, naming
/// the table and suggesting the closest key.
fn rewrite_serde_message(message: &str) -> String {
    rewrite_unknown_key(message, SECTIONS)
}

/// [`rewrite_serde_message`] for another document: `sections` names each table by its key
/// list (the first table whose list matches is named). Shared with the scenario reader.
pub(crate) fn rewrite_unknown_key(message: &str, sections: &[(&str, &[&str])]) -> String {
    if let Some(rest) = message.strip_prefix("unknown field ") {
        let words = backticked_words(rest);
        if let Some((&got, expected)) = words.split_first() {
            let section = sections
                .iter()
                .find(|(_, keys)| *keys == expected)
                .map(|(s, _)| *s);
            let expected: Vec<&str> = match sections.iter().find(|(_, keys)| *keys == expected) {
                Some((_, keys)) => keys.to_vec(),
                None => expected.to_vec(),
            };
            return format!(
                "unknown key `{got}`{}; expected one of {}{}",
                section.map(|s| format!(" {s}")).unwrap_or_default(),
                backticked(&expected),
                did_you_mean(got, &expected)
            );
        }
    }
    message.to_string()
}

/// The parser says only "duplicate key"; add the key, read from the text at the span.
pub(crate) fn name_duplicate_key(message: String, text: &str, span: Option<Span>) -> String {
    if message != "duplicate key" {
        return message;
    }
    let key: String = span
        .and_then(|s| text.get(s.start..))
        .map(|rest| {
            rest.chars()
                .take_while(|c| c.is_ascii_alphanumeric() || *c == '_' || *c == '-')
                .collect()
        })
        .unwrap_or_default();
    if key.is_empty() {
        message
    } else {
        format!("duplicate key `{key}` (each key may be given once per table)")
    }
}

// ---------------------------------------------------------------------------------------
// Source map

/// 1-based position in the robot file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Position {
    pub line: usize,
    pub column: usize,
}

/// Positions of one item (a table such as one `[[joint]]`): its header and its keys' values.
#[derive(Clone, Debug, Default)]
struct Entry {
    table: Option<Position>,
    fields: Vec<(&'static str, Position)>,
}

impl Entry {
    fn field(&self, key: &str) -> Option<Position> {
        self.fields.iter().find(|(k, _)| *k == key).map(|&(_, p)| p)
    }
}

/// Source positions of the items of a robot file, used to map a [`Locator`] (from a
/// [`ModelError`]) to a line and column.
#[derive(Clone, Debug, Default)]
pub struct SourceMap {
    robot: Entry,
    links: Vec<Entry>,
    /// `shapes[link][shape]`, link indices as in the spec.
    shapes: Vec<Vec<Entry>>,
    joints: Vec<Entry>,
    effectors: Vec<Entry>,
    /// Per ignored pair: fields `first` and `second` (the two names).
    pairs: Vec<Entry>,
}

impl SourceMap {
    /// Position in the file and the key (as written in the file) of a place in the spec.
    /// Model fields that are not file keys are mapped to the keys that give them:
    /// `origin`/`grip` to `xyz` (or `rpy`), `mesh` to `file`, `limits` to `lower` (or the
    /// first limit key present). When the key is absent, the item's table header is given.
    pub fn locate(&self, at: &Locator) -> Option<(Position, &'static str)> {
        let entry = match at.kind {
            ItemKind::Robot => Some(&self.robot),
            ItemKind::Link => self.links.get(at.index),
            ItemKind::Joint => self.joints.get(at.index),
            ItemKind::Effector => self.effectors.get(at.index),
            ItemKind::Shape => self.shapes.get(at.index).and_then(|s| s.get(at.sub_index)),
            ItemKind::IgnoredPair => self.pairs.get(at.index),
        }?;
        let keys: &[&'static str] = match (at.kind, at.field) {
            (ItemKind::IgnoredPair, "first") => &["first"],
            (ItemKind::IgnoredPair, "second") => &["second"],
            (ItemKind::IgnoredPair, _) => &["first"],
            (_, "origin") | (_, "grip") => &["xyz", "rpy"],
            (_, "mesh") => &["file"],
            (_, "limits") => &["lower", "upper", "velocity", "acceleration"],
            (_, f) => return Some((entry.field(f).or(entry.table)?, f)),
        };
        for &k in keys {
            if let Some(p) = entry.field(k) {
                let key = if at.kind == ItemKind::IgnoredPair {
                    "ignore"
                } else {
                    k
                };
                return Some((p, key));
            }
        }
        let key = if at.kind == ItemKind::IgnoredPair {
            "ignore"
        } else {
            keys.first().copied().unwrap_or(at.field)
        };
        entry.table.map(|p| (p, key))
    }
}

// ---------------------------------------------------------------------------------------
// Checking values

/// Which item a value belongs to, for messages and for [`Locator`]s.
struct Item {
    desc: String,
    kind: ItemKind,
    index: usize,
    sub_index: usize,
}

impl Item {
    fn at(&self, field: &'static str) -> Locator {
        Locator {
            kind: self.kind,
            index: self.index,
            sub_index: self.sub_index,
            field,
        }
    }
}

struct Reader<'a> {
    text: &'a str,
    path: &'a Path,
    map: SourceMap,
}

type Res<T> = Result<T, RobotFileError>;

impl<'a> Reader<'a> {
    fn pos(&self, span: &Span) -> Position {
        let (line, column) = line_col(self.text, span.start);
        Position { line, column }
    }

    fn syntax(&self, span: &Span, message: String) -> RobotFileError {
        let p = self.pos(span);
        RobotFileError::Syntax {
            path: self.path.to_path_buf(),
            line: p.line,
            column: p.column,
            message,
        }
    }

    fn wrong_type(&self, field: &str, expected: &str, v: &Spanned<Raw>) -> RobotFileError {
        self.syntax(
            &v.span(),
            format!(
                "`{field}` expected {expected}, found {}",
                v.get_ref().describe()
            ),
        )
    }

    fn not_finite(
        &self,
        span: &Span,
        item: &Item,
        field: &'static str,
        value: f64,
    ) -> RobotFileError {
        let p = self.pos(span);
        RobotFileError::Model {
            path: self.path.to_path_buf(),
            line: p.line,
            column: p.column,
            field: field.to_string(),
            source: Box::new(ModelError::NotFinite {
                item: item.desc.clone(),
                field,
                value,
                at: item.at(field),
            }),
        }
    }

    fn required<'v>(
        &self,
        v: &'v Field,
        field: &str,
        table: &Span,
        what: &str,
    ) -> Res<&'v Spanned<Raw>> {
        v.as_ref()
            .ok_or_else(|| self.syntax(table, format!("{what}: missing required key `{field}`")))
    }

    /// Reject a key that the item's type does not take.
    fn forbid(&self, v: &Field, field: &str, why: &str) -> Res<()> {
        match v {
            Some(v) => Err(self.syntax(&v.span(), format!("`{field}` is not allowed {why}"))),
            None => Ok(()),
        }
    }

    fn string(&self, v: &Spanned<Raw>, field: &str) -> Res<String> {
        match v.get_ref() {
            Raw::Str(s) if !s.is_empty() => Ok(s.clone()),
            Raw::Str(_) => {
                Err(self.syntax(&v.span(), format!("`{field}` expected a non-empty string")))
            }
            _ => Err(self.wrong_type(field, "a string", v)),
        }
    }

    fn boolean(&self, v: &Spanned<Raw>, field: &str) -> Res<bool> {
        match v.get_ref() {
            Raw::Bool(b) => Ok(*b),
            _ => Err(self.wrong_type(field, "a boolean (true or false)", v)),
        }
    }

    /// A finite number (integers are accepted). `nan` and `inf` are rejected with a
    /// [`ModelError::NotFinite`] pointing at the value.
    fn number(&self, v: &Spanned<Raw>, field: &'static str, item: &Item) -> Res<f64> {
        match v.get_ref() {
            Raw::Int(i) => Ok(*i as f64),
            Raw::Float(x) if x.is_finite() => Ok(*x),
            Raw::Float(x) => Err(self.not_finite(&v.span(), item, field, *x)),
            _ => Err(self.wrong_type(field, "a number", v)),
        }
    }

    /// An array of exactly `n` finite numbers.
    fn numbers(
        &self,
        v: &Spanned<Raw>,
        field: &'static str,
        n: usize,
        item: &Item,
    ) -> Res<Vec<f64>> {
        let expected = format!("an array of {n} numbers");
        match v.get_ref() {
            Raw::Array(items) if items.len() == n => items
                .iter()
                .enumerate()
                .map(|(k, x)| match x.get_ref() {
                    Raw::Int(i) => Ok(*i as f64),
                    Raw::Float(f) if f.is_finite() => Ok(*f),
                    Raw::Float(f) => Err(self.not_finite(&x.span(), item, field, *f)),
                    other => Err(self.syntax(
                        &x.span(),
                        format!(
                            "`{field}` expected {expected}, but item {} is {}",
                            k + 1,
                            other.describe()
                        ),
                    )),
                })
                .collect(),
            _ => Err(self.wrong_type(field, &expected, v)),
        }
    }

    fn vec3(&self, v: &Spanned<Raw>, field: &'static str, item: &Item) -> Res<Vector3<f64>> {
        let x = self.numbers(v, field, 3, item)?;
        Ok(Vector3::from_iterator(x))
    }

    fn opt_vec3(
        &self,
        v: &Field,
        field: &'static str,
        item: &Item,
        default: Vector3<f64>,
    ) -> Res<Vector3<f64>> {
        v.as_ref()
            .map_or(Ok(default), |v| self.vec3(v, field, item))
    }

    fn pose(&self, xyz: &Field, rpy: &Field, item: &Item) -> Res<Pose> {
        let t = self.opt_vec3(xyz, "xyz", item, Vector3::zeros())?;
        let r = self.opt_vec3(rpy, "rpy", item, Vector3::zeros())?;
        Ok(pose_from_xyz_rpy([t.x, t.y, t.z], [r.x, r.y, r.z]))
    }

    /// A word from a fixed list (`type` keys).
    fn choice(&self, v: &Spanned<Raw>, field: &str, choices: &[&str]) -> Res<String> {
        match v.get_ref() {
            Raw::Str(s) if choices.contains(&s.as_str()) => Ok(s.clone()),
            Raw::Str(s) => Err(self.syntax(
                &v.span(),
                format!(
                    "`{field}` expected one of {}, found \"{s}\"{}",
                    backticked(choices),
                    did_you_mean(s, choices)
                ),
            )),
            _ => Err(self.wrong_type(field, &format!("one of {}", backticked(choices)), v)),
        }
    }

    /// Record the positions of the keys present in an item.
    fn entry(&self, table: &Span, fields: &[(&'static str, &Field)]) -> Entry {
        Entry {
            table: Some(self.pos(table)),
            fields: fields
                .iter()
                .filter_map(|(k, v)| v.as_ref().map(|v| (*k, self.pos(&v.span()))))
                .collect(),
        }
    }

    // -----------------------------------------------------------------------------------

    fn robot(&mut self, raw: &Option<Spanned<One<RobotRaw>>>) -> Res<String> {
        let Some(robot) = raw else {
            return Err(self.syntax(
                &(0..0),
                "missing required table [robot] (with its `name`)".into(),
            ));
        };
        let span = robot.span();
        let r = &robot.get_ref().0;
        self.map.robot = self.entry(&span, &[("name", &r.name)]);
        let name = self.required(&r.name, "name", &span, "[robot]")?;
        self.string(name, "name")
    }

    fn collision(
        &mut self,
        raw: &Option<Spanned<One<CollisionRaw>>>,
        spec: &mut RobotSpec,
    ) -> Res<()> {
        let Some(c) = raw else { return Ok(()) };
        let c = &c.get_ref().0;
        if let Some(v) = &c.ignore_adjacent {
            spec.ignore_adjacent = self.boolean(v, "ignore_adjacent")?;
        }
        let Some(v) = &c.ignore else { return Ok(()) };
        let expected = "an array of link name pairs, like [[\"a\", \"b\"]]";
        let Raw::Array(pairs) = v.get_ref() else {
            return Err(self.wrong_type("ignore", expected, v));
        };
        for pair in pairs {
            let (a, b) = match pair.get_ref() {
                Raw::Array(names) => match names.as_slice() {
                    [a, b] => (a, b),
                    _ => return Err(self.wrong_type("ignore", expected, pair)),
                },
                _ => return Err(self.wrong_type("ignore", expected, pair)),
            };
            let (na, nb) = (self.string(a, "ignore")?, self.string(b, "ignore")?);
            self.map.pairs.push(Entry {
                table: Some(self.pos(&pair.span())),
                fields: vec![
                    ("first", self.pos(&a.span())),
                    ("second", self.pos(&b.span())),
                ],
            });
            spec.ignored_pairs.push((na, nb));
        }
        Ok(())
    }

    fn link(&mut self, li: usize, raw: &Spanned<LinkRaw>, base_dir: &Path) -> Res<LinkSpec> {
        let span = raw.span();
        let l = raw.get_ref();
        self.map.links.push(self.entry(&span, &[("name", &l.name)]));
        let what = format!("[[link]] number {}", li + 1);
        let name = self.string(self.required(&l.name, "name", &span, &what)?, "name")?;
        let mut shapes = Vec::with_capacity(l.shape.0.len());
        self.map.shapes.push(Vec::new());
        for (si, s) in l.shape.0.iter().enumerate() {
            shapes.push(self.shape(&name, li, si, s, base_dir)?);
        }
        Ok(LinkSpec { name, shapes })
    }

    fn shape(
        &mut self,
        link: &str,
        li: usize,
        si: usize,
        raw: &Spanned<ShapeRaw>,
        base_dir: &Path,
    ) -> Res<Shape> {
        self.shape_described(link, None, li, si, raw, base_dir)
    }

    /// [`Reader::shape`], naming the shape `described` in messages when given.
    fn shape_described(
        &mut self,
        link: &str,
        described: Option<&str>,
        li: usize,
        si: usize,
        raw: &Spanned<ShapeRaw>,
        base_dir: &Path,
    ) -> Res<Shape> {
        let span = raw.span();
        let s = raw.get_ref();
        let entry = self.entry(
            &span,
            &[
                ("type", &s.kind),
                ("radius", &s.radius),
                ("length", &s.length),
                ("size", &s.size),
                ("file", &s.file),
                ("scale", &s.scale),
                ("convex", &s.convex),
                ("xyz", &s.xyz),
                ("rpy", &s.rpy),
            ],
        );
        if let Some(v) = self.map.shapes.last_mut() {
            v.push(entry);
        }
        let item = Item {
            desc: described.map_or_else(|| format!("link `{link}` shape {si}"), str::to_string),
            kind: ItemKind::Shape,
            index: li,
            sub_index: si,
        };
        let what = match described {
            Some(d) => d.to_string(),
            None => format!("link `{link}` shape {si}"),
        };
        let kind = self.choice(
            self.required(&s.kind, "type", &span, &what)?,
            "type",
            SHAPE_TYPES,
        )?;
        let origin = self.pose(&s.xyz, &s.rpy, &item)?;
        // Keys each shape type takes besides `type`, `xyz` and `rpy`.
        let takes: &[&str] = match kind.as_str() {
            "sphere" => &["radius"],
            "box" => &["size"],
            "capsule" | "cylinder" => &["radius", "length"],
            _ => &["file", "scale", "convex"],
        };
        for (key, v) in [
            ("radius", &s.radius),
            ("length", &s.length),
            ("size", &s.size),
            ("file", &s.file),
            ("scale", &s.scale),
            ("convex", &s.convex),
        ] {
            if !takes.contains(&key) {
                self.forbid(
                    v,
                    key,
                    &format!("on a {kind} shape (it takes {})", backticked(takes)),
                )?;
            }
        }
        let req = |v: &'_ Field, key: &str| -> Res<Spanned<Raw>> {
            self.required(v, key, &span, &format!("{what} ({kind})"))
                .cloned()
        };
        let mut source = None;
        let geometry = match kind.as_str() {
            "sphere" => Geometry::Sphere {
                radius: self.number(&req(&s.radius, "radius")?, "radius", &item)?,
            },
            "box" => Geometry::Cuboid {
                size: self.vec3(&req(&s.size, "size")?, "size", &item)?,
            },
            "capsule" => Geometry::Capsule {
                radius: self.number(&req(&s.radius, "radius")?, "radius", &item)?,
                length: self.number(&req(&s.length, "length")?, "length", &item)?,
            },
            "cylinder" => Geometry::Cylinder {
                radius: self.number(&req(&s.radius, "radius")?, "radius", &item)?,
                length: self.number(&req(&s.length, "length")?, "length", &item)?,
            },
            _ => {
                let file_v = req(&s.file, "file")?;
                let file = self.string(&file_v, "file")?;
                let scale = self.opt_vec3(&s.scale, "scale", &item, Vector3::new(1.0, 1.0, 1.0))?;
                let convex = match &s.convex {
                    Some(v) => self.boolean(v, "convex")?,
                    None => true,
                };
                let mesh_path = base_dir.join(&file);
                let geometry = self.mesh(&file_v, &mesh_path, scale, convex)?;
                source = Some(MeshSource {
                    path: mesh_path,
                    scale,
                });
                geometry
            }
        };
        Ok(Shape {
            origin,
            geometry,
            source,
        })
    }

    fn mesh(
        &self,
        file_v: &Spanned<Raw>,
        mesh_path: &Path,
        scale: Vector3<f64>,
        convex: bool,
    ) -> Res<Geometry> {
        let err = |message: String| {
            let p = self.pos(&file_v.span());
            RobotFileError::Mesh {
                path: self.path.to_path_buf(),
                line: p.line,
                column: p.column,
                field: "file".into(),
                mesh: mesh_path.to_path_buf(),
                message,
            }
        };
        // Checked here so a missing file gets the same message whatever the mesh reader says.
        if !mesh_path.is_file() {
            return Err(err(format!(
                "file not found (mesh paths are relative to the robot file's directory, `{}`)",
                mesh_path
                    .parent()
                    .map(|p| p.display().to_string())
                    .unwrap_or_default()
            )));
        }
        load_mesh_for_toml(mesh_path, scale, convex).map_err(err)
    }

    fn joint(&mut self, ji: usize, raw: &Spanned<JointRaw>) -> Res<JointSpec> {
        let span = raw.span();
        let j = raw.get_ref();
        self.map.joints.push(self.entry(
            &span,
            &[
                ("name", &j.name),
                ("type", &j.kind),
                ("parent", &j.parent),
                ("child", &j.child),
                ("xyz", &j.xyz),
                ("rpy", &j.rpy),
                ("axis", &j.axis),
                ("lower", &j.lower),
                ("upper", &j.upper),
                ("velocity", &j.velocity),
                ("acceleration", &j.acceleration),
                ("passive", &j.passive),
            ],
        ));
        let what = format!("[[joint]] number {}", ji + 1);
        let name = self.string(self.required(&j.name, "name", &span, &what)?, "name")?;
        let what = format!("joint `{name}`");
        let item = Item {
            desc: what.clone(),
            kind: ItemKind::Joint,
            index: ji,
            sub_index: 0,
        };
        let kind = self.choice(
            self.required(&j.kind, "type", &span, &what)?,
            "type",
            JOINT_TYPES,
        )?;
        let parent = self.string(self.required(&j.parent, "parent", &span, &what)?, "parent")?;
        let child = self.string(self.required(&j.child, "child", &span, &what)?, "child")?;
        let origin = self.pose(&j.xyz, &j.rpy, &item)?;
        let passive = match &j.passive {
            Some(v) => self.boolean(v, "passive")?,
            None => false,
        };
        let limit_keys = [
            ("lower", &j.lower),
            ("upper", &j.upper),
            ("velocity", &j.velocity),
            ("acceleration", &j.acceleration),
        ];
        let (joint_type, axis, limits) = match kind.as_str() {
            "revolute" | "prismatic" => {
                let axis_v = self.required(&j.axis, "axis", &span, &format!("{what} ({kind})"))?;
                let axis = self.vec3(axis_v, "axis", &item)?;
                let mut values = [
                    f64::NEG_INFINITY,
                    f64::INFINITY,
                    f64::INFINITY,
                    f64::INFINITY,
                ];
                for (k, (key, v)) in limit_keys.iter().enumerate() {
                    if let Some(v) = v {
                        values[k] = self.number(v, key, &item)?;
                    }
                }
                let any = limit_keys.iter().any(|(_, v)| v.is_some());
                let limits = if any {
                    vec![Limits {
                        lower: values[0],
                        upper: values[1],
                        velocity: values[2],
                        acceleration: values[3],
                    }]
                } else {
                    Vec::new()
                };
                let t = if kind == "revolute" {
                    JointType::Revolute
                } else {
                    JointType::Prismatic
                };
                (t, axis, limits)
            }
            "fixed" => {
                let why = "on a fixed joint (it does not move)";
                self.forbid(&j.axis, "axis", why)?;
                for (key, v) in limit_keys {
                    self.forbid(v, key, why)?;
                }
                (JointType::Fixed, Vector3::zeros(), Vec::new())
            }
            _ => {
                self.forbid(
                    &j.axis,
                    "axis",
                    "on a floating joint (it moves in all six directions)",
                )?;
                let mut lower = [f64::NEG_INFINITY; 3];
                let mut upper = [f64::INFINITY; 3];
                let mut vel = [f64::INFINITY; 2];
                let mut acc = [f64::INFINITY; 2];
                if let Some(v) = &j.lower {
                    lower.copy_from_slice(&self.numbers(v, "lower", 3, &item)?);
                }
                if let Some(v) = &j.upper {
                    upper.copy_from_slice(&self.numbers(v, "upper", 3, &item)?);
                }
                if let Some(v) = &j.velocity {
                    vel.copy_from_slice(&self.numbers(v, "velocity", 2, &item)?);
                }
                if let Some(v) = &j.acceleration {
                    acc.copy_from_slice(&self.numbers(v, "acceleration", 2, &item)?);
                }
                let any = limit_keys.iter().any(|(_, v)| v.is_some());
                let limits = if any {
                    let mut l = Vec::with_capacity(6);
                    for k in 0..3 {
                        l.push(Limits {
                            lower: lower[k],
                            upper: upper[k],
                            velocity: vel[0],
                            acceleration: acc[0],
                        });
                    }
                    for _ in 0..3 {
                        l.push(Limits {
                            velocity: vel[1],
                            acceleration: acc[1],
                            ..Limits::UNBOUNDED
                        });
                    }
                    l
                } else {
                    Vec::new()
                };
                (JointType::Floating, Vector3::zeros(), limits)
            }
        };
        Ok(JointSpec {
            name,
            joint_type,
            parent,
            child,
            origin,
            axis,
            limits,
            passive,
        })
    }

    fn effector(&mut self, ei: usize, raw: &Spanned<EffectorRaw>) -> Res<EffectorSpec> {
        let span = raw.span();
        let e = raw.get_ref();
        self.map.effectors.push(self.entry(
            &span,
            &[
                ("name", &e.name),
                ("link", &e.link),
                ("xyz", &e.xyz),
                ("rpy", &e.rpy),
            ],
        ));
        let what = format!("[[effector]] number {}", ei + 1);
        let name = self.string(self.required(&e.name, "name", &span, &what)?, "name")?;
        let what = format!("effector `{name}`");
        let item = Item {
            desc: what.clone(),
            kind: ItemKind::Effector,
            index: ei,
            sub_index: 0,
        };
        let link = self.string(self.required(&e.link, "link", &span, &what)?, "link")?;
        let grip = self.pose(&e.xyz, &e.rpy, &item)?;
        Ok(EffectorSpec { name, link, grip })
    }
}

/// Read a mesh referenced by a `[[link.shape]]` of type `mesh`.
fn load_mesh_for_toml(path: &Path, scale: Vector3<f64>, convex: bool) -> Result<Geometry, String> {
    super::mesh::load_mesh(path, scale, convex)
}

// ---------------------------------------------------------------------------------------
// Entry points

/// Read a robot file's text into a description and the source positions of its items.
/// `path` names the file in messages, and mesh `file`s are relative to its directory.
/// Types, forms, required keys and finiteness are checked here; the model's own rules
/// (unique names, one tree, limits in order, ...) are checked by [`RobotSpec::build`].
pub fn parse(text: &str, path: &Path) -> Result<(RobotSpec, SourceMap), RobotFileError> {
    let raw: FileRaw = toml::from_str(text).map_err(|e| {
        let (line, column) = e.span().map_or((1, 1), |s| line_col(text, s.start));
        RobotFileError::Syntax {
            path: path.to_path_buf(),
            line,
            column,
            message: name_duplicate_key(
                rewrite_serde_message(e.message().trim_end()),
                text,
                e.span(),
            ),
        }
    })?;
    let mut r = Reader {
        text,
        path,
        map: SourceMap::default(),
    };
    let base_dir: PathBuf = path.parent().map(Path::to_path_buf).unwrap_or_default();
    let mut spec = RobotSpec {
        name: r.robot(&raw.robot)?,
        ..RobotSpec::default()
    };
    r.collision(&raw.collision, &mut spec)?;
    for (li, l) in raw.link.0.iter().enumerate() {
        let link = r.link(li, l, &base_dir)?;
        spec.links.push(link);
    }
    for (ji, j) in raw.joint.0.iter().enumerate() {
        let joint = r.joint(ji, j)?;
        spec.joints.push(joint);
    }
    for (ei, e) in raw.effector.0.iter().enumerate() {
        let effector = r.effector(ei, e)?;
        spec.effectors.push(effector);
    }
    Ok((spec, r.map))
}

/// Read the robot-format tables of a larger document (a mechanism written inline in a
/// scenario file): the spans in the raw tables are offsets into `text`, so positions in
/// errors and in the returned map are positions in that document. Shared with the scenario
/// reader.
pub(crate) fn parse_parts(
    text: &str,
    path: &Path,
    name: String,
    collision: &Option<Spanned<One<CollisionRaw>>>,
    links: &Tables<LinkRaw>,
    joints: &Tables<JointRaw>,
    effectors: &Tables<EffectorRaw>,
) -> Result<(RobotSpec, SourceMap), RobotFileError> {
    let mut r = Reader {
        text,
        path,
        map: SourceMap::default(),
    };
    let base_dir: PathBuf = path.parent().map(Path::to_path_buf).unwrap_or_default();
    let mut spec = RobotSpec {
        name,
        ..RobotSpec::default()
    };
    r.collision(collision, &mut spec)?;
    for (li, l) in links.0.iter().enumerate() {
        let link = r.link(li, l, &base_dir)?;
        spec.links.push(link);
    }
    for (ji, j) in joints.0.iter().enumerate() {
        let joint = r.joint(ji, j)?;
        spec.joints.push(joint);
    }
    for (ei, e) in effectors.0.iter().enumerate() {
        let effector = r.effector(ei, e)?;
        spec.effectors.push(effector);
    }
    Ok((spec, r.map))
}

/// Read one shape written with the keys of a `[[link.shape]]` table (the scene obstacle
/// `name`), and check it as the model checks link shapes (positive sizes, valid meshes);
/// mesh files are relative to `path`'s directory. Shared with the scenario reader.
pub(crate) fn parse_shape(
    text: &str,
    path: &Path,
    name: &str,
    raw: &Spanned<ShapeRaw>,
) -> Result<Shape, RobotFileError> {
    let mut r = Reader {
        text,
        path,
        map: SourceMap::default(),
    };
    r.map.links.push(Entry::default());
    r.map.shapes.push(Vec::new());
    let base_dir: PathBuf = path.parent().map(Path::to_path_buf).unwrap_or_default();
    let what = format!("obstacle `{name}`");
    let shape = r.shape_described(name, Some(&what), 0, 0, raw, &base_dir)?;
    // The model's shape rules, applied through a one-link description.
    let check = RobotSpec {
        name: name.to_string(),
        links: vec![LinkSpec {
            name: name.to_string(),
            shapes: vec![shape.clone()],
        }],
        ..RobotSpec::default()
    };
    check
        .build()
        .map_err(|e| locate_model_error(e, &r.map, path))?;
    Ok(shape)
}

/// Map a model error to the place in the file it is about.
pub fn locate_model_error(source: ModelError, map: &SourceMap, path: &Path) -> RobotFileError {
    let (pos, field) = match source.locator() {
        Some(at) => match map.locate(&at) {
            Some((p, key)) => (p, key.to_string()),
            None => (Position { line: 1, column: 1 }, at.field.to_string()),
        },
        // Only "no links" has no place: point at the start, naming the missing table.
        None => (Position { line: 1, column: 1 }, "link".to_string()),
    };
    RobotFileError::Model {
        path: path.to_path_buf(),
        line: pos.line,
        column: pos.column,
        field,
        source: Box::new(source),
    }
}

/// Read and build a robot from a robot file's text (see [`parse`]).
pub fn load_str(text: &str, path: &Path) -> Result<Robot, RobotFileError> {
    let (spec, map) = parse(text, path)?;
    spec.build().map_err(|e| locate_model_error(e, &map, path))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn suggestions_catch_typos_only() {
        assert_eq!(suggest("radus", SHAPE_KEYS), Some("radius"));
        assert_eq!(suggest("lenght", SHAPE_KEYS), Some("length"));
        assert_eq!(suggest("revolut", JOINT_TYPES), Some("revolute"));
        assert_eq!(suggest("Parent", JOINT_KEYS), Some("parent"));
        assert_eq!(suggest("colour", SHAPE_KEYS), None);
        assert_eq!(suggest("hinge", JOINT_TYPES), None);
    }

    #[test]
    fn serde_unknown_field_message_is_rewritten() {
        let m = rewrite_serde_message("unknown field `radus`, expected one of `type`, `radius`, `length`, `size`, `file`, `scale`, `convex`, `xyz`, `rpy`");
        assert!(
            m.starts_with("unknown key `radus` in [[link.shape]]; expected one of `type`"),
            "{m}"
        );
        assert!(m.ends_with("did you mean `radius`?"), "{m}");
        // Messages in another form pass through unchanged.
        assert_eq!(rewrite_serde_message("unclosed array"), "unclosed array");
    }
}
