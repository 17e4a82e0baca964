//! The run loop: one place that owns stepping, recording, the stopping rule,
//! progress reports, cancellation and checkpoints (the executor pattern of
//! argmin), for plain and tempered runs alike (a plain run is a ladder of one).

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use serde::{Deserialize, Serialize};

use crate::checkpoint::{read_payload, write_atomic, Decoder, Encoder};
use crate::density::LogDensity;
use crate::diagnostics::{ess_bulk, ess_tail, split_rhat, AutocorrEstimator, DiagnosticsWorkspace};
use crate::ensemble::{step_all, Rung, Schedule, Walker};
use crate::error::SamplerError;
use crate::history::History;
use crate::init::{check_initial_ensemble, check_walker_count, place_walkers, Start};
use crate::moves::{MoveMixture, Scratch};
use crate::rng::{stream_rng, Stream, StreamRng};
use crate::storage::{for_each_record, FileSink, MemorySink, RecordKind, SampleSink};
use crate::team::{helper_count, StopOnDrop, Team};
use crate::tempering::{Ladder, TemperedLogLikelihoods, TemperingConfig};

/// Burn-in of a run that did not meet its stopping rule, in units of the
/// largest autocorrelation time (at most half the run).
const FALLBACK_BURN_IN_TAUS: f64 = 3.0;

/// Steps between re-timings of the density (to choose the thread schedule).
const RETIME_STEPS: u64 = 1000;

/// The stopping rule: enough effective draws of every parameter, and walkers
/// that agree.
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
    /// Fewest steps between checks; checks are also at least 10 per cent of
    /// the run apart, so their cost stays a small fraction of the run.
    pub min_check_interval: u64,
}

impl Default for Convergence {
    fn default() -> Self {
        Self {
            min_effective_draws: 1000.0,
            max_split_rhat: 1.03,
            min_check_interval: 100,
        }
    }
}

