//! Merging a batch: the records of every system of the manifest into one
//! table of results (`results.csv`, one row per finished system, in
//! manifest order) and one list of the systems that did not finish
//! (`failed.csv`: failed, stopped, or not run yet, with the reason).
//!
//! Numbers are written in the shortest form that reads back to the same
//! double, and nothing in either file depends on where, when or in how
//! many shards the systems ran: an interrupted and resumed batch merges to
//! the same bytes as an uninterrupted one.

use std::path::{Path, PathBuf};

use crate::batch::manifest::Manifest;
use crate::batch::record::{SystemRecord, SystemResult, SystemState, TABLE_QUANTITIES};
use crate::batch::run::{BatchFolder, BatchInputs};
use crate::error::{Context, Result};

/// A system that did not finish.
#[derive(Debug, Clone, PartialEq)]
pub struct Unfinished {
    /// Its name.
    pub system: String,
    /// "failed", "stopped" or "not run".
    pub state: &'static str,
    /// Why.
    pub reason: String,
}

/// What the merge found and wrote.
#[derive(Debug, Clone)]
pub struct Merged {
    /// Systems in the manifest.
    pub systems: usize,
    /// The finished systems' results, in manifest order.
    pub finished: Vec<(String, SystemResult)>,
    /// The systems that did not finish, in manifest order.
    pub unfinished: Vec<Unfinished>,
    /// `results.csv`.
    pub results_table: PathBuf,
    /// `failed.csv`.
    pub failures_table: PathBuf,
}

/// Columns of `results.csv` before the quantities.
const LEADING: [&str; 7] = [
    "system",
    "converged",
    "status",
    "steps",
    "largest_split_rhat",
    "fewest_effective_draws",
    "stuck_walkers",
];

/// Columns after the quantities.
const TRAILING: [&str; 6] = [
    "period_modes",
    "mode_weights",
    "mode_weight_errors",
    "mode_periods_days",
    "warnings",
    "run_folder",
];

/// Merges the batch in the output folder `output` into its
/// `results.csv` and `failed.csv`.
pub fn merge(output: &Path) -> Result<Merged> {
    let folder = BatchFolder::new(output);
    let inputs = BatchInputs::read(&folder)?;
    let manifest = Manifest::read(&inputs.manifest)
        .with_context(|| format!("the manifest of the batch in {}", output.display()))?;
    let mut finished = Vec::new();
    let mut unfinished = Vec::new();
    for system in &manifest.systems {
        let name = system.name.clone();
        match SystemRecord::read(&folder.record(&name))? {
            Some(SystemRecord {
                state: SystemState::Finished,
                result: Some(result),
                ..
            }) => finished.push((name, result)),
            Some(record) => unfinished.push(Unfinished {
                system: name,
                state: match record.state {
                    SystemState::Stopped => "stopped",
                    _ => "failed",
                },
                reason: record.reason.unwrap_or_default(),
            }),
            None => unfinished.push(Unfinished {
                system: name,
                state: "not run",
                reason: "no shard has run it yet".to_owned(),
            }),
        }
    }
    let results_table = folder.results_table();
    let failures_table = folder.failures_table();
    write_csv(&results_table, &results_rows(&finished))?;
    let mut failure_rows = vec![vec!["system".into(), "state".into(), "reason".into()]];
    failure_rows.extend(
        unfinished
            .iter()
            .map(|u| vec![u.system.clone(), u.state.to_owned(), u.reason.clone()]),
    );
    write_csv(&failures_table, &failure_rows)?;
    Ok(Merged {
        systems: manifest.systems.len(),
        finished,
        unfinished,
        results_table,
        failures_table,
    })
}

/// The header and rows of `results.csv`.
fn results_rows(finished: &[(String, SystemResult)]) -> Vec<Vec<String>> {
    let mut header: Vec<String> = LEADING.iter().map(|s| (*s).to_owned()).collect();
    for q in TABLE_QUANTITIES {
        for part in ["median", "68_low", "68_high", "95_low", "95_high"] {
            header.push(format!("{q}_{part}"));
        }
    }
    header.extend(TRAILING.iter().map(|s| (*s).to_owned()));
    let mut rows = vec![header];
    for (name, r) in finished {
        let mut row = vec![
            name.clone(),
            (r.status == "converged").to_string(),
            r.status.clone(),
            r.steps.to_string(),
            number(r.largest_split_rhat),
            number(r.fewest_effective_draws),
            r.stuck_walkers.to_string(),
        ];
        for q in TABLE_QUANTITIES {
            match r.quantity(q) {
                Some(v) => {
                    row.extend([v.median, v.q68[0], v.q68[1], v.q95[0], v.q95[1]].map(number))
                }
                None => row.extend(std::iter::repeat_n(String::new(), 5)),
            }
        }
        let list = |f: fn(&crate::batch::record::ModeWeight) -> f64| {
            r.modes
                .iter()
                .map(|m| number(f(m)))
                .collect::<Vec<_>>()
                .join(";")
        };
        row.push(r.modes.len().to_string());
        row.push(list(|m| m.weight));
        row.push(list(|m| m.weight_error));
        row.push(list(|m| m.period_days));
        row.push(r.warnings.join(" | "));
        row.push(format!("systems/{name}"));
        rows.push(row);
    }
    rows
}

/// A number as the shortest text that reads back to the same double
/// (empty for NaN: not computed).
fn number(x: f64) -> String {
    if x.is_nan() {
        String::new()
    } else {
        format!("{x}")
    }
}

fn write_csv(path: &Path, rows: &[Vec<String>]) -> Result<()> {
    dyad_report::write_atomically(path, |w| {
        // The dialect of every dyad table (\n line ends, RFC 4180 quoting).
        let mut writer = dyad_common::csv_table::writer(w);
        for row in rows {
            writer
                .write_record(row)
                .map_err(|e| dyad_report::ReportError::io(path, std::io::Error::other(e)))?;
        }
        writer
            .flush()
            .map_err(|e| dyad_report::ReportError::io(path, e))
    })
    .with_context(|| format!("writing {}", path.display()))
}
