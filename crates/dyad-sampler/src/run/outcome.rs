//! What a run reports while it runs ([`Progress`], steered by
//! [`RunControl`]) and what it returns ([`RunResult`] with
//! [`RunDiagnostics`]), and how the final diagnostics are computed.

use std::sync::atomic::AtomicBool;
use std::sync::Arc;
use std::time::{Duration, Instant};

use serde::{Deserialize, Serialize};

use super::config::{Convergence, ConvergenceCheck, RunConfig};
use super::state::State;
use super::watch::{measure_watched, KeptDraws, Watch, WatchedDiagnostics};
use super::LadderStore;
use crate::diagnostics::{ess_bulk, ess_tail, split_rhat, AutocorrEstimator, DiagnosticsWorkspace};
use crate::error::SamplerError;
use crate::storage::{for_each_record, SampleSink};
use crate::tempering::TemperedLogLikelihoods;

/// A progress report, sent every `progress_every` steps.
#[derive(Clone, Debug, PartialEq)]
pub struct Progress {
    /// Steps done (total, including those before a resume).
    pub step: u64,
    /// Step cap.
    pub max_steps: u64,
    /// Cold-chain acceptance fraction since the previous report.
    pub acceptance: f64,
    /// What the last check of the stopping rule found, once there was one.
    pub last_check: Option<ConvergenceCheck>,
    /// The stopping rule, if there is one.
    pub rule: Option<Convergence>,
    /// Steps the stopping rule asks for at the current rate of effective
    /// draws (capped at `max_steps`).
    pub target_steps: Option<u64>,
    /// Wall time since this (possibly resumed) run started.
    pub elapsed: Duration,
    /// Estimated wall time left.
    pub eta: Option<Duration>,
    /// Whether the tempering ladder is frozen (always true without tempering).
    pub ladder_frozen: bool,
}

/// Callbacks and flags that steer a running sampler.
#[derive(Default)]
pub struct RunControl<'a> {
    /// Called with progress reports.
    pub progress: Option<&'a mut dyn FnMut(&Progress)>,
    /// When set to true (e.g. by a Ctrl-C handler) the run checkpoints and returns.
    pub cancel: Option<Arc<AtomicBool>>,
    /// Quantities the stopping rule judges beside the parameters, also
    /// reported in the final diagnostics. A resumed run needs the same watch
    /// to stop where an uninterrupted one would.
    pub watch: Option<&'a mut dyn Watch>,
}

/// Why the run ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub enum RunStatus {
    /// The stopping rule was met.
    Converged,
    /// The step cap was reached (without convergence, if a rule was set).
    StepCap,
    /// The cancel flag was set; the state was checkpointed (if configured).
    Cancelled,
}

/// A walker whose behaviour suggests it is stuck.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct StuckWalker {
    /// Walker index (cold ensemble).
    pub walker: usize,
    /// Its acceptance fraction.
    #[serde(deserialize_with = "crate::serde_float::nan_if_null")]
    pub acceptance: f64,
    /// Steps since it last moved.
    pub steps_since_move: u64,
    /// Why it is flagged.
    pub reason: String,
}

/// Diagnostics of the cold chain after burn-in (serialised in a run's
/// `outcome.json`; NaN is written as `null` and read back as NaN).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RunDiagnostics {
    /// Acceptance fraction of every cold walker over the whole run.
    #[serde(deserialize_with = "crate::serde_float::nans_if_null")]
    pub acceptance: Vec<f64>,
    /// Mean of `acceptance`.
    #[serde(deserialize_with = "crate::serde_float::nan_if_null")]
    pub mean_acceptance: f64,
    /// Walkers flagged as stuck.
    pub stuck_walkers: Vec<StuckWalker>,
    /// Integrated autocorrelation time per parameter (steps), after burn-in.
    #[serde(deserialize_with = "crate::serde_float::nans_if_null")]
    pub tau: Vec<f64>,
    /// Rank-normalised split R-hat per parameter (walkers as chains).
    #[serde(deserialize_with = "crate::serde_float::nans_if_null")]
    pub split_rhat: Vec<f64>,
    /// Bulk effective draws (effective sample size) per parameter, of the
    /// kept (progressively thinned) history after burn-in: a slight
    /// underestimate for the full chain when the history is thinned.
    #[serde(deserialize_with = "crate::serde_float::nans_if_null")]
    pub effective_draws_bulk: Vec<f64>,
    /// Tail effective draws per parameter.
    #[serde(deserialize_with = "crate::serde_float::nans_if_null")]
    pub effective_draws_tail: Vec<f64>,
    /// Steps between the history snapshots these were computed from.
    pub history_thin: u64,
    /// Snapshots used.
    pub history_len: usize,
    /// What the last check of the stopping rule found (none without a rule
    /// or before the history was long enough).
    pub last_check: Option<ConvergenceCheck>,
    /// Diagnostics of the watched quantities after burn-in (none watched:
    /// empty, and left out of the serialised form).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub watched: Vec<WatchedDiagnostics>,
}

