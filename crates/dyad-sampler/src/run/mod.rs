//! The run loop: one place that owns stepping, recording, the stopping rule,
//! progress reports, cancellation and checkpoints (the executor pattern of
//! argmin), for plain and tempered runs alike (a plain run is a ladder of one).

mod config;
mod outcome;
mod saved;
mod state;
mod watch;

pub use config::{CheckpointConfig, Convergence, ConvergenceCheck, RunConfig};
pub use outcome::{Progress, RunControl, RunDiagnostics, RunResult, RunStatus, StuckWalker};
pub use watch::{KeptDraws, Watch, WatchedCheck, WatchedDiagnostics, WatchedSeries};

use std::path::Path;
use std::sync::atomic::Ordering;
use std::time::Instant;

use crate::checkpoint::{read_payload, write_atomic};
use crate::density::LogDensity;
use crate::diagnostics::{AutocorrEstimator, DiagnosticsWorkspace};
use crate::ensemble::{step_all, Schedule};
use crate::error::SamplerError;
use crate::init::Start;
use crate::moves::MoveMixture;
use crate::storage::{FileSink, MemorySink, RecordKind, SampleSink};
use crate::team::{helper_count, StopOnDrop, Team};
use outcome::{finish, progress_report};
use state::{blank_state, check_convergence, fallback_burn_in, first_check, State};

/// Steps between re-timings of the density (to choose the thread schedule).
const RETIME_STEPS: u64 = 1000;

/// The tempered log-likelihood store of a tempered run.
pub(super) enum LadderStore {
    Memory(MemorySink),
    File(FileSink),
}

impl LadderStore {
    pub(super) fn sink(&mut self) -> &mut dyn SampleSink {
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
    let setup = Setup {
        density,
        config,
        moves: &config.moves,
    };
    drive(&setup, &mut state, samples, ladder_store.as_mut(), control)
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
    let mut moves = config.moves.clone();
    saved::restore(&payload, &ckpt.path, config, &mut state, &mut moves)?;
    samples.truncate(state.sample_position)?;
    let mut ladder_store = match config.tempering {
        None => None,
        Some(_) => {
            let mut f = FileSink::open(ckpt.ladder_file())?;
            f.truncate(state.ladder_position)?;
            Some(LadderStore::File(f))
        }
    };
    let setup = Setup {
        density,
        config,
        moves: &moves,
    };
    drive(&setup, &mut state, samples, ladder_store.as_mut(), control)
}

/// Step count stored in a checkpoint (e.g. to tell a user how far a run got).
pub fn checkpoint_step(path: impl AsRef<Path>) -> Result<u64, SamplerError> {
    let path = path.as_ref();
    let payload = read_payload(path)?;
    saved::step(&payload, path)
}

/// What a run reads and never changes: the density, the configuration and
/// the moves (the configured ones, or on resume those restored from the
/// checkpoint).
struct Setup<'a, D: ?Sized> {
    density: &'a D,
    config: &'a RunConfig,
    moves: &'a MoveMixture,
}

fn write_checkpoint(
    config: &RunConfig,
    moves: &MoveMixture,
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
    let payload = saved::encode(state, config, moves)?;
    write_atomic(&ckpt.path, &payload)
}

fn drive<D: LogDensity + ?Sized>(
    setup: &Setup<'_, D>,
    state: &mut State,
    samples: &mut dyn SampleSink,
    ladder_store: Option<&mut LadderStore>,
    control: RunControl<'_>,
) -> Result<RunResult, SamplerError> {
    let helpers = if setup.config.parallel {
        helper_count()
    } else {
        0
    };
    let team = Team::new(helpers, state.rungs.len());
    std::thread::scope(|scope| {
        team.start(scope, setup.density, setup.moves);
        let _stop = StopOnDrop(&team);
        drive_steps(setup, state, samples, ladder_store, control, &team)
    })
}

fn drive_steps<D: LogDensity + ?Sized>(
    setup: &Setup<'_, D>,
    state: &mut State,
    samples: &mut dyn SampleSink,
    mut ladder_store: Option<&mut LadderStore>,
    mut control: RunControl<'_>,
    team: &Team,
) -> Result<RunResult, SamplerError> {
    let (density, config, moves) = (setup.density, setup.config, setup.moves);
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
            moves,
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
                check_convergence(
                    state,
                    conv,
                    config.burn_in_fraction,
                    &mut workspace,
                    control.watch.as_deref_mut(),
                );
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
                write_checkpoint(config, moves, state, samples, ladder_store.as_deref_mut())?;
                last_checkpoint = Instant::now();
            }
        }
    };

    if status != RunStatus::Converged || !state.converged {
        // Burn-in from the last tau estimate when the rule did not fire.
        state.burn_in = fallback_burn_in(state, config, &mut estimator);
    }
    write_checkpoint(config, moves, state, samples, ladder_store.as_deref_mut())?;
    samples.sync()?;
    finish(config, state, status, ladder_store, control.watch)
}
