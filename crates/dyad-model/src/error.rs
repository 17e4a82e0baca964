//! Typed errors of the model crate. Every error that comes from a user's file
//! names the file and, where there is one, the line and column (or TOML key).

use std::path::PathBuf;

/// Where in a user's file a problem was found.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Location {
    /// The file.
    pub file: PathBuf,
    /// 1-based line number, when known.
    pub line: Option<usize>,
    /// 1-based character position within the line, when known (TOML).
    pub position: Option<usize>,
    /// Column name (CSV) or dotted key (TOML), when known.
    pub column: Option<String>,
}

impl std::fmt::Display for Location {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}", self.file.display())?;
        if let Some(line) = self.line {
            write!(f, ", line {line}")?;
        }
        if let Some(position) = self.position {
            write!(f, ", column {position}")?;
        }
        match (&self.column, self.position) {
            // With a character position the name is a TOML key.
            (Some(key), Some(_)) => write!(f, ", key '{key}'")?,
            (Some(column), None) => write!(f, ", column '{column}'")?,
            (None, _) => {}
        }
        Ok(())
    }
}

/// Errors of the model crate.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ModelError {
    /// A problem in a user's file, with its location.
    #[error("{location}: {message}")]
    Input {
        /// Where.
        location: Location,
        /// What is wrong and, where possible, what to do about it.
        message: String,
    },
    /// A file could not be read or written.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },
    /// A prior or parameter that is invalid in itself (not tied to a file).
    #[error("invalid prior: {0}")]
    InvalidPrior(String),
    /// A model that cannot be built from the data and priors given.
    #[error("invalid model: {0}")]
    InvalidModel(String),
}

impl ModelError {
    /// An input error at a file, line and column.
    pub fn at(
        file: impl Into<PathBuf>,
        line: Option<usize>,
        column: Option<&str>,
        message: impl Into<String>,
    ) -> Self {
        ModelError::Input {
            location: Location {
                file: file.into(),
                line,
                position: None,
                column: column.map(str::to_owned),
            },
            message: message.into(),
        }
    }

    /// An input error at a place in a TOML file: 1-based line and
    /// character position when known, and the dotted key.
    pub fn at_key(
        file: impl Into<PathBuf>,
        line_position: Option<(usize, usize)>,
        key: &str,
        message: impl Into<String>,
    ) -> Self {
        ModelError::Input {
            location: Location {
                file: file.into(),
                line: line_position.map(|(line, _)| line),
                position: line_position.map(|(_, position)| position),
                column: Some(key.to_owned()),
            },
            message: message.into(),
        }
    }
}
