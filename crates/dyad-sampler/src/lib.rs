//! Generic affine-invariant ensemble MCMC for dyad.
//!
//! This crate samples any density given as a [`LogDensity`] (log prior plus
//! log likelihood over a flat `&[f64]` parameter vector). It knows nothing
//! about astronomy; it is not an optimiser and not a general MCMC toolbox
//! (no Gibbs or gradient-based samplers).
//!
//! # Brief overview
//! - [`LogDensity`], with the closure adapters [`FnDensity`] and [`FnLogPdf`].
//! - [`Move`] and [`MoveMixture`]: the stretch move of Goodman & Weare (2010,
//!   CAMCoS 5, 65), the differential-evolution move (ter Braak 2006; Nelson
//!   et al. 2014) and the walk move (Goodman & Weare 2010), mixed by weight.
//!   The walkers are split into two random halves every step and each half
//!   is updated in parallel against the other (Foreman-Mackey et al. 2013,
//!   PASP 125, 306), by a team of helper threads that stays awake for the
//!   run. Every walker has its own Xoshiro256++ stream, so the chain
//!   depends on the seed only, never on the number of threads.
//! - [`Start`]: a ball around a point, user draws, or explicit positions,
//!   checked by [`check_initial_ensemble`].
//! - [`RunConfig`], [`run`] and [`resume`]: the run loop, with the
//!   stopping rule on effective draws and split R-hat ([`Convergence`],
//!   [`ConvergenceCheck`]; quantities the caller derives from the draws, such
//!   as the share of draws in each mode, are judged beside the parameters
//!   through a [`Watch`]), [`Progress`] reports, a
//!   cancel flag ([`RunControl`]), periodic atomic checkpoints
//!   ([`CheckpointConfig`]) and a [`RunResult`] with [`RunDiagnostics`].
//! - [`SampleSink`]: where thinned samples go, in memory ([`MemorySink`]) or
//!   appended to a file ([`FileSink`], read back with [`read_record_file`]).
//! - Parallel tempering ([`TemperingConfig`]) with an adaptive ladder
//!   (Vousden, Farr & Mandel 2016), producing [`TemperedLogLikelihoods`] for
//!   the [`evidence`] estimators; convergence [`diagnostics`].
//!
//! # Example
//! ```
//! use dyad_sampler::{run, FnLogPdf, MemorySink, RunConfig, RunControl, RunStatus, Start};
//!
//! // A 2-D standard normal.
//! let density = FnLogPdf::new(2, |x: &[f64]| -0.5 * (x[0] * x[0] + x[1] * x[1]));
//! let config = RunConfig::new(16, 42, 20_000);
//! let start = Start::Ball { centre: vec![0.0, 0.0], scale: vec![0.1, 0.1] };
//! let mut sink = MemorySink::for_samples(2, 16);
//! let result = run(&density, &config, &start, &mut sink, RunControl::default()).unwrap();
//! assert_eq!(result.status, RunStatus::Converged);
//!
//! let table = sink.table();
//! let x0 = table.column(0, table.first_after(result.burn_in));
//! let mean = x0.iter().sum::<f64>() / x0.len() as f64;
//! assert!(mean.abs() < 0.2);
//! ```
#![deny(missing_docs)]

mod checkpoint;
mod density;
pub mod diagnostics;
mod ensemble;
mod error;
pub mod evidence;
mod history;
mod init;
mod moves;
mod rng;
mod run;
mod serde_float;
pub mod storage;
mod team;
pub mod tempering;

pub use density::{FnDensity, FnLogPdf, LogDensity};
pub use error::SamplerError;
pub use init::{check_initial_ensemble, ensemble_rank, DrawFn, Start};
pub use moves::{
    weighted, BoxedClone, Complement, DifferentialEvolution, EnsembleMove, MoveBuffers,
    MoveMixture, Stretch, Walk,
};
pub use rng::StreamRng;
pub use run::{
    checkpoint_step, resume, run, CheckpointConfig, Convergence, ConvergenceCheck, KeptDraws,
    Progress, RunConfig, RunControl, RunDiagnostics, RunResult, RunStatus, StuckWalker, Watch,
    WatchedCheck, WatchedDiagnostics, WatchedSeries,
};
pub use storage::{
    for_each_record, read_record_file, FileSink, MemorySink, RecordKind, RecordTable, SampleSink,
};
pub use tempering::{TemperedLogLikelihoods, TemperingConfig};
