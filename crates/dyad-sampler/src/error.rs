//! Typed errors of the sampler.

use std::path::PathBuf;

/// Everything that can go wrong when configuring, starting, running or
/// resuming a sampler run.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SamplerError {
    /// A configuration value is out of range; the message names it.
    #[error("invalid sampler configuration: {0}")]
    Config(String),
    /// No starting point with non-zero density was found for a walker.
    #[error(
        "no starting point with non-zero density for walker {walker} (temperature {rung}) \
         after {tries} tries; start closer to the posterior mode, narrow the ball, \
         or check that the prior and likelihood are finite there"
    )]
    NoValidStart {
        /// Walker index within its ensemble.
        walker: usize,
        /// Temperature index (0 = cold).
        rung: usize,
        /// Number of draws tried.
        tries: usize,
    },
    /// The initial ensemble cannot explore the parameter space.
    #[error("bad initial ensemble: {problem}. {advice}")]
    BadEnsemble {
        /// What is wrong.
        problem: String,
        /// What to change.
        advice: String,
    },
    /// Reading or writing a file failed.
    #[error("I/O error on {path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },
    /// A checkpoint or sample file is damaged or of the wrong kind.
    #[error("file {path} is not usable: {reason}")]
    BadFile {
        /// The file.
        path: PathBuf,
        /// Why.
        reason: String,
    },
    /// A checkpoint was written by a run with a different configuration.
    #[error("checkpoint does not match this run: {0}")]
    CheckpointMismatch(String),
}

impl SamplerError {
    pub(crate) fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        Self::Io {
            path: path.into(),
            source,
        }
    }
}
