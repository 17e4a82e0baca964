//! Reading a TOML file into serde-derived raw structs (shared by the run
//! configuration and simulation scenarios), with errors that name the file,
//! the line, the column and the dotted key.
//!
//! Raw structs use `#[serde(deny_unknown_fields)]` and wrap their values in
//! [`Spanned`], so that both serde's own errors (unknown key, wrong type)
//! and the checks made afterwards can point at the place in the file. The
//! dotted key of a serde error comes from `serde_path_to_error`; its message
//! is reworded into the project's phrasing ("must be a finite number, found
//! the string \"x\"").

use std::fmt;
use std::marker::PhantomData;
use std::ops::Range;
use std::path::Path;

use serde::de::{self, DeserializeOwned, Deserializer, Unexpected, Visitor};
use serde::Deserialize;
pub(crate) use toml::Spanned;

use crate::error::ModelError;

/// An optional value of a raw struct with its place in the file.
pub(crate) type Field<T> = Option<Spanned<T>>;

/// The text of a TOML file and its name, for placing errors.
#[derive(Clone, Copy)]
pub(crate) struct Source<'a> {
    pub(crate) file: &'a Path,
    pub(crate) text: &'a str,
}

impl<'a> Source<'a> {
    /// 1-based line and character position of a byte offset.
    fn line_position(&self, offset: usize) -> (usize, usize) {
        let offset = offset.min(self.text.len());
        let before = &self.text[..offset];
        let line_start = before.rfind('\n').map_or(0, |k| k + 1);
        let line = before.bytes().filter(|&b| b == b'\n').count() + 1;
        (line, before[line_start..].chars().count() + 1)
    }

    /// An error at `key`, placed at `span` when known.
    pub(crate) fn error(
        &self,
        key: &str,
        span: Option<Range<usize>>,
        message: impl Into<String>,
    ) -> ModelError {
        let place = span.map(|s| self.line_position(s.start));
        ModelError::at_key(self.file, place, key, message)
    }

    /// `error` placed at `span` if it names no line yet (e.g. an error of
    /// [`crate::prior::Prior::from_toml`], which sees the value only).
    pub(crate) fn placed(&self, error: ModelError, span: Option<Range<usize>>) -> ModelError {
        match (error, span) {
            (
                ModelError::Input {
                    mut location,
                    message,
                },
                Some(span),
            ) if location.line.is_none() => {
                let (line, position) = self.line_position(span.start);
                location.line = Some(line);
                location.position = Some(position);
                ModelError::Input { location, message }
            }
            (error, _) => error,
        }
    }

    /// Parses the text into `T`. A syntax error names the line; any other
    /// error names the line, column and dotted key.
    pub(crate) fn parse<T: DeserializeOwned>(&self) -> Result<T, ModelError> {
        // A syntax error is reported as such, before the structure is read.
        if let Err(e) = self.text.parse::<toml::Table>() {
            let line = e.span().map(|s| self.line_position(s.start).0);
            return Err(ModelError::at(
                self.file,
                line,
                None,
                format!("not valid TOML: {}", e.message().trim_end()),
            ));
        }
        let deserializer = toml::Deserializer::new(self.text);
        serde_path_to_error::deserialize(deserializer).map_err(|e| {
            let key = dotted_path(e.path());
            let inner = e.into_inner();
            let (key, message) = reword(&key, inner.message());
            self.error(&key, inner.span(), message)
        })
    }
}

/// The dotted key of a serde path (`sampler.period_windows_days[0]`),
/// leaving out the private keys of [`Spanned`].
fn dotted_path(path: &serde_path_to_error::Path) -> String {
    use serde_path_to_error::Segment;
    let mut out = String::new();
    for segment in path.iter() {
        match segment {
            Segment::Seq { index } => out.push_str(&format!("[{index}]")),
            Segment::Map { key } if key.starts_with("$__") => {}
            Segment::Map { key } | Segment::Enum { variant: key } => {
                if !out.is_empty() {
                    out.push('.');
                }
                out.push_str(key);
            }
            Segment::Unknown => {}
        }
    }
    out
}

/// `parent.key`, or `key` at the top level.
pub(crate) fn join_key(parent: &str, key: &str) -> String {
    if parent.is_empty() {
        key.to_owned()
    } else {
        format!("{parent}.{key}")
    }
}

/// `key` ending in the key `name` (serde's path already holds an unknown
/// key, but not a missing one).
fn ending_in(key: &str, name: &str) -> String {
    if key == name || key.ends_with(&format!(".{name}")) {
        key.to_owned()
    } else {
        join_key(key, name)
    }
}

/// Keys that raw structs accept only to refuse them with a note on their
/// replacement; they are not listed among the allowed keys.
const RETIRED_KEYS: &[&str] = &["autocorrelation_times"];

