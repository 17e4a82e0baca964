//! Survey-scale batches: a manifest of systems fitted each in its own run
//! folder, split into shards that run anywhere (one machine, or the tasks
//! of a Slurm job array), merged into one table.
//!
//! - [`manifest`]: the CSV manifest (one row per system: data files and
//!   changes to a shared base configuration) and each system's
//!   configuration made from it.
//! - [`shard`]: which systems a shard runs (`--shard I/N`, or the Slurm
//!   array variables).
//! - [`run`]: running a shard: finished systems skipped, checkpointed ones
//!   resumed, failures recorded without stopping the others, a cancel
//!   flag (SIGTERM of a preempted job) checkpointing and stopping.
//! - [`record`]: what a shard keeps of each system.
//! - [`merge`]: the records into `results.csv` and `failed.csv`.
//!
//! A system's result depends only on its configuration (its seed among
//! it): not on the shard count, the shard it fell into, the threads, or
//! whether it was interrupted and resumed.

pub mod manifest;
pub mod merge;
pub mod record;
pub mod run;
pub mod shard;

pub use manifest::{Manifest, SystemEntry};
pub use merge::{merge, Merged, Unfinished};
pub use record::{SystemRecord, SystemResult, SystemState};
pub use run::{run_shard, BatchFolder, ShardOptions, ShardSummary};
pub use shard::Shard;
