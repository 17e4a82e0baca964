//! Reading TOML tables by hand so that every error names the file and the
//! dotted key (shared by the run configuration and simulation scenarios).

use std::path::{Path, PathBuf};

use crate::error::ModelError;

/// A TOML table being read, with the file and dotted prefix for errors and
/// the list of keys it may contain.
pub(crate) struct Section<'a> {
    pub(crate) file: &'a Path,
    pub(crate) prefix: String,
    pub(crate) table: &'a toml::Table,
}

impl<'a> Section<'a> {
    pub(crate) fn dotted(&self, key: &str) -> String {
        if self.prefix.is_empty() {
            key.to_owned()
        } else {
            format!("{}.{key}", self.prefix)
        }
    }

    pub(crate) fn error(&self, key: &str, message: impl Into<String>) -> ModelError {
        ModelError::at(self.file, None, Some(&self.dotted(key)), message)
    }

    pub(crate) fn allow_only(&self, allowed: &[&str]) -> Result<(), ModelError> {
        for key in self.table.keys() {
            if !allowed.contains(&key.as_str()) {
                return Err(self.error(
                    key,
                    format!("unknown key '{key}'; allowed here: {}", allowed.join(", ")),
                ));
            }
        }
        Ok(())
    }

    pub(crate) fn get(&self, key: &str) -> Option<&'a toml::Value> {
        self.table.get(key)
    }

    pub(crate) fn sub(&self, key: &str) -> Result<Option<Section<'a>>, ModelError> {
        match self.get(key) {
            None => Ok(None),
            Some(toml::Value::Table(t)) => Ok(Some(Section {
                file: self.file,
                prefix: self.dotted(key),
                table: t,
            })),
            Some(other) => Err(self.error(
                key,
                format!("must be a table, found a {}", other.type_str()),
            )),
        }
    }

    pub(crate) fn f64(&self, key: &str) -> Result<Option<f64>, ModelError> {
        match self.get(key) {
            None => Ok(None),
            Some(toml::Value::Float(f)) if f.is_finite() => Ok(Some(*f)),
            Some(toml::Value::Integer(i)) => Ok(Some(*i as f64)),
            Some(other) => Err(self.error(
                key,
                format!("must be a finite number, found {}", describe_value(other)),
            )),
        }
    }

    pub(crate) fn count(&self, key: &str, min: u64) -> Result<Option<u64>, ModelError> {
        match self.get(key) {
            None => Ok(None),
            Some(toml::Value::Integer(i)) if *i >= min as i64 => Ok(Some(*i as u64)),
            Some(other) => Err(self.error(
                key,
                format!(
                    "must be a whole number >= {min}, found {}",
                    describe_value(other)
                ),
            )),
        }
    }

    pub(crate) fn string(&self, key: &str) -> Result<Option<&'a str>, ModelError> {
        match self.get(key) {
            None => Ok(None),
            Some(toml::Value::String(s)) => Ok(Some(s.as_str())),
            Some(other) => Err(self.error(
                key,
                format!("must be a string, found {}", describe_value(other)),
            )),
        }
    }

    /// A data file path relative to `base`, which must exist.
    pub(crate) fn existing_file(
        &self,
        key: &str,
        value: &str,
        base: &Path,
    ) -> Result<PathBuf, ModelError> {
        let path = base.join(value);
        if !path.is_file() {
            return Err(self.error(
                key,
                format!("data file '{}' not found (paths are relative to the configuration file's folder)", path.display()),
            ));
        }
        Ok(path)
    }

    /// At most one of two alternative keys (e.g. `period_days`, `period_years`).
    pub(crate) fn one_of(&self, a: &str, b: &str) -> Result<Option<&'static str>, ModelError> {
        match (self.get(a).is_some(), self.get(b).is_some()) {
            (true, true) => Err(self.error(b, format!("give either '{a}' or '{b}', not both"))),
            (true, false) => Ok(Some("a")),
            (false, true) => Ok(Some("b")),
            (false, false) => Ok(None),
        }
    }
}

pub(crate) fn describe_value(v: &toml::Value) -> String {
    match v {
        toml::Value::String(s) => format!("the string \"{s}\""),
        toml::Value::Float(f) => format!("the number {f}"),
        toml::Value::Integer(i) => format!("the number {i}"),
        other => format!("a {}", other.type_str()),
    }
}

/// The line (1-based) of a byte offset in a text.
pub(crate) fn line_of(text: &str, offset: usize) -> usize {
    text.as_bytes()[..offset.min(text.len())]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
        + 1
}

/// Parses TOML text read from `path`; a syntax error names the file and line.
pub(crate) fn parse_table(text: &str, path: &Path) -> Result<toml::Table, ModelError> {
    toml::from_str(text).map_err(|e| {
        let line = e.span().map(|s| line_of(text, s.start));
        ModelError::at(path, line, None, format!("not valid TOML: {}", e.message()))
    })
}