/// What a run returns; the samples themselves are in the sink.
#[derive(Clone, Debug, PartialEq)]
pub struct RunResult {
    /// Why the run ended.
    pub status: RunStatus,
    /// Total steps done.
    pub steps: u64,
    /// Steps to discard as burn-in (records with step <= burn_in).
    pub burn_in: u64,
    /// Thinning of the records in the sink.
    pub thin: u64,
    /// Plain-language warnings (unconverged chain, stuck walkers, ...).
    pub warnings: Vec<String>,
    /// Cold-chain diagnostics.
    pub diagnostics: RunDiagnostics,
    /// Final inverse temperatures (just `[1.0]` without tempering).
    pub betas: Vec<f64>,
    /// Swap acceptance of each neighbouring pair since the ladder froze.
    pub swap_acceptance: Vec<f64>,
    /// Tempered log-likelihoods after the ladder froze (tempered runs only).
    pub tempered: Option<TemperedLogLikelihoods>,
    /// Final cold positions, walker-major.
    pub final_positions: Vec<f64>,
}

pub(super) fn progress_report(
    config: &RunConfig,
    state: &State,
    started: Instant,
    start_step: u64,
    acceptance: f64,
) -> Progress {
    let elapsed = started.elapsed();
    let target_steps = match (&config.convergence, &state.last_check) {
        (Some(rule), Some(check)) => check
            .steps_needed(rule, state.history.start, config.burn_in_fraction)
            .map(|s| s.min(config.max_steps)),
        _ => None,
    };
    let goal = target_steps.unwrap_or(config.max_steps).max(state.step);
    let done = state.step - start_step;
    let eta = (done > 0).then(|| {
        let per_step = elapsed.as_secs_f64() / done as f64;
        Duration::from_secs_f64(per_step * (goal - state.step) as f64)
    });
    Progress {
        step: state.step,
        max_steps: config.max_steps,
        acceptance,
        last_check: state.last_check,
        rule: config.convergence.clone(),
        target_steps,
        elapsed,
        eta,
        ladder_frozen: state.ladder.frozen,
    }
}

