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
//!
//! ```
//! use dyad_model::data::{AstrometryEpoch, Dataset, RelativePosition};
//! use dyad_model::likelihood::Model;
//! use dyad_model::params::ModelPriors;
//! use rand::SeedableRng;
//!
//! let epoch = |t_jd: f64, pa_deg: f64| AstrometryEpoch {
//!     t_jd,
//!     position: RelativePosition::Polar {
//!         sep_mas: 250.0, sep_err_mas: 3.0,
//!         pa_rad: pa_deg.to_radians(), pa_err_rad: 0.01, corr: 0.0,
//!     },
//!     source: None,
//! };
//! let data = Dataset {
//!     astrometry: vec![epoch(2_450_000.0, 10.0), epoch(2_451_000.0, 40.0), epoch(2_452_000.0, 75.0)],
//!     ..Dataset::default()
//! };
//! let model = Model::new(data.clone(), &ModelPriors::defaults(&data)).unwrap();
//! assert_eq!(model.parameter_names()[0], "ln_period_days");
//! let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(1);
//! let x = model.layout().sample_prior(&mut rng);
//! assert!(model.log_prior(&x).is_finite());
//! let (lp, ll) = (model.log_prior(&x), model.log_likelihood(&x));
//! assert!((model.log_posterior(&x) - (lp + ll)).abs() < 1e-9 * ll.abs().max(1.0));
//! ```
pub mod astrometry_errors;
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
mod toml_input;

pub use error::ModelError;