/// What the last check of the stopping rule found (the worst parameter for
/// each condition).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct ConvergenceCheck {
    /// Step of the check.
    pub step: u64,
    /// Steps of history the check used (after its burn-in).
    pub span: u64,
    /// Smallest bulk effective-draw count of any parameter.
    pub fewest_bulk: f64,
    /// Smallest tail effective-draw count of any parameter.
    pub fewest_tail: f64,
    /// Largest split R-hat of any parameter.
    pub largest_rhat: f64,
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

    /// The smaller of the bulk and tail counts.
    pub fn fewest(&self) -> f64 {
        self.fewest_bulk.min(self.fewest_tail)
    }

    /// Whether the rule is met.
    pub fn met(&self, rule: &Convergence) -> bool {
        self.fewest() >= rule.min_effective_draws && self.largest_rhat <= rule.max_split_rhat
    }

    /// Steps the run would need at the current rate: effective draws grow
    /// in proportion to the span of the second half of the history, which is
    /// half the run since the history began.
    pub fn steps_needed(&self, rule: &Convergence, history_start: u64) -> Option<u64> {
        let rate = self.fewest() / self.span as f64;
        (rate.is_finite() && rate > 0.0 && self.span > 0)
            .then(|| history_start + (2.0 * rule.min_effective_draws / rate).ceil() as u64)
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
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
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

    fn n_temperatures(&self) -> usize {
        self.tempering.as_ref().map_or(1, |t| t.n_temperatures)
    }

    fn validate(&self, dim: usize) -> Result<(), SamplerError> {
        check_walker_count(self.n_walkers, dim)?;
        self.moves.validate(dim, self.n_walkers / 2)?;
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
    fn fingerprint(&self, dim: usize) -> String {
        format!(
            "dim={dim};walkers={};seed={};thin={};moves={:?};tempering={:?};history={}",
            self.n_walkers, self.seed, self.thin, self.moves, self.tempering, self.history_capacity
        )
    }
}

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
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct StuckWalker {
    /// Walker index (cold ensemble).
    pub walker: usize,
    /// Its acceptance fraction.
    pub acceptance: f64,
    /// Steps since it last moved.
    pub steps_since_move: u64,
    /// Why it is flagged.
    pub reason: String,
}

/// Diagnostics of the cold chain after burn-in.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct RunDiagnostics {
    /// Acceptance fraction of every cold walker over the whole run.
    pub acceptance: Vec<f64>,
    /// Mean of `acceptance`.
    pub mean_acceptance: f64,
    /// Walkers flagged as stuck.
    pub stuck_walkers: Vec<StuckWalker>,
    /// Integrated autocorrelation time per parameter (steps), after burn-in.
    pub tau: Vec<f64>,
    /// Rank-normalised split R-hat per parameter (walkers as chains).
    pub split_rhat: Vec<f64>,
    /// Bulk effective draws (effective sample size) per parameter, of the
    /// kept (progressively thinned) history after burn-in: a slight
    /// underestimate for the full chain when the history is thinned.
    pub effective_draws_bulk: Vec<f64>,
    /// Tail effective draws per parameter.
    pub effective_draws_tail: Vec<f64>,
    /// Steps between the history snapshots these were computed from.
    pub history_thin: u64,
    /// Snapshots used.
    pub history_len: usize,
    /// What the last check of the stopping rule found (none without a rule
    /// or before the history was long enough).
    pub last_check: Option<ConvergenceCheck>,
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

/// Complete state of a run: what a checkpoint stores.
struct State {
    dim: usize,
    n_walkers: usize,
    rungs: Vec<Rung>,
    swap_rng: StreamRng,
    ladder: Ladder,
    step: u64,
    history: History,
    last_check: Option<ConvergenceCheck>,
    next_check: u64,
    converged: bool,
    burn_in: u64,
    sample_position: u64,
    ladder_position: u64,
}

impl State {
    fn new<D: LogDensity + ?Sized>(
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
                .map(|w| Walker {
                    position: pos[w * dim..(w + 1) * dim].to_vec(),
                    log_prior: lps[w],
                    log_likelihood: lls[w],
                    rng: stream_rng(config.seed, Stream::Walker { rung: r, walker: w }),
                    scratch: Scratch::new(dim, nw / 2),
                    accepted: 0,
                    proposed: 0,
                    rejection_run: 0,
                    longest_rejection_run: 0,
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

    fn encode(&self, fingerprint: &str) -> Result<Vec<u8>, SamplerError> {
        let mut e = Encoder::default();
        e.bytes(fingerprint.as_bytes());
        e.u64(self.step);
        e.u64(self.converged as u64);
        e.u64(self.burn_in);
        e.u64(self.next_check);
        e.u64(self.sample_position);
        e.u64(self.ladder_position);
        let check = self.last_check.map_or(vec![], |c| {
            vec![
                c.step as f64,
                c.span as f64,
                c.fewest_bulk,
                c.fewest_tail,
                c.largest_rhat,
            ]
        });
        e.f64s(&check);
        e.bytes(&rng_bytes(&self.swap_rng)?);
        for r in &self.rungs {
            e.f64(r.beta);
            for w in &r.walkers {
                e.f64s(&w.position);
                e.f64(w.log_prior);
                e.f64(w.log_likelihood);
                e.bytes(&rng_bytes(&w.rng)?);
                e.u64(w.accepted);
                e.u64(w.proposed);
                e.u64(w.rejection_run);
                e.u64(w.longest_rejection_run);
            }
        }
        let l = &self.ladder;
        e.u64(l.frozen as u64);
        e.u64(l.adapt_steps);
        for (&a, &p) in l.accepted.iter().zip(&l.proposed) {
            e.u64(a);
            e.u64(p);
        }
        let h = &self.history;
        e.u64(h.thin);
        e.u64(h.len as u64);
        e.u64(h.start);
        for col in &h.data {
            e.f64s(&col[..h.len * h.n_walkers]);
        }
        Ok(e.buf)
    }

    /// Restores a checkpoint into `self` (a freshly built state of the same shape).
    fn decode(
        &mut self,
        payload: &[u8],
        path: &Path,
        fingerprint: &str,
    ) -> Result<(), SamplerError> {
        let mut d = Decoder {
            buf: payload,
            pos: 0,
            path,
        };
        let fp = d.bytes()?;
        if fp != fingerprint.as_bytes() {
            return Err(SamplerError::CheckpointMismatch(format!(
                "checkpoint was written with [{}], this run has [{fingerprint}]",
                String::from_utf8_lossy(fp)
            )));
        }
        self.step = d.u64()?;
        self.converged = d.u64()? != 0;
        self.burn_in = d.u64()?;
        self.next_check = d.u64()?;
        self.sample_position = d.u64()?;
        self.ladder_position = d.u64()?;
        self.last_check = match d.f64s()?.as_slice() {
            [] => None,
            &[step, span, fewest_bulk, fewest_tail, largest_rhat] => Some(ConvergenceCheck {
                step: step as u64,
                span: span as u64,
                fewest_bulk,
                fewest_tail,
                largest_rhat,
            }),
            _ => {
                return Err(SamplerError::BadFile {
                    path: path.to_path_buf(),
                    reason: "the stopping rule's last check is malformed".into(),
                })
            }
        };
        self.swap_rng = rng_from(d.bytes()?, path)?;
        for r in self.rungs.iter_mut() {
            r.beta = d.f64()?;
            for w in r.walkers.iter_mut() {
                d.f64s_into(&mut w.position)?;
                w.log_prior = d.f64()?;
                w.log_likelihood = d.f64()?;
                w.rng = rng_from(d.bytes()?, path)?;
                w.accepted = d.u64()?;
                w.proposed = d.u64()?;
                w.rejection_run = d.u64()?;
                w.longest_rejection_run = d.u64()?;
            }
        }
        let l = &mut self.ladder;
        l.frozen = d.u64()? != 0;
        l.adapt_steps = d.u64()?;
        for k in 0..l.accepted.len() {
            l.accepted[k] = d.u64()?;
            l.proposed[k] = d.u64()?;
        }
        let h = &mut self.history;
        h.thin = d.u64()?;
        h.len = d.usize()?;
        h.start = d.u64()?;
        if h.len > h.capacity || h.thin == 0 {
            return Err(SamplerError::BadFile {
                path: path.to_path_buf(),
                reason: "history does not fit the configured capacity".into(),
            });
        }
        let n = h.len * h.n_walkers;
        for col in h.data.iter_mut() {
            d.f64s_into(&mut col[..n])?;
        }
        if d.pos != payload.len() {
            return Err(SamplerError::BadFile {
                path: path.to_path_buf(),
                reason: "checkpoint has trailing bytes".into(),
            });
        }
        Ok(())
    }

    fn cold(&self) -> &Rung {
        &self.rungs[0]
    }

    fn cold_counts(&self) -> (u64, u64) {
        self.cold()
            .walkers
            .iter()
            .fold((0, 0), |(a, p), w| (a + w.accepted, p + w.proposed))
    }
}

fn rng_bytes(rng: &StreamRng) -> Result<Vec<u8>, SamplerError> {
    serde_json::to_vec(rng).map_err(|e| SamplerError::Config(format!("random state: {e}")))
}

fn rng_from(bytes: &[u8], path: &Path) -> Result<StreamRng, SamplerError> {
    serde_json::from_slice(bytes).map_err(|e| SamplerError::BadFile {
        path: path.to_path_buf(),
        reason: format!("random state: {e}"),
    })
}

fn first_check(config: &RunConfig, from: u64) -> u64 {
    from + config
        .convergence
        .as_ref()
        .map_or(u64::MAX / 2, |c| c.min_check_interval)
}

/// The tempered log-likelihood store of a tempered run.
enum LadderStore {
    Memory(MemorySink),
    File(FileSink),
}

impl LadderStore {
    fn sink(&mut self) -> &mut dyn SampleSink {
        match self {
            LadderStore::Memory(m) => m,
            LadderStore::File(f) => f,
        }
    }
}

/// Starts a run from `start`, streaming thinned cold-chain samples to `samples`.
///
/// The sink must take records of `n_walkers * (dim + 2)` values (see
/// [`crate::storage`]). With checkpoints configured, a tempered run keeps its
/// tempered log-likelihoods in [`CheckpointConfig::ladder_file`], otherwise in memory.
pub fn run<D: LogDensity + ?Sized>(
    density: &D,
    config: &RunConfig,
    start: &Start<'_>,
    samples: &mut dyn SampleSink,
    control: RunControl<'_>,
) -> Result<RunResult, SamplerError> {
    config.validate(density.dim())?;
    let mut state = State::new(density, config, start)?;
    let n_temps = config.n_temperatures();
    let mut ladder_store = match (&config.tempering, &config.checkpoint) {
        (None, _) => None,
        (Some(_), Some(c)) => Some(LadderStore::File(FileSink::create(
            c.ladder_file(),
            RecordKind::TemperedLogLikelihoods,
            config.n_walkers,
            n_temps,
        )?)),
        (Some(_), None) => Some(LadderStore::Memory(MemorySink::new(
            config.n_walkers,
            n_temps,
        ))),
    };
    state.sample_position = samples.sync()?;
    if let Some(l) = ladder_store.as_mut() {
        state.ladder_position = l.sink().sync()?;
    }
    drive(
        density,
        config,
        &mut state,
        samples,
        ladder_store.as_mut(),
        control,
    )
}

/// Resumes the run checkpointed at `config.checkpoint`, up to `config.max_steps`
/// steps in total. `samples` must be the same sink as before (for a file, reopen
/// it with [`FileSink::open`]); it is truncated back to the checkpoint's offset,
/// so the result is bit-identical to an uninterrupted run.
pub fn resume<D: LogDensity + ?Sized>(
    density: &D,
    config: &RunConfig,
    samples: &mut dyn SampleSink,
    control: RunControl<'_>,
) -> Result<RunResult, SamplerError> {
    let dim = density.dim();
    config.validate(dim)?;
    let ckpt = config.checkpoint.as_ref().ok_or_else(|| {
        SamplerError::Config("resume needs a checkpoint path in the configuration".into())
    })?;
    let payload = read_payload(&ckpt.path)?;
    let mut state = blank_state(config, dim);
    state.decode(&payload, &ckpt.path, &config.fingerprint(dim))?;
    samples.truncate(state.sample_position)?;
    let mut ladder_store = match config.tempering {
        None => None,
        Some(_) => {
            let mut f = FileSink::open(ckpt.ladder_file())?;
            f.truncate(state.ladder_position)?;
            Some(LadderStore::File(f))
        }
    };
    drive(
        density,
        config,
        &mut state,
        samples,
        ladder_store.as_mut(),
        control,
    )
}

/// Step count stored in a checkpoint (e.g. to tell a user how far a run got).
pub fn checkpoint_step(path: impl AsRef<Path>) -> Result<u64, SamplerError> {
    let path = path.as_ref();
    let payload = read_payload(path)?;
    let mut d = Decoder {
        buf: &payload,
        pos: 0,
        path,
    };
    d.bytes()?;
    d.u64()
}

/// A state of the right shape whose contents a checkpoint overwrites.
fn blank_state(config: &RunConfig, dim: usize) -> State {
    let nw = config.n_walkers;
    let n_temps = config.n_temperatures();
    let rungs = (0..n_temps)
        .map(|r| {
            let walkers = (0..nw)
                .map(|w| Walker {
                    position: vec![0.0; dim],
                    log_prior: 0.0,
                    log_likelihood: 0.0,
                    rng: stream_rng(config.seed, Stream::Walker { rung: r, walker: w }),
                    scratch: Scratch::new(dim, nw / 2),
                    accepted: 0,
                    proposed: 0,
                    rejection_run: 0,
                    longest_rejection_run: 0,
                })
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

fn write_checkpoint(
    config: &RunConfig,
    state: &mut State,
    samples: &mut dyn SampleSink,
    ladder: Option<&mut LadderStore>,
) -> Result<(), SamplerError> {
    let Some(ckpt) = &config.checkpoint else {
        return Ok(());
    };
    state.sample_position = samples.sync()?;
    if let Some(l) = ladder {
        state.ladder_position = l.sink().sync()?;
    }
    let payload = state.encode(&config.fingerprint(state.dim))?;
    write_atomic(&ckpt.path, &payload)
}

fn drive<D: LogDensity + ?Sized>(
    density: &D,
    config: &RunConfig,
    state: &mut State,
    samples: &mut dyn SampleSink,
    ladder_store: Option<&mut LadderStore>,
    control: RunControl<'_>,
) -> Result<RunResult, SamplerError> {
    let helpers = if config.parallel { helper_count() } else { 0 };
    let team = Team::new(helpers, state.rungs.len());
    std::thread::scope(|scope| {
        team.start(scope, density, &config.moves);
        let _stop = StopOnDrop(&team);
        drive_steps(
            density,
            config,
            state,
            samples,
            ladder_store,
            control,
            &team,
        )
    })
}

fn drive_steps<D: LogDensity + ?Sized>(
    density: &D,
    config: &RunConfig,
    state: &mut State,
    samples: &mut dyn SampleSink,
    mut ladder_store: Option<&mut LadderStore>,
    mut control: RunControl<'_>,
    team: &Team,
) -> Result<RunResult, SamplerError> {
    let (dim, nw) = (state.dim, state.n_walkers);
    let n_temps = state.rungs.len();
    let mut record = vec![0.0; nw * (dim + 2)];
    let mut ladder_record = vec![0.0; nw * n_temps];
    let mut estimator = AutocorrEstimator::new();
    let mut workspace = DiagnosticsWorkspace::new();
    let started = Instant::now();
    let start_step = state.step;
    let mut last_checkpoint = Instant::now();
    let (mut acc_prev, mut prop_prev) = state.cold_counts();
    let burn_in_steps = config.tempering.as_ref().map_or(0, |t| t.burn_in_steps);
    let adapt = config.tempering.as_ref().is_some_and(|t| t.adapt);
    let mut schedule = Schedule::Serial;

    let status = loop {
        if state.converged {
            break RunStatus::Converged;
        }
        if state.step >= config.max_steps {
            break RunStatus::StepCap;
        }
        if control
            .cancel
            .as_ref()
            .is_some_and(|c| c.load(Ordering::Relaxed))
        {
            break RunStatus::Cancelled;
        }

        // The first step of every (resumed) run is timed on one thread to
        // choose how to spread walkers over threads; re-timed every
        // RETIME_STEPS steps in case the density's cost changes.
        let timing = config.parallel && (state.step - start_step).is_multiple_of(RETIME_STEPS);
        let t_step = Instant::now();
        step_all(
            &mut state.rungs,
            density,
            &config.moves,
            if timing { Schedule::Serial } else { schedule },
            team,
            (config.seed, state.step),
        );
        if timing {
            let per_walker = t_step.elapsed().as_nanos() as f64 / (n_temps * nw) as f64;
            schedule = Schedule::from_cost(per_walker, nw / 2, n_temps, team.helpers());
        }
        if n_temps > 1 {
            state.ladder.swap(&mut state.rungs, &mut state.swap_rng);
            if !state.ladder.frozen && adapt {
                if let Some(t) = &config.tempering {
                    state.ladder.adapt(&mut state.rungs, t);
                }
            }
        }
        state.step += 1;
        let step = state.step;

        if !state.ladder.frozen && step >= burn_in_steps {
            // End of the tempering burn-in: freeze the ladder and start the
            // cold-chain history afresh so the stopping rule sees a fixed target.
            state.ladder.frozen = true;
            state.ladder.reset_counts();
            state.history.reset(step);
            state.last_check = None;
            state.next_check = first_check(config, step);
        }

        if step.is_multiple_of(config.thin) {
            for (w, walker) in state.cold().walkers.iter().enumerate() {
                let rec = &mut record[w * (dim + 2)..(w + 1) * (dim + 2)];
                rec[..dim].copy_from_slice(&walker.position);
                rec[dim] = walker.log_prior;
                rec[dim + 1] = walker.log_likelihood;
            }
            samples.append(step, &record)?;
            if let (Some(store), true) = (ladder_store.as_deref_mut(), state.ladder.frozen) {
                for (t, rung) in state.rungs.iter().enumerate() {
                    for (w, walker) in rung.walkers.iter().enumerate() {
                        ladder_record[t * nw + w] = walker.log_likelihood;
                    }
                }
                store.sink().append(step, &ladder_record)?;
            }
        }

        if state.ladder.frozen && state.history.wants(step) {
            let cold = &state.rungs[0];
            state
                .history
                .record(|w| cold.walkers[w].position.as_slice());
        }

        if let Some(conv) = &config.convergence {
            if state.ladder.frozen && step >= state.next_check {
                check_convergence(state, conv, config.burn_in_fraction, &mut workspace);
            }
        }

        if step.is_multiple_of(config.progress_every) {
            if let Some(cb) = control.progress.as_deref_mut() {
                let (acc, prop) = state.cold_counts();
                let acceptance = if prop > prop_prev {
                    (acc - acc_prev) as f64 / (prop - prop_prev) as f64
                } else {
                    0.0
                };
                acc_prev = acc;
                prop_prev = prop;
                cb(&progress_report(
                    config, state, started, start_step, acceptance,
                ));
            }
        }

        if let Some(ckpt) = &config.checkpoint {
            if last_checkpoint.elapsed() >= ckpt.interval {
                write_checkpoint(config, state, samples, ladder_store.as_deref_mut())?;
                last_checkpoint = Instant::now();
            }
        }
    };

    if status != RunStatus::Converged || !state.converged {
        // Burn-in from the last tau estimate when the rule did not fire.
        state.burn_in = fallback_burn_in(state, config, &mut estimator);
    }
    write_checkpoint(config, state, samples, ladder_store.as_deref_mut())?;
    samples.sync()?;
    finish(config, state, status, ladder_store)
}

// Burn-in of `fraction` of `steps`, rounded to the nearest step.
use dyad_common::burn_in_steps as fraction_of;

fn check_convergence(
    state: &mut State,
    rule: &Convergence,
    burn_in_fraction: Option<f64>,
    workspace: &mut DiagnosticsWorkspace,
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
    let check = ConvergenceCheck::measure(
        state.step,
        kept as u64 * h.thin,
        (kept, h.n_walkers, h.dim),
        |p| h.draws(p, first),
        workspace,
    );
    if check.met(rule) {
        state.converged = true;
        state.burn_in = match burn_in_fraction {
            Some(f) => tempered_burn_in(f, state.step, h.start),
            None => h.start + first as u64 * h.thin,
        };
    }
    state.last_check = Some(check);
}

/// Burn-in of a run with a fixed share `fraction` after `steps` steps whose
/// cold-chain history began at `history_start` (the end of a tempered
/// ladder's adaptation; 0 untempered): the share, or the adaptation if it
/// ends later.
fn tempered_burn_in(fraction: f64, steps: u64, history_start: u64) -> u64 {
    fraction_of(fraction, steps).max(history_start)
}

fn fallback_burn_in(state: &State, config: &RunConfig, estimator: &mut AutocorrEstimator) -> u64 {
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

fn progress_report(
    config: &RunConfig,
    state: &State,
    started: Instant,
    start_step: u64,
    acceptance: f64,
) -> Progress {
    let elapsed = started.elapsed();
    let target_steps = match (&config.convergence, &state.last_check) {
        (Some(rule), Some(check)) => check
            .steps_needed(rule, state.history.start)
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

fn finish(
    config: &RunConfig,
    state: &State,
    status: RunStatus,
    ladder_store: Option<&mut LadderStore>,
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
    let tau_max = tau
        .iter()
        .cloned()
        .filter(|t| t.is_finite())
        .fold(0.0, f64::max);

    let mut sorted = acceptance.clone();
    sorted.sort_by(f64::total_cmp);
    let median = sorted[sorted.len() / 2];
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
        warnings.push(format!(
            "reached the step cap of {} steps before every parameter had enough effective \
             draws: {found}; the intervals may be too narrow: raise max_steps and resume",
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
