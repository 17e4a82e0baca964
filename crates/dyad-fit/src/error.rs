//! The errors of the workflows.
//!
//! Every error of a lower crate keeps its type ([`FitError::Model`],
//! [`FitError::Sampler`], ...); what the workflow was doing when it failed
//! is added by wrapping ([`FitError::Context`], through [`Context`]), so
//! that a caller can both match on the kind and print the whole chain
//! ("reading the chain run/chain.bin: ...").

use std::fmt::Display;

/// An error of a dyad workflow.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum FitError {
    /// A configuration, data file or model problem.
    #[error(transparent)]
    Model(#[from] dyad_model::error::ModelError),
    /// The sampler failed (bad start, unreadable checkpoint, ...).
    #[error(transparent)]
    Sampler(#[from] dyad_sampler::SamplerError),
    /// The evidence could not be estimated.
    #[error(transparent)]
    Evidence(#[from] dyad_sampler::evidence::EvidenceError),
    /// Writing a summary, table or plot failed.
    #[error(transparent)]
    Report(#[from] dyad_report::ReportError),
    /// The next-epoch advice failed.
    #[error(transparent)]
    Plan(#[from] dyad_plan::PlanError),
    /// A file could not be read or written.
    #[error(transparent)]
    Io(#[from] std::io::Error),
    /// A JSON record of a run folder could not be read or written.
    #[error(transparent)]
    Json(#[from] serde_json::Error),
    /// A CSV table could not be written.
    #[error(transparent)]
    Csv(#[from] csv::Error),
    /// A TOML settings file is not valid TOML.
    #[error(transparent)]
    Toml(#[from] toml::de::Error),
    /// A TOML file could not be written.
    #[error(transparent)]
    TomlWrite(#[from] toml::ser::Error),
    /// A request the workflow cannot carry out, in plain words (bad option,
    /// empty range, a run folder in the wrong state, ...).
    #[error("{0}")]
    Invalid(String),
    /// What was being done when `source` happened.
    #[error("{context}")]
    Context {
        /// What was being done.
        context: String,
        /// The error.
        #[source]
        source: Box<FitError>,
    },
}

/// The result type of the workflows.
pub type Result<T, E = FitError> = std::result::Result<T, E>;

impl FitError {
    /// An error described in plain words.
    pub fn invalid(message: impl Into<String>) -> Self {
        Self::Invalid(message.into())
    }

    /// The innermost error (below every [`FitError::Context`]).
    pub fn root(&self) -> &FitError {
        match self {
            Self::Context { source, .. } => source.root(),
            other => other,
        }
    }
}

/// Adds what was being done to an error (as `anyhow::Context` does, but
/// keeping the error typed).
pub trait Context<T> {
    /// Wraps the error with `context`.
    fn context<C: Display>(self, context: C) -> Result<T>;
    /// Wraps the error with the context `f` gives (evaluated on error only).
    fn with_context<C: Display, F: FnOnce() -> C>(self, f: F) -> Result<T>;
}

impl<T, E: Into<FitError>> Context<T> for std::result::Result<T, E> {
    fn context<C: Display>(self, context: C) -> Result<T> {
        self.map_err(|e| FitError::Context {
            context: context.to_string(),
            source: Box::new(e.into()),
        })
    }

    fn with_context<C: Display, F: FnOnce() -> C>(self, f: F) -> Result<T> {
        self.map_err(|e| FitError::Context {
            context: f().to_string(),
            source: Box::new(e.into()),
        })
    }
}

impl<T> Context<T> for Option<T> {
    fn context<C: Display>(self, context: C) -> Result<T> {
        self.ok_or_else(|| FitError::Invalid(context.to_string()))
    }

    fn with_context<C: Display, F: FnOnce() -> C>(self, f: F) -> Result<T> {
        self.ok_or_else(|| FitError::Invalid(f().to_string()))
    }
}

/// Returns early with a [`FitError::Invalid`] made from a format string.
macro_rules! bail {
    ($($arg:tt)*) => {
        return Err($crate::error::FitError::Invalid(format!($($arg)*)))
    };
}

/// Returns early with a [`FitError::Invalid`] unless the condition holds.
macro_rules! ensure {
    ($cond:expr, $($arg:tt)*) => {
        if !$cond {
            $crate::error::bail!($($arg)*);
        }
    };
}

pub(crate) use {bail, ensure};
