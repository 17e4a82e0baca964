//! What configures a run: walkers, seed, moves, the stopping rule
//! ([`Convergence`], judged by [`ConvergenceCheck`]), checkpoints and
//! tempering.

use std::path::PathBuf;
use std::time::Duration;

use serde::{Deserialize, Serialize};

use crate::diagnostics::{DiagnosticsWorkspace, MIN_STEPS_PER_TAU};
use crate::error::SamplerError;
use crate::init::check_walker_count;
use crate::moves::MoveMixture;
use crate::tempering::TemperingConfig;

use super::watch::WatchedCheck;

/// The stopping rule: enough effective draws of every parameter, and walkers
/// that agree.
///
/// Quantities a caller watches ([`crate::Watch`]: e.g. the share of draws in
/// each period mode) must have means known to `max_watched_error` (Monte
/// Carlo standard error from the ensemble-mean series, which must be more
/// than 50 of its autocorrelation times long) and a split R-hat within
/// `max_split_rhat`.
///
/// At each check the second half of the cold-chain history (the first half
/// is burn-in) must give every sampled parameter at least
/// `min_effective_draws` effective draws in the bulk *and* in the tails, and
/// a rank-normalised split R-hat of at most `max_split_rhat` (both as
/// defined by Vehtari et al. 2021, Bayesian Analysis 16, 667, with each
/// walker a chain). The R-hat bound is what guards against a short chain:
/// for a stationary chain split R-hat is about `1 + tau / (2 n)` for split
/// halves of `n` steps (common practice), so 1.03 asks for halves of some 17
/// autocorrelation times per walker, before the effective-draw count (which
/// a short chain can overstate) is believed.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Convergence {
    /// Fewest effective draws, bulk and tail, of every parameter (400 is the
    /// least Vehtari et al. 2021 recommend for reliable intervals).
    pub min_effective_draws: f64,
    /// Largest rank-normalised split R-hat of any parameter.
    pub max_split_rhat: f64,
    /// Largest Monte Carlo standard error of the mean of a watched quantity
    /// (for a mode's share of the draws: of its weight).
    #[serde(default = "default_watched_error")]
    pub max_watched_error: f64,
    /// Fewest steps between checks; checks are also at least 10 per cent of
    /// the run apart, so their cost stays a small fraction of the run.
    pub min_check_interval: u64,
}

impl Default for Convergence {
    fn default() -> Self {
        Self {
            min_effective_draws: 1000.0,
            max_split_rhat: 1.03,
            max_watched_error: default_watched_error(),
            min_check_interval: 100,
        }
    }
}

fn default_watched_error() -> f64 {
    0.01
}

/// What the last check of the stopping rule found (the worst parameter for
/// each condition).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct ConvergenceCheck {
    /// Step of the check.
    pub step: u64,
    /// Steps of history the check used (after its burn-in).
    pub span: u64,
    /// Smallest bulk effective-draw count of any parameter.
    #[serde(deserialize_with = "crate::serde_float::nan_if_null")]
    pub fewest_bulk: f64,
    /// Smallest tail effective-draw count of any parameter.
    #[serde(deserialize_with = "crate::serde_float::nan_if_null")]
    pub fewest_tail: f64,
    /// Largest split R-hat of any parameter.
    #[serde(deserialize_with = "crate::serde_float::nan_if_null")]
    pub largest_rhat: f64,
    /// The same of the watched quantities, when something was watched
    /// (absent from checkpoints written before quantities could be watched).
    #[serde(default)]
    pub watched: Option<WatchedCheck>,
}

