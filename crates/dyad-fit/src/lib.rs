//! The workflows of dyad as a library: fitting a configuration into a run
//! folder, resuming it, comparing period windows by evidence, predicting
//! positions and velocities, advising the next epoch, simulation-based
//! calibration, checking a configuration, and the report of a run.
//!
//! What it is for: any caller that wants to run what `dyad` runs (the
//! command line, a batch runner, bindings to another language) without
//! copying the orchestration.
//!
//! What it is not for: orbit, likelihood or sampler mathematics (those live
//! in `dyad-orbit`, `dyad-model` and `dyad-sampler`), drawing plots
//! (`dyad-report`), or argument parsing (the `dyad` binary).

pub mod advise;
pub mod astrometry_views;
pub mod calibrate;
pub mod check;
pub mod density;
pub mod error_summary;
pub mod fit;
pub mod modes;
pub mod paper_table;
pub mod periods;
pub mod plan;
pub mod posterior;
pub mod predict;
pub mod progress;
pub mod run_folder;
pub mod terminal;
