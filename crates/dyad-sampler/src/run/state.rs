//! The complete state of a run (what a checkpoint stores), and the
//! stopping rule's and the burn-in's book-keeping on it.

use super::config::{Convergence, ConvergenceCheck, RunConfig};
use super::watch::{measure_watched, KeptDraws, Watch, WatchedCheck};
use crate::density::LogDensity;
use crate::diagnostics::{AutocorrEstimator, DiagnosticsWorkspace};
use crate::ensemble::{Rung, Walker};
use crate::error::SamplerError;
use crate::history::History;
use crate::init::{check_initial_ensemble, place_walkers, Start};
use crate::moves::Scratch;
use crate::rng::{stream_rng, Stream, StreamRng};
use crate::tempering::Ladder;

/// Burn-in of a run that did not meet its stopping rule, in units of the
/// largest autocorrelation time (at most half the run).
const FALLBACK_BURN_IN_TAUS: f64 = 3.0;

/// Complete state of a run: what a checkpoint stores.
pub(super) struct State {
    pub(super) dim: usize,
    pub(super) n_walkers: usize,
    pub(super) rungs: Vec<Rung>,
    pub(super) swap_rng: StreamRng,
    pub(super) ladder: Ladder,
    pub(super) step: u64,
    pub(super) history: History,
    pub(super) last_check: Option<ConvergenceCheck>,
    pub(super) next_check: u64,
    pub(super) converged: bool,
    pub(super) burn_in: u64,
    pub(super) sample_position: u64,
    pub(super) ladder_position: u64,
}

impl State {
    pub(super) fn new<D: LogDensity + ?Sized>(
        density: &D,
        config: &RunConfig,
        start: &Start<'_>,
    ) -> Result<Self, SamplerError> {
        let dim = density.dim();
        let nw = config.n_walkers;
        let n_temps = config.n_temperatures();
        let betas = config
            .tempering
            .as_ref()
            .map_or(vec![1.0], |t| t.initial_betas());
        let mut rungs = Vec::with_capacity(n_temps);
        for (r, &beta) in betas.iter().enumerate() {
            let mut rng = stream_rng(config.seed, Stream::Start { rung: r });
            let (pos, lps, lls) =
                place_walkers(density, start, nw, r, config.start_tries, &mut rng)?;
            check_initial_ensemble(&pos, nw, dim)?;
            let walkers = (0..nw)
                .map(|w| {
                    let position = pos[w * dim..(w + 1) * dim].to_vec();
                    new_walker(config, (r, w), position, lps[w], lls[w])
                })
                .collect();
            rungs.push(Rung::new(beta, walkers));
        }
        let mut ladder = Ladder::new(n_temps, nw);
        if config
            .tempering
            .as_ref()
            .is_some_and(|t| t.burn_in_steps == 0)
        {
            ladder.frozen = true;
        }
        Ok(Self {
            dim,
            n_walkers: nw,
            rungs,
            swap_rng: stream_rng(config.seed, Stream::Swaps),
            ladder,
            step: 0,
            history: History::new(dim, nw, config.history_capacity, 0),
            last_check: None,
            next_check: first_check(config, 0),
            converged: false,
            burn_in: 0,
            sample_position: 0,
            ladder_position: 0,
        })
    }

    pub(super) fn cold(&self) -> &Rung {
        &self.rungs[0]
    }

    pub(super) fn cold_counts(&self) -> (u64, u64) {
        self.cold()
            .walkers
            .iter()
            .fold((0, 0), |(a, p), w| (a + w.accepted, p + w.proposed))
    }
}

pub(super) fn first_check(config: &RunConfig, from: u64) -> u64 {
    from + config
        .convergence
        .as_ref()
        .map_or(u64::MAX / 2, |c| c.min_check_interval)
}

/// Walker `w` of rung `r` at `position`, with its own stream and no moves yet.
fn new_walker(
    config: &RunConfig,
    (r, w): (usize, usize),
    position: Vec<f64>,
    log_prior: f64,
    log_likelihood: f64,
) -> Walker {
    let dim = position.len();
    Walker {
        position,
        log_prior,
        log_likelihood,
        rng: stream_rng(config.seed, Stream::Walker { rung: r, walker: w }),
        scratch: Scratch::new(dim, config.n_walkers / 2),
        accepted: 0,
        proposed: 0,
        rejection_run: 0,
        longest_rejection_run: 0,
    }
}

