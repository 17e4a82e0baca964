//! dyad-model: everything between the measurements of a binary star and a
//! log-density the sampler can explore.
//!
//! What it is for: the validated data types ([`data`]), loading them from CSV
//! ([`load`]), the run configuration in TOML ([`config`]), priors on physical
//! quantities ([`prior`]), the vector of sampled coordinates and its map to
//! orbital elements ([`params`]), the joint log-likelihood of relative
//! astrometry and radial velocities ([`likelihood`]), derived quantities such
//! as the two masses ([`derived`]), a seeded starting-point search ([`start`])
//! and the simulation of invented data sets ([`simulate`]).
//!
//! What it is not for: Keplerian kinematics (that is `dyad-orbit`), sampling
//! (`dyad-sampler`, which this crate does not depend on) or reporting
//! (`dyad-report`).
//!
//! Brief overview: build a [`config::RunConfig`] from a TOML file, load its
//! data, then [`likelihood::Model::from_config`] gives a model whose
//! `log_posterior(&x)` is what the sampler needs; `Model::layout()` names the
//! coordinates, `Model::derived(&x)` turns a sample into physical quantities.
pub mod config;
pub mod data;
pub mod derived;
pub mod error;
pub mod likelihood;
pub mod load;
pub mod params;
pub mod prior;
pub mod simulate;
pub mod start;
mod toml_walk;

pub use error::ModelError;
