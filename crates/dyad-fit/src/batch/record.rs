//! What a batch keeps of each system: the record a shard writes when it is
//! done with a system (finished with its results, failed with the reason,
//! or stopped and resumable), read back by the next shard run (to skip a
//! finished system) and by the merge.
//!
//! A record holds nothing that depends on where or when the system ran
//! (no paths, times, shard numbers or thread counts), so that the merged
//! table of an interrupted and resumed batch equals that of an
//! uninterrupted one byte for byte.

use std::path::Path;

use serde::{Deserialize, Serialize};

use crate::error::Result;
use crate::fit::Outcome;
use crate::posterior::PosteriorReport;
use crate::run_folder::{read_json, write_text};

/// The quantities the merged table gives with their intervals, when the
/// model has them.
pub const TABLE_QUANTITIES: [&str; 6] = [
    "mass_primary_msun",
    "mass_secondary_msun",
    "total_mass_msun",
    "period_days",
    "eccentricity",
    "parallax_mas",
];

/// Where a system stands.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SystemState {
    /// Sampled to the end; the results are in the record.
    Finished,
    /// An error stopped it; the reason is in the record (the next shard
    /// run tries it again).
    Failed,
    /// Stopped by a signal with its state checkpointed (the next shard run
    /// resumes it).
    Stopped,
}

/// The median and equal-tailed intervals of one quantity.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct QuantityInterval {
    /// The quantity's name as in `summary.json` (e.g. `mass_primary_msun`).
    pub name: String,
    /// Posterior median.
    pub median: f64,
    /// 68 % interval (0.16 and 0.84 quantiles).
    pub q68: [f64; 2],
    /// 95 % interval (0.025 and 0.975 quantiles).
    pub q95: [f64; 2],
}

/// One period mode of a system's posterior.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModeWeight {
    /// Fraction of the draws in the mode.
    pub weight: f64,
    /// Its standard error (walkers as independent chains).
    pub weight_error: f64,
    /// Median period of the mode, days.
    pub period_days: f64,
}

/// The results of a finished system.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SystemResult {
    /// The sampler's status: "converged" or "step cap".
    pub status: String,
    /// Steps done.
    pub steps: u64,
    /// Largest rank-normalised split R-hat over the sampled parameters.
    pub largest_split_rhat: f64,
    /// Fewest effective draws (bulk or tail) over the sampled parameters.
    pub fewest_effective_draws: f64,
    /// Walkers flagged as stuck.
    pub stuck_walkers: usize,
    /// The run's warnings.
    pub warnings: Vec<String>,
    /// Medians and intervals of [`TABLE_QUANTITIES`] the model has.
    pub quantities: Vec<QuantityInterval>,
    /// The period modes, in order of increasing period.
    pub modes: Vec<ModeWeight>,
}

/// A shard's record of one system.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SystemRecord {
    /// The system's name.
    pub system: String,
    /// Where it stands.
    pub state: SystemState,
    /// Why it failed, or where it stopped.
    pub reason: Option<String>,
    /// Its results, when finished.
    pub result: Option<SystemResult>,
}

/// Largest (`largest`) or smallest finite value of `values`; NaN if none.
fn fold_finite<'a>(values: impl Iterator<Item = &'a f64>, largest: bool) -> f64 {
    let finite = values.copied().filter(|v| v.is_finite());
    if largest {
        finite.fold(f64::NAN, f64::max)
    } else {
        finite.fold(f64::NAN, f64::min)
    }
}

impl SystemResult {
    /// The results of a finished run from how it ended and its posterior.
    pub fn of_run(outcome: &Outcome, posterior: &PosteriorReport) -> Result<Self> {
        let d = &outcome.diagnostics;
        let quantities = TABLE_QUANTITIES
            .iter()
            .filter_map(|name| posterior.summary.get(name))
            .map(|p| QuantityInterval {
                name: p.info.name.clone(),
                median: p.median,
                q68: p.q68,
                q95: p.q95,
            })
            .collect();
        let modes = posterior
            .modes
            .modes
            .iter()
            .map(|m| ModeWeight {
                weight: m.weight,
                weight_error: m.weight_error,
                period_days: m.period_days,
            })
            .collect();
        Ok(Self {
            status: outcome.status.to_string(),
            steps: outcome.steps,
            largest_split_rhat: fold_finite(d.split_rhat.iter(), true),
            fewest_effective_draws: fold_finite(
                d.effective_draws_bulk.iter().chain(&d.effective_draws_tail),
                false,
            ),
            stuck_walkers: d.stuck_walkers.len(),
            warnings: outcome.warnings.clone(),
            quantities,
            modes,
        })
    }

    /// The interval of the quantity `name`, if the model has it.
    pub fn quantity(&self, name: &str) -> Option<&QuantityInterval> {
        self.quantities.iter().find(|q| q.name == name)
    }
}

impl SystemRecord {
    /// Reads a record; `None` when there is none.
    pub fn read(path: &Path) -> Result<Option<Self>> {
        if !path.exists() {
            return Ok(None);
        }
        read_json(path, "system record", || {
            format!("reading {}", path.display())
        })
        .map(Some)
    }

    /// Writes the record atomically.
    pub fn write(&self, path: &Path) -> Result<()> {
        let mut text = serde_json::to_string_pretty(self)?;
        text.push('\n');
        write_text(path, &text)
    }
}