/// A state of the right shape whose contents a checkpoint overwrites.
pub(super) fn blank_state(config: &RunConfig, dim: usize) -> State {
    let nw = config.n_walkers;
    let n_temps = config.n_temperatures();
    let rungs = (0..n_temps)
        .map(|r| {
            let walkers = (0..nw)
                .map(|w| new_walker(config, (r, w), vec![0.0; dim], 0.0, 0.0))
                .collect();
            Rung::new(1.0, walkers)
        })
        .collect();
    State {
        dim,
        n_walkers: nw,
        rungs,
        swap_rng: stream_rng(config.seed, Stream::Swaps),
        ladder: Ladder::new(n_temps, nw),
        step: 0,
        history: History::new(dim, nw, config.history_capacity, 0),
        last_check: None,
        next_check: 0,
        converged: false,
        burn_in: 0,
        sample_position: 0,
        ladder_position: 0,
    }
}

/// Burn-in of a run with a fixed share `fraction` after `steps` steps whose
/// cold-chain history began at `history_start` (the end of a tempered
/// ladder's adaptation; 0 untempered): the share, or the adaptation if it
/// ends later.
fn tempered_burn_in(fraction: f64, steps: u64, history_start: u64) -> u64 {
    dyad_common::burn_in_steps(fraction, steps).max(history_start)
}

pub(super) fn check_convergence(
    state: &mut State,
    rule: &Convergence,
    burn_in_fraction: Option<f64>,
    workspace: &mut DiagnosticsWorkspace,
    watch: Option<&mut (dyn Watch + '_)>,
) {
    let h = &state.history;
    state.next_check = state.step + rule.min_check_interval.max(state.step / 10);
    // The rule judges the chain after the burn-in only: the start holds the
    // approach to the typical set. With a fixed share that is the share, or
    // the end of the ladder's adaptation (the history's start) if that is
    // later: the ladder adapts during the share of `max_steps`, so a burn-in
    // of the share of the steps done reaches the adaptation's end only at
    // the cap, and a tempered run could never stop early. Without a share
    // it is the first half of the history (common practice; Vehtari et al.
    // 2021 sect. 3 likewise discard the first half of each chain).
    let first = match burn_in_fraction {
        Some(f) => (tempered_burn_in(f, state.step, h.start) - h.start).div_ceil(h.thin) as usize,
        None => h.len / 2,
    }
    .min(h.len);
    let kept = h.len - first;
    if kept < 8 {
        return;
    }
    let mut check = ConvergenceCheck::measure(
        state.step,
        kept as u64 * h.thin,
        (kept, h.n_walkers, h.dim),
        |p| h.draws(p, first),
        workspace,
    );
    if let Some(watch) = watch {
        let watched = measure_watched(watch, &KeptDraws::new(h, first), workspace);
        check.watched = WatchedCheck::of(&watched);
    }
    if check.met(rule) {
        state.converged = true;
        state.burn_in = match burn_in_fraction {
            Some(f) => tempered_burn_in(f, state.step, h.start),
            None => h.start + first as u64 * h.thin,
        };
    }
    state.last_check = Some(check);
}

pub(super) fn fallback_burn_in(
    state: &State,
    config: &RunConfig,
    estimator: &mut AutocorrEstimator,
) -> u64 {
    let h = &state.history;
    if let Some(f) = config.burn_in_fraction {
        // At the step cap of a tempered run this is the ladder's freeze.
        return tempered_burn_in(f, state.step, h.start);
    }
    let run = state.step.saturating_sub(h.start);
    let mut tau_max = f64::NAN;
    if h.len >= 8 {
        tau_max = 0.0;
        for p in 0..h.dim {
            let tau = estimator
                .estimate(h.draws(p, 0), h.len, h.n_walkers)
                .map_or(f64::NAN, |a| a.tau * h.thin as f64);
            tau_max = if tau.is_finite() {
                tau_max.max(tau)
            } else {
                f64::NAN
            };
            if tau_max.is_nan() {
                break;
            }
        }
    }
    if tau_max.is_finite() {
        h.start + ((FALLBACK_BURN_IN_TAUS * tau_max).ceil() as u64).min(run / 2)
    } else {
        h.start + run / 2
    }
}
