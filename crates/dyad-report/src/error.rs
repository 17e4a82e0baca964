//! Typed errors of the report crate.

use std::path::PathBuf;

/// Everything that can go wrong while summarising a run or writing its files.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ReportError {
    /// A file-system operation on `path` failed.
    #[error("{path}: {source}")]
    Io {
        /// The file or folder concerned.
        path: PathBuf,
        /// The underlying error.
        source: std::io::Error,
    },
    /// The run folder already holds files and overwriting was not asked for.
    #[error("run folder {0} already exists and is not empty (ask to overwrite it)")]
    RunFolderExists(PathBuf),
    /// The path given as a run folder exists and is not a folder.
    #[error("{0} exists and is not a folder")]
    NotAFolder(PathBuf),
    /// The inputs are inconsistent (wrong lengths, no finite draws, unknown names, ...).
    #[error("invalid report input: {0}")]
    InvalidInput(String),
    /// Serialising the JSON summary failed.
    #[error("JSON: {0}")]
    Json(#[from] serde_json::Error),
    /// The plotting library reported an error.
    #[error("plot {plot}: {message}")]
    Plot {
        /// Which plot was being drawn.
        plot: &'static str,
        /// The plotting library's message.
        message: String,
    },
}

impl ReportError {
    /// An I/O error at a path.
    pub fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        ReportError::Io {
            path: path.into(),
            source,
        }
    }

    /// A CSV writing error at a path (the csv crate fails only on I/O here).
    pub(crate) fn csv(path: impl Into<PathBuf>, source: csv::Error) -> Self {
        Self::io(path, source.into())
    }
}