pub(super) fn finish(
    config: &RunConfig,
    state: &State,
    status: RunStatus,
    ladder_store: Option<&mut LadderStore>,
    watch: Option<&mut (dyn Watch + '_)>,
) -> Result<RunResult, SamplerError> {
    let mut warnings = Vec::new();
    let cold = state.cold();
    let acceptance: Vec<f64> = cold
        .walkers
        .iter()
        .map(|w| {
            if w.proposed == 0 {
                0.0
            } else {
                w.accepted as f64 / w.proposed as f64
            }
        })
        .collect();
    let mean_acceptance = acceptance.iter().sum::<f64>() / acceptance.len() as f64;

    // Diagnostics from the history after burn-in.
    let h = &state.history;
    let first = if state.burn_in > h.start {
        (((state.burn_in - h.start) as f64) / h.thin as f64).ceil() as usize
    } else {
        0
    }
    .min(h.len);
    let n_used = h.len - first;
    let mut estimator = AutocorrEstimator::new();
    let (mut tau, mut rhat, mut ess_b, mut ess_t) = (vec![], vec![], vec![], vec![]);
    for p in 0..state.dim {
        let draws = h.draws(p, first);
        tau.push(
            estimator
                .estimate(draws, n_used, h.n_walkers)
                .map_or(f64::NAN, |a| a.tau * h.thin as f64),
        );
        rhat.push(split_rhat(draws, n_used, h.n_walkers));
        ess_b.push(ess_bulk(draws, n_used, h.n_walkers));
        ess_t.push(ess_tail(draws, n_used, h.n_walkers));
    }
    let watched = match watch {
        Some(watch) if n_used >= 8 => measure_watched(
            watch,
            &KeptDraws::new(h, first),
            &mut DiagnosticsWorkspace::new(),
        ),
        _ => Vec::new(),
    };
    let tau_max = tau
        .iter()
        .cloned()
        .filter(|t| t.is_finite())
        .fold(0.0, f64::max);

    // Type-7 median (Hyndman & Fan 1996): the threshold of a warning only,
    // so the draws do not depend on it.
    let mut sorted = acceptance.clone();
    sorted.sort_by(f64::total_cmp);
    let median = dyad_common::quantile::quantile_sorted(&sorted, 0.5);
    let stuck_run = config.stuck_steps.max((20.0 * tau_max).ceil() as u64);
    let mut stuck_walkers = Vec::new();
    for (w, walker) in cold.walkers.iter().enumerate() {
        let low = acceptance[w] < config.stuck_acceptance_fraction * median;
        let idle = walker.rejection_run >= stuck_run;
        if low || idle {
            let reason = match (low, idle) {
                (true, true) => format!(
                    "acceptance {:.3} is far below the median {median:.3} and it has not moved for {} steps",
                    acceptance[w], walker.rejection_run
                ),
                (true, false) => format!(
                    "acceptance {:.3} is far below the median {median:.3}",
                    acceptance[w]
                ),
                _ => format!("it has not moved for {} steps", walker.rejection_run),
            };
            stuck_walkers.push(StuckWalker {
                walker: w,
                acceptance: acceptance[w],
                steps_since_move: walker.rejection_run,
                reason,
            });
        }
    }
    if !stuck_walkers.is_empty() {
        warnings.push(format!(
            "{} walker(s) look stuck (e.g. in a minor mode or at a support edge); \
             restart from a better ensemble or use tempering",
            stuck_walkers.len()
        ));
    }
    if let (RunStatus::StepCap, Some(rule)) = (status, &config.convergence) {
        let found = state.last_check.map_or_else(
            || "no check of the stopping rule had enough history yet".to_owned(),
            |c| {
                format!(
                    "at the last check (step {}) the worst parameter had {:.0} effective \
                     draws in the bulk and {:.0} in the tails (asked: {:.0}) and the largest \
                     split R-hat was {:.3} (asked: at most {})",
                    c.step,
                    c.fewest_bulk,
                    c.fewest_tail,
                    rule.min_effective_draws,
                    c.largest_rhat,
                    rule.max_split_rhat
                )
            },
        );
        let watched = state
            .last_check
            .and_then(|c| c.watched.map(|w| (c, w)))
            .filter(|(c, _)| !c.watched_met(rule))
            .map_or_else(String::new, |(_, w)| {
                format!(
                    "; of the {} watched quantities (e.g. the share of draws in each mode) the \
                     least settled mean was known to +- {:.3} (asked: {}) from an ensemble-mean \
                     series {} 50 autocorrelation times of {:.0} steps long",
                    w.count,
                    w.largest_error,
                    rule.max_watched_error,
                    if w.long_enough { "over" } else { "not yet" },
                    w.largest_tau
                )
            });
        warnings.push(format!(
            "reached the step cap of {} steps before the stopping rule was met: \
             {found}{watched}; the intervals may be too narrow: raise max_steps and resume",
            config.max_steps
        ));
    }
    if status == RunStatus::Cancelled {
        warnings.push("the run was cancelled; resume it from its checkpoint".into());
    }

    let betas: Vec<f64> = state.rungs.iter().map(|r| r.beta).collect();
    let tempered = match ladder_store {
        Some(store) => {
            // Record by record into one series per temperature: the records
            // are never held twice (the ladder file can be the largest output
            // of a long tempered run).
            let n_temps = betas.len();
            let nw = state.n_walkers;
            let mut lls: Vec<Vec<f64>> = vec![Vec::new(); n_temps];
            let mut split = |_: u64, rec: &[f64]| {
                for (t, ll) in lls.iter_mut().enumerate() {
                    ll.extend_from_slice(&rec[t * nw..(t + 1) * nw]);
                }
            };
            match store {
                LadderStore::Memory(m) => {
                    let table = m.table();
                    for (r, &step) in table.steps.iter().enumerate() {
                        split(
                            step,
                            &table.values[r * n_temps * nw..(r + 1) * n_temps * nw],
                        );
                    }
                }
                LadderStore::File(f) => {
                    f.sync()?;
                    for_each_record(f.path(), split)?;
                }
            }
            Some(TemperedLogLikelihoods {
                betas: betas.clone(),
                n_walkers: nw,
                log_likelihoods: lls,
            })
        }
        None => None,
    };

    Ok(RunResult {
        status,
        steps: state.step,
        burn_in: state.burn_in,
        thin: config.thin,
        warnings,
        diagnostics: RunDiagnostics {
            acceptance,
            mean_acceptance,
            stuck_walkers,
            tau,
            split_rhat: rhat,
            effective_draws_bulk: ess_b,
            effective_draws_tail: ess_t,
            history_thin: h.thin,
            history_len: n_used,
            last_check: state.last_check,
            watched,
        },
        betas,
        swap_acceptance: state.ladder.acceptance(),
        tempered,
        final_positions: cold
            .walkers
            .iter()
            .flat_map(|w| w.position.iter().copied())
            .collect(),
    })
}