impl ConvergenceCheck {
    /// Measures the draws of `dim` parameters, `n_steps` steps of
    /// `n_walkers` walkers each (`draws_of(p)` step-major, as in
    /// [`crate::diagnostics`]); `step` and `span` are recorded as given.
    pub fn measure<'a>(
        step: u64,
        span: u64,
        (n_steps, n_walkers, dim): (usize, usize, usize),
        draws_of: impl Fn(usize) -> &'a [f64],
        workspace: &mut DiagnosticsWorkspace,
    ) -> Self {
        let mut check = Self {
            step,
            span,
            fewest_bulk: f64::INFINITY,
            fewest_tail: f64::INFINITY,
            largest_rhat: 0.0,
            watched: None,
        };
        // A failed estimate (e.g. a parameter that never moved) counts as no
        // effective draws and an infinite R-hat: never converged.
        let finite = |v: Result<f64, _>| v.ok().filter(|v: &f64| v.is_finite());
        for p in 0..dim {
            let draws = draws_of(p);
            let bulk = finite(workspace.ess_bulk(draws, n_steps, n_walkers)).unwrap_or(0.0);
            let tail = finite(workspace.ess_tail(draws, n_steps, n_walkers)).unwrap_or(0.0);
            let rhat =
                finite(workspace.split_rhat(draws, n_steps, n_walkers)).unwrap_or(f64::INFINITY);
            check.fewest_bulk = check.fewest_bulk.min(bulk);
            check.fewest_tail = check.fewest_tail.min(tail);
            check.largest_rhat = check.largest_rhat.max(rhat);
        }
        check
    }

    /// The smaller of the parameters' bulk and tail counts.
    pub fn fewest(&self) -> f64 {
        self.fewest_bulk.min(self.fewest_tail)
    }

    /// Whether the parameters meet the rule (enough effective draws, split
    /// R-hat within its bound), whatever the watched quantities do.
    pub fn parameters_met(&self, rule: &Convergence) -> bool {
        self.fewest() >= rule.min_effective_draws && self.largest_rhat <= rule.max_split_rhat
    }

    /// Whether the watched quantities meet the rule (true when nothing is
    /// watched).
    pub fn watched_met(&self, rule: &Convergence) -> bool {
        self.watched
            .is_none_or(|w| w.settled(rule.max_watched_error, rule.max_split_rhat))
    }

    /// Whether the rule is met.
    pub fn met(&self, rule: &Convergence) -> bool {
        self.parameters_met(rule) && self.watched_met(rule)
    }

    /// Steps the run would need at the current rates, or `None` when a rate
    /// is unknown. The kept span (after the rule's burn-in) must grow until
    /// the parameters' effective draws, which grow in proportion to it,
    /// reach the bound; a watched quantity's error falls as one over the
    /// square root of the span and its series must be 50 autocorrelation
    /// times long. The span is the run minus its burn-in: with a fixed
    /// share `f` and a history that began at `history_start` (the ladder's
    /// freeze of a tempered run) that is `n - max(f n, history_start)`,
    /// which grows step for step after a freeze (until the share catches
    /// up); without a share, half the run since the history began.
    pub fn steps_needed(
        &self,
        rule: &Convergence,
        history_start: u64,
        burn_in_fraction: Option<f64>,
    ) -> Option<u64> {
        if self.span == 0 {
            return None;
        }
        let span = self.span as f64;
        let mut needed = span * rule.min_effective_draws / self.fewest();
        if let Some(w) = self.watched {
            let by_error = span * (w.largest_error / rule.max_watched_error).powi(2);
            needed = needed.max(by_error).max(MIN_STEPS_PER_TAU * w.largest_tau);
        }
        if !(needed.is_finite() && needed >= 0.0) {
            return None;
        }
        let needed = needed.ceil() as u64;
        Some(match burn_in_fraction {
            Some(f) => (history_start + needed).max((needed as f64 / (1.0 - f)).ceil() as u64),
            None => history_start + 2 * needed,
        })
    }
}

/// Where and how often to checkpoint.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CheckpointConfig {
    /// Checkpoint file. A tempered run keeps its tempered log-likelihoods in
    /// a record file beside it, named by [`CheckpointConfig::ladder_file`].
    pub path: PathBuf,
    /// Wall time between checkpoints.
    pub interval: Duration,
}

impl CheckpointConfig {
    /// Checkpoint at `path` every `interval`.
    pub fn new(path: impl Into<PathBuf>, interval: Duration) -> Self {
        Self {
            path: path.into(),
            interval,
        }
    }

    /// The tempered log-likelihood file (`<checkpoint>.loglik`).
    pub fn ladder_file(&self) -> PathBuf {
        let mut name = self
            .path
            .file_name()
            .map(|n| n.to_os_string())
            .unwrap_or_default();
        name.push(".loglik");
        self.path.with_file_name(name)
    }
}

