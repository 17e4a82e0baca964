//! The workflows of dyad as a library: fitting a configuration (or data
//! given as arrays) and reporting it, resuming a stopped run, comparing
//! period windows by evidence, predicting positions and velocities,
//! advising the next epoch, simulation-based calibration and checking a
//! configuration.
//!
//! What it is for: any caller that wants to run what `dyad` runs — the
//! command line, a batch runner, bindings to another language — without
//! copying the orchestration, and to use the results (draws, summaries,
//! diagnostics, period modes, evidences) as typed values.
//!
//! What it is not for: orbit, likelihood or sampler mathematics (those live
//! in `dyad-orbit`, `dyad-model` and `dyad-sampler`), drawing plots
//! (`dyad-report`), argument parsing or terminal output (the `dyad`
//! binary). Nothing here prints: workflows report through an [`Observer`]
//! and return what they found.
//!
//! Overview:
//! - [`FitRequest`] (a configuration file, or a [`RunConfig`] and a
//!   [`Dataset`] of in-memory arrays) → [`FitRequest::prepare`] →
//!   [`FitRun`] (also [`FitRun::resume`] for a stopped run folder) →
//!   [`FitRun::run`] with an [`Observer`] and a [`CancelFlag`] →
//!   [`FitResult`]: the sampler's result and diagnostics, the evidence, and
//!   a [`PosteriorReport`] of draws, summary and period modes.
//! - [`periods::compare`], [`predict::predict`], [`advise::advise`],
//!   [`calibrate::calibrate`], [`check::check`] and [`posterior::report`]
//!   are the other commands' workflows; [`batch`] runs a manifest of
//!   systems in shards and merges their results.
//! - Errors are [`FitError`]s: the lower crates' errors, typed, with what
//!   the workflow was doing added as context.
//!
//! ```no_run
//! use dyad_fit::{CancelFlag, FitRequest, Silent};
//! # fn main() -> dyad_fit::Result<()> {
//! let run = FitRequest::from_file("configs/demo.toml".as_ref())?.prepare()?;
//! let result = run.run(&mut Silent, &CancelFlag::new())?;
//! if let Some(posterior) = &result.posterior {
//!     let m1 = posterior.summary.get("mass_primary_msun").expect("a joint fit");
//!     println!("M1 = {:.3} (68 %: {:.3} to {:.3})", m1.median, m1.q68[0], m1.q68[1]);
//! }
//! # Ok(())
//! # }
//! ```
#![deny(missing_docs)]

pub mod advise;
pub mod astrometry_views;
pub mod batch;
pub mod calibrate;
pub mod check;
pub mod columns;
pub mod density;
pub mod error;
pub mod error_summary;
pub mod fit;
pub mod modes;
pub mod observer;
pub mod paper_table;
pub mod periods;
pub mod plan;
pub mod posterior;
pub mod predict;
pub mod run_folder;

pub use dyad_model::config::RunConfig;
pub use dyad_model::data::Dataset;
pub use dyad_sampler::Progress;
pub use error::{FitError, Result};
pub use fit::{FitRequest, FitResult, FitRun, Storage};
pub use observer::{CancelFlag, Observer, Silent};
pub use posterior::PosteriorReport;