/// The key and message of a serde error in the project's words. serde's
/// messages have fixed forms (`unknown field `x`, expected one of `a`, `b``,
/// `invalid type: string "x", expected a number`, `missing field `x``);
/// anything else is kept as it is.
fn reword(key: &str, message: &str) -> (String, String) {
    let message = message.trim_end();
    let names = |list: &str| {
        list.replace(" or ", ", ")
            .split(", ")
            .map(|name| name.trim_matches('`'))
            .filter(|name| !RETIRED_KEYS.contains(name))
            .collect::<Vec<_>>()
            .join(", ")
    };
    if let Some(rest) = message.strip_prefix("unknown field `") {
        let (name, expected) = rest.split_once('`').unwrap_or((rest, ""));
        let allowed = expected
            .trim_start_matches(", expected ")
            .trim_start_matches("one of ");
        let text = if allowed.starts_with(", there are no fields") || allowed.is_empty() {
            format!("unknown key '{name}'")
        } else {
            format!("unknown key '{name}'; allowed here: {}", names(allowed))
        };
        return (ending_in(key, name), text);
    }
    if let Some(rest) = message.strip_prefix("missing field `") {
        let name = rest.trim_end_matches('`');
        return (ending_in(key, name), format!("missing '{name}'"));
    }
    if let Some(rest) = message.strip_prefix("unknown variant `") {
        let (name, expected) = rest.split_once('`').unwrap_or((rest, ""));
        let allowed = expected
            .trim_start_matches(", expected ")
            .trim_start_matches("one of ");
        return (
            key.to_owned(),
            format!("must be one of {}, got \"{name}\"", names(allowed)),
        );
    }
    if let Some(rest) = message.strip_prefix("invalid length ") {
        if let Some((count, expected)) = rest.split_once(", expected ") {
            return (
                key.to_owned(),
                format!("must be {}, found {count} values", list_words(expected)),
            );
        }
    }
    for prefix in ["invalid type: ", "invalid value: "] {
        if let Some(rest) = message.strip_prefix(prefix) {
            if let Some((found, expected)) = rest.split_once(", expected ") {
                return (
                    key.to_owned(),
                    format!(
                        "must be {}, found {}",
                        list_words(expected),
                        found_words(found)
                    ),
                );
            }
        }
    }
    (key.to_owned(), message.to_owned())
}

/// serde's name of what was expected in TOML's words: a sequence is a
/// list, a map or a struct is a table.
fn list_words(expected: &str) -> String {
    if expected == "a map" || expected.starts_with("struct ") {
        return "a table".to_owned();
    }
    expected.replace("a sequence", "a list")
}

/// serde's description of an unexpected value (`string "x"`, `integer `3``,
/// `map`) as we write it (`the string "x"`, `the number 3`, `a table`).
fn found_words(found: &str) -> String {
    let quoted = |rest: &str| rest.trim_matches('`').to_owned();
    if let Some(rest) = found.strip_prefix("string ") {
        format!("the string {rest}")
    } else if let Some(rest) = found
        .strip_prefix("integer ")
        .or_else(|| found.strip_prefix("floating point "))
    {
        format!("the number {}", quoted(rest))
    } else if let Some(rest) = found.strip_prefix("boolean ") {
        format!("the boolean {}", quoted(rest))
    } else {
        match found {
            "map" => "a table".to_owned(),
            "sequence" => "a list".to_owned(),
            other => other.to_owned(),
        }
    }
}

/// A finite number, written as an integer or a float.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Number(pub(crate) f64);

impl<'de> Deserialize<'de> for Number {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct NumberVisitor;
        impl Visitor<'_> for NumberVisitor {
            type Value = Number;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a finite number")
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<Number, E> {
                Ok(Number(v as f64))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<Number, E> {
                Ok(Number(v as f64))
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<Number, E> {
                if v.is_finite() {
                    Ok(Number(v))
                } else {
                    Err(E::invalid_value(Unexpected::Float(v), &self))
                }
            }
        }
        deserializer.deserialize_any(NumberVisitor)
    }
}

/// A whole number of at least `MIN`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Whole<const MIN: u64>(pub(crate) u64);

impl<'de, const MIN: u64> Deserialize<'de> for Whole<MIN> {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct WholeVisitor<const MIN: u64>;
        impl<const MIN: u64> Visitor<'_> for WholeVisitor<MIN> {
            type Value = Whole<MIN>;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                write!(f, "a whole number >= {MIN}")
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<Whole<MIN>, E> {
                match u64::try_from(v) {
                    Ok(v) => self.visit_u64(v),
                    Err(_) => Err(E::invalid_value(Unexpected::Signed(v), &self)),
                }
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<Whole<MIN>, E> {
                if v >= MIN {
                    Ok(Whole(v))
                } else {
                    Err(E::invalid_value(Unexpected::Unsigned(v), &self))
                }
            }
        }
        deserializer.deserialize_any(WholeVisitor::<MIN>)
    }
}

/// A file name (a string), alone or in a list.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum FileNames {
    /// `key = "name"`.
    One(String),
    /// `key = ["name", ...]`.
    Many(Vec<Spanned<String>>),
}

impl<'de> Deserialize<'de> for FileNames {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct FileNamesVisitor(PhantomData<FileNames>);
        impl<'de> Visitor<'de> for FileNamesVisitor {
            type Value = FileNames;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a file name or a list of file names")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<FileNames, E> {
                Ok(FileNames::One(v.to_owned()))
            }
            fn visit_seq<A: de::SeqAccess<'de>>(self, mut seq: A) -> Result<FileNames, A::Error> {
                let mut out = Vec::new();
                while let Some(name) = seq.next_element::<Spanned<String>>()? {
                    out.push(name);
                }
                Ok(FileNames::Many(out))
            }
        }
        deserializer.deserialize_any(FileNamesVisitor(PhantomData))
    }
}

/// The value of an optional field.
pub(crate) fn value<T: Clone>(field: &Field<T>) -> Option<T> {
    field.as_ref().map(|s| s.get_ref().clone())
}

/// The span of an optional field.
pub(crate) fn span<T>(field: &Field<T>) -> Option<Range<usize>> {
    field.as_ref().map(Spanned::span)
}

/// How a TOML value is described in messages.
pub(crate) fn describe_value(v: &toml::Value) -> String {
    match v {
        toml::Value::String(s) => format!("the string \"{s}\""),
        toml::Value::Float(f) => format!("the number {f}"),
        toml::Value::Integer(i) => format!("the number {i}"),
        other => format!("a {}", other.type_str()),
    }
}