/// Everything that configures a run.
#[derive(Clone, Debug, PartialEq)]
pub struct RunConfig {
    /// Walkers per temperature: even, more than twice the number of parameters.
    pub n_walkers: usize,
    /// Seed of every random stream; results depend on it and nothing else.
    pub seed: u64,
    /// Move mixture.
    pub moves: MoveMixture,
    /// Total number of steps at most (a resumed run runs up to this total).
    pub max_steps: u64,
    /// Stop early when converged; `None` runs exactly `max_steps`.
    pub convergence: Option<Convergence>,
    /// Burn-in as a fixed share of the steps done: with `Some(f)` the run
    /// discards exactly `round(f * steps)` steps, or, if a tempered ladder
    /// adapts for longer, every step up to the ladder's freeze; the stopping
    /// rule judges the chain after that burn-in only. `None`: burn-in from
    /// the autocorrelation time ([`Convergence::burn_in_taus`]).
    pub burn_in_fraction: Option<f64>,
    /// Keep (stream to the sink) every `thin`-th step.
    pub thin: u64,
    /// Share walker updates with helper threads, as many as the current rayon
    /// pool has (results are identical either way).
    pub parallel: bool,
    /// Periodic checkpoints.
    pub checkpoint: Option<CheckpointConfig>,
    /// Snapshots of the in-memory tau history (memory: capacity x walkers x dim x 8 bytes).
    pub history_capacity: usize,
    /// Report progress every this many steps.
    pub progress_every: u64,
    /// Tries per walker to find a start of non-zero density.
    pub start_tries: usize,
    /// Parallel tempering, if wanted.
    pub tempering: Option<TemperingConfig>,
    /// A walker is flagged as stuck when its acceptance is below this
    /// fraction of the ensemble median ...
    pub stuck_acceptance_fraction: f64,
    /// ... or it has not moved for this many steps (or 20 tau, whichever is more).
    pub stuck_steps: u64,
}

impl RunConfig {
    /// Defaults: stretch move, effective-draw stopping rule, no thinning,
    /// parallel evaluation, no checkpoints, no tempering.
    pub fn new(n_walkers: usize, seed: u64, max_steps: u64) -> Self {
        Self {
            n_walkers,
            seed,
            moves: MoveMixture::default(),
            max_steps,
            convergence: Some(Convergence::default()),
            burn_in_fraction: None,
            thin: 1,
            parallel: true,
            checkpoint: None,
            history_capacity: 2048,
            progress_every: 100,
            start_tries: 1000,
            tempering: None,
            stuck_acceptance_fraction: 0.2,
            stuck_steps: 1000,
        }
    }

    pub(super) fn n_temperatures(&self) -> usize {
        self.tempering.as_ref().map_or(1, |t| t.n_temperatures)
    }

    pub(super) fn validate(&self, dim: usize) -> Result<(), SamplerError> {
        check_walker_count(self.n_walkers, dim)?;
        self.moves.validate(self.n_walkers / 2)?;
        if self.thin == 0 {
            return Err(SamplerError::Config("thin must be at least 1".into()));
        }
        if self.progress_every == 0 {
            return Err(SamplerError::Config(
                "progress_every must be at least 1".into(),
            ));
        }
        if self.start_tries == 0 {
            return Err(SamplerError::Config(
                "start_tries must be at least 1".into(),
            ));
        }
        if let Some(c) = &self.convergence {
            if !(c.min_effective_draws > 0.0 && c.max_split_rhat >= 1.0)
                || c.min_check_interval == 0
            {
                return Err(SamplerError::Config(
                    "the stopping rule needs a positive number of effective draws, \
                     a split R-hat bound of at least 1 and a check interval of at least 1"
                        .into(),
                ));
            }
        }
        if let Some(t) = &self.tempering {
            t.validate()?;
        }
        if let Some(f) = self.burn_in_fraction {
            if !(0.0..1.0).contains(&f) {
                return Err(SamplerError::Config(format!(
                    "the burn-in fraction must lie in [0, 1), got {f}"
                )));
            }
        }
        Ok(())
    }

    /// What a checkpoint must agree on to be resumed with this configuration.
    pub(super) fn fingerprint(&self, dim: usize) -> String {
        format!(
            "dim={dim};walkers={};seed={};thin={};tempering={:?};history={}",
            self.n_walkers, self.seed, self.thin, self.tempering, self.history_capacity
        )
    }
}
