//! dyad-model (being written): data, configuration, priors, likelihood.
pub mod data;
pub mod error;
pub use error::ModelError;
