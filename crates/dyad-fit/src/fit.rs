//! Fitting a posterior: a [`FitRequest`] (a configuration and its data,
//! from files or in-memory arrays) is prepared into a [`FitRun`] (the model,
//! the sampling plan and, for a run folder, the folder with its provenance),
//! which samples — reporting progress to an [`Observer`], stopping when a
//! [`CancelFlag`] is set, checkpointing on the way — and returns a
//! [`FitResult`]: the sampler's result and diagnostics, the evidence of a
//! tempered run, and the posterior draws with their summary and period
//! modes, ready to use without reading any file back.
//!
//! `dyad fit` and `dyad resume` are this module with a progress line.

use std::fs;
use std::path::{Path, PathBuf};
use std::time::Duration;

use serde::{Deserialize, Serialize};

use dyad_model::config::RunConfig;
use dyad_model::data::Dataset;
use dyad_model::likelihood::Model;
use dyad_model::start::{find_starting_points, StartSettings};
use dyad_sampler::evidence::{estimate_evidence, EvidenceEstimates};
use dyad_sampler::{
    CheckpointConfig, FileSink, LogDensity, MemorySink, RunControl, RunDiagnostics, RunResult,
    RunStatus, SampleSink, Start,
};

use crate::density::Posterior;
use crate::error::{bail, Context, Result};
use crate::modes::ModeWatch;
use crate::observer::{CancelFlag, Observer};
use crate::plan::{checkpoint_every, SamplingPlan};
use crate::posterior::PosteriorReport;
use crate::run_folder::{read_json, read_window, write_text, ExistingRun, Provenance, RunFiles};

/// Where a fit keeps its draws.
#[derive(Debug, Clone, PartialEq)]
pub enum Storage {
    /// A run folder: the chain file, checkpoints, the provenance record and
    /// the report (summaries, samples table, plots) are written there, and
    /// the run can be resumed and reported again later.
    Folder {
        /// The run folder.
        folder: PathBuf,
        /// Reuse a folder that holds files already.
        overwrite: bool,
        /// Wall time between checkpoints.
        checkpoint_interval: Duration,
    },
    /// Draws kept in memory only; nothing is written (a fit that cannot be
    /// resumed, for callers that use the results directly).
    Memory,
}

/// What to fit: a run configuration and its data.
#[derive(Debug, Clone)]
pub struct FitRequest {
    /// The run configuration (priors, error model, sampler settings, ...).
    pub config: RunConfig,
    /// The configuration's text, for the run folder's verbatim copy (none
    /// for a configuration built in memory).
    config_text: Option<String>,
    /// In-memory measurements used instead of the configuration's `[data]`
    /// files.
    dataset: Option<Dataset>,
    /// Where the draws go.
    pub storage: Storage,
}

impl FitRequest {
    /// The configuration file at `path` and the data files it names, into
    /// its `[output] folder`.
    pub fn from_file(path: &Path) -> Result<Self> {
        let config_text =
            fs::read_to_string(path).with_context(|| format!("reading {}", path.display()))?;
        let config = RunConfig::from_toml_str(&config_text, path)?;
        let storage = Storage::Folder {
            folder: config.output.folder.clone(),
            overwrite: false,
            checkpoint_interval: checkpoint_every(),
        };
        Ok(Self {
            config,
            config_text: Some(config_text),
            dataset: None,
            storage,
        })
    }

    /// Measurements given as arrays (internal units, see
    /// `dyad_model::data`) under the priors, error model and sampler
    /// settings of `config` (whose `[data]` file names are ignored; its
    /// catalogue parallax and reference epoch apply). The draws stay in
    /// memory.
    pub fn from_arrays(config: RunConfig, dataset: Dataset) -> Self {
        Self {
            config,
            config_text: None,
            dataset: Some(dataset),
            storage: Storage::Memory,
        }
    }

    /// Writes the run into `folder` instead (reusing a folder with files in
    /// it only if `overwrite`). Only a request read from a file can: the
    /// folder keeps a copy of the configuration to resume and report from.
    pub fn into_folder(mut self, folder: impl Into<PathBuf>, overwrite: bool) -> Self {
        let checkpoint_interval = match self.storage {
            Storage::Folder {
                checkpoint_interval,
                ..
            } => checkpoint_interval,
            Storage::Memory => checkpoint_every(),
        };
        self.storage = Storage::Folder {
            folder: folder.into(),
            overwrite,
            checkpoint_interval,
        };
        self
    }

    /// Checkpoints every `interval` of wall time (run folders only).
    pub fn checkpoint_interval(mut self, interval: Duration) -> Self {
        if let Storage::Folder {
            checkpoint_interval,
            ..
        } = &mut self.storage
        {
            *checkpoint_interval = interval;
        }
        self
    }

    /// Builds the model and the sampling plan and, for a run folder, makes
    /// (or reuses) the folder and records the provenance. Nothing is
    /// sampled yet.
    pub fn prepare(self) -> Result<FitRun> {
        let model = match &self.dataset {
            Some(data) => Model::new(data.clone(), &self.config.model_priors(data)?)?,
            None => Model::from_config(&self.config)?,
        };
        match self.storage {
            Storage::Memory => {
                let plan = SamplingPlan::new(&self.config, &model, None)?;
                Ok(FitRun::new(self.config, model, plan, None, Begin::Fresh))
            }
            Storage::Folder {
                folder,
                overwrite,
                checkpoint_interval,
            } => {
                let (Some(text), None) = (&self.config_text, &self.dataset) else {
                    bail!(
                        "a run folder needs a configuration file naming its data files \
                         (in-memory data are fitted in memory)"
                    );
                };
                let files = open_run_folder(&folder, &self.config, text, overwrite)?;
                let checkpoint = CheckpointConfig::new(files.checkpoint(), checkpoint_interval);
                let plan = SamplingPlan::new(&self.config, &model, Some(checkpoint))?;
                Ok(FitRun::new(
                    self.config,
                    model,
                    plan,
                    Some(files),
                    Begin::Fresh,
                ))
            }
        }
    }
}

/// How a run begins.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Begin {
    /// From a starting ensemble found by the starting-point search.
    Fresh,
    /// From the checkpoint, `done` steps in.
    Resume { done: u64 },
}

/// A prepared fit, ready to sample.
pub struct FitRun {
    config: RunConfig,
    model: Model,
    plan: SamplingPlan,
    files: Option<RunFiles>,
    begin: Begin,
}

impl FitRun {
    fn new(
        config: RunConfig,
        model: Model,
        plan: SamplingPlan,
        files: Option<RunFiles>,
        begin: Begin,
    ) -> Self {
        Self {
            config,
            model,
            plan,
            files,
            begin,
        }
    }

    /// A stopped run of the folder `folder`, to continue from its
    /// checkpoint up to its total step count (or the new total
    /// `max_steps`), bit-identically to a run that was never interrupted.
    pub fn resume(folder: &Path, max_steps: Option<u64>) -> Result<Self> {
        let run = ExistingRun::open(folder)?;
        let model = Model::from_config(&run.config)?;
        let checkpoint = CheckpointConfig::new(run.files.checkpoint(), checkpoint_every());
        let mut plan = SamplingPlan::new(&run.config, &model, Some(checkpoint))?;
        if let Some(total) = max_steps {
            plan.sampler.max_steps = total;
        }
        if !run.files.checkpoint().is_file() {
            bail!("{} has no checkpoint to resume from", folder.display());
        }
        let done = dyad_sampler::checkpoint_step(run.files.checkpoint())?;
        if done >= plan.sampler.max_steps {
            bail!(
                "the run has done {done} of its {} steps already; give a larger total with --max-steps",
                plan.sampler.max_steps
            );
        }
        Ok(Self::new(
            run.config,
            model,
            plan,
            Some(run.files),
            Begin::Resume { done },
        ))
    }

    /// The configuration.
    pub fn config(&self) -> &RunConfig {
        &self.config
    }

    /// The model (data, priors, parameter layout).
    pub fn model(&self) -> &Model {
        &self.model
    }

    /// The sampler settings and why they were chosen.
    pub fn plan(&self) -> &SamplingPlan {
        &self.plan
    }

    /// The run folder, when the run has one.
    pub fn folder(&self) -> Option<&Path> {
        self.files.as_ref().map(|f| f.folder.as_path())
    }

    /// Steps done before this session, for a resumed run.
    pub fn steps_done(&self) -> Option<u64> {
        match self.begin {
            Begin::Fresh => None,
            Begin::Resume { done } => Some(done),
        }
    }

    /// The data, model, priors and sampler plan in a few lines.
    pub fn description(&self) -> String {
        crate::check::describe(&self.config, &self.model, &self.plan)
    }

    /// Samples the posterior and, for a run folder, writes the outcome and
    /// (unless cancelled) the report.
    pub fn run(self, observer: &mut dyn Observer, cancel: &CancelFlag) -> Result<FitResult> {
        let Self {
            config,
            model,
            plan,
            files,
            begin,
        } = self;
        let dim = model.dim();
        match (&files, begin) {
            (Some(files), Begin::Fresh) => {
                observer.message("searching for a starting point ...");
                let start = starting_ensemble(&model, &config, &plan)?;
                let density = Posterior::new(&model);
                let result = sample_fresh(files, &density, &plan, &start, observer, cancel)?;
                finish(files, &config, &model, &plan, result, observer)
            }
            (Some(files), Begin::Resume { .. }) => {
                // A run restricted to a period window (made by `dyad
                // periods`) resumes with the same restriction.
                let density = match read_window(files)? {
                    Some((lo, hi)) => Posterior::in_period_window(&model, lo, hi)
                        .context("the run's period window is not valid for this model")?,
                    None => Posterior::new(&model),
                };
                let mut sink = FileSink::open(files.chain())?;
                let result = run_sampler(&density, &plan, &mut sink, None, observer, cancel)?;
                finish(files, &config, &model, &plan, result, observer)
            }
            (None, _) => {
                observer.message("searching for a starting point ...");
                let start = starting_ensemble(&model, &config, &plan)?;
                let density = Posterior::new(&model);
                let mut sink = MemorySink::for_samples(dim, plan.sampler.n_walkers);
                let result =
                    run_sampler(&density, &plan, &mut sink, Some(&start), observer, cancel)?;
                let evidence = typed_evidence(&result)?;
                let outcome = Outcome::from_result(&result, evidence.as_ref(), &model, &plan)?;
                report_warnings(&outcome, observer);
                let posterior = if result.status == RunStatus::Cancelled {
                    None
                } else {
                    let draws = crate::posterior::draws_from_table(
                        &sink.into_table(),
                        &model,
                        result.burn_in,
                    )?;
                    Some(PosteriorReport::of_draws(draws)?)
                };
                Ok(FitResult {
                    sampler: result,
                    outcome,
                    evidence,
                    posterior,
                    folder: None,
                })
            }
        }
    }
}

/// What a fit gives.
#[derive(Debug)]
pub struct FitResult {
    /// The sampler's result: status, steps, burn-in, cold-chain
    /// diagnostics, temperatures, final positions.
    pub sampler: RunResult,
    /// How the run ended, as `outcome.json` records it.
    pub outcome: Outcome,
    /// Evidence estimates of a tempered run that was not stopped.
    pub evidence: Option<EvidenceEstimates>,
    /// The posterior after burn-in (none when the run was stopped by the
    /// user: resume it first).
    pub posterior: Option<PosteriorReport>,
    /// The run folder, if the run has one.
    pub folder: Option<PathBuf>,
}

impl FitResult {
    /// Whether the run was stopped before it finished (resumable).
    pub fn was_cancelled(&self) -> bool {
        self.sampler.status == RunStatus::Cancelled
    }
}

/// How a run ended, written to `outcome.json` when the sampler returns.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Outcome {
    /// "converged", "step cap" or "stopped by the user".
    pub status: String,
    /// Steps done in total.
    pub steps: u64,
    /// Steps discarded as burn-in.
    pub burn_in: u64,
    /// Warnings from the sampler (unconverged chain, stuck walkers, ...).
    pub warnings: Vec<String>,
    /// Cold-chain diagnostics.
    pub diagnostics: RunDiagnostics,
    /// Inverse temperatures of the final ladder.
    #[serde(alias = "betas")]
    pub inverse_temperatures: Vec<f64>,
    /// Swap acceptance rate between neighbouring temperatures.
    #[serde(alias = "swap_acceptance")]
    pub swap_acceptance_rate: Vec<f64>,
    /// Evidence, when the run was tempered.
    pub evidence: Option<EvidenceEstimates>,
}

/// The evidence of a tempered run that was not stopped.
fn typed_evidence(result: &RunResult) -> Result<Option<EvidenceEstimates>> {
    match &result.tempered {
        Some(t) if result.status != RunStatus::Cancelled => Ok(Some(
            estimate_evidence(t).context("estimating the evidence from the tempered chains")?,
        )),
        _ => Ok(None),
    }
}

impl Outcome {
    /// The record of `result`, with the sparse-orbit warning of an
    /// untempered run that did not converge.
    fn from_result(
        result: &RunResult,
        evidence: Option<&EvidenceEstimates>,
        model: &Model,
        plan: &SamplingPlan,
    ) -> Result<Self> {
        let status = match result.status {
            RunStatus::Converged => "converged",
            RunStatus::StepCap => "step cap",
            RunStatus::Cancelled => "stopped by the user",
        };
        let mut warnings = result.warnings.clone();
        let worst_rhat = result.diagnostics.split_rhat.iter().fold(1.0f64, |a, &r| {
            if r.is_nan() {
                a
            } else {
                a.max(r)
            }
        });
        let unconverged = result.status == RunStatus::StepCap || worst_rhat > 1.1;
        if !plan.tempered() && crate::plan::is_sparse(model) && unconverged {
            warnings.push(format!(
                "largest split R-hat {worst_rhat:.2}; {}",
                crate::plan::temper_hint(model)
            ));
        }
        Ok(Self {
            status: status.to_owned(),
            steps: result.steps,
            // The sampler discards exactly the configured share of the steps.
            burn_in: result.burn_in,
            warnings,
            diagnostics: result.diagnostics.clone(),
            inverse_temperatures: result.betas.clone(),
            swap_acceptance_rate: result.swap_acceptance.clone(),
            evidence: evidence.copied(),
        })
    }

    /// Reads `outcome.json` of a run.
    pub fn read(files: &RunFiles) -> Result<Self> {
        let path = files.outcome();
        read_json(&path, "outcome record", || {
            format!(
                "reading {} (the run has not finished a sampling session yet: `dyad resume {}`)",
                path.display(),
                files.folder.display()
            )
        })
    }

    fn write(&self, files: &RunFiles) -> Result<()> {
        write_text(&files.outcome(), &serde_json::to_string_pretty(self)?)
    }
}

/// The starting ensemble: a small ball around the best point the search
/// found, or (tempered runs) one ball around every distinct mode it found,
/// walkers spread over them round-robin.
pub fn starting_ensemble(
    model: &Model,
    config: &RunConfig,
    plan: &SamplingPlan,
) -> Result<Start<'static>> {
    let settings = StartSettings {
        seed: config.sampler.seed,
        ..StartSettings::default()
    };
    let modes = find_starting_points(model, &settings, Some(&config.start));
    let Some(best) = modes.first() else {
        bail!(
            "no starting point with a finite posterior density was found: \
             check that the priors allow the data (e.g. the period range) or give [start] values"
        );
    };
    let scales: Vec<Vec<f64>> = modes.iter().map(|m| ball_scale(model, &m.x)).collect();
    if !plan.tempered() || modes.len() == 1 {
        return Ok(Start::Ball {
            centre: best.x.clone(),
            scale: scales[0].clone(),
        });
    }
    // Walker w starts in the ball of mode w mod n; the sampler redraws (and
    // shrinks towards the mode) any draw outside the support of the density
    // it samples (prior bounds such as a jitter floor, a period window), so
    // every walker starts where the density is finite.
    Ok(Start::Balls {
        centres: modes.iter().map(|m| m.x.clone()).collect(),
        scales,
    })
}

/// Per-coordinate spread of the starting ball: a tenth of the curvature
/// width 1/sqrt(-d2 ln p / dx2) from central differences, clamped to a sane
/// range (common practice for ensemble starts).
fn ball_scale(model: &Model, x: &[f64]) -> Vec<f64> {
    let f0 = model.log_posterior(x);
    let mut y = x.to_vec();
    (0..x.len())
        .map(|i| {
            let h = 1e-4 * x[i].abs().max(1e-2);
            y[i] = x[i] + h;
            let fp = model.log_posterior(&y);
            y[i] = x[i] - h;
            let fm = model.log_posterior(&y);
            y[i] = x[i];
            let d2 = (fp - 2.0 * f0 + fm) / (h * h);
            let width = if d2.is_finite() && d2 < 0.0 {
                1.0 / (-d2).sqrt()
            } else {
                1e-3
            };
            (0.1 * width).clamp(1e-9, 0.1)
        })
        .collect()
}

/// Runs (or, without `start`, resumes) the sampler, passing its progress
/// reports to `observer`.
fn run_sampler(
    density: &Posterior<'_>,
    plan: &SamplingPlan,
    sink: &mut dyn SampleSink,
    start: Option<&Start<'_>>,
    observer: &mut dyn Observer,
    cancel: &CancelFlag,
) -> Result<RunResult> {
    observer.sampling_started(plan.sampler.max_steps);
    let result = {
        let mut on_progress = |p: &dyad_sampler::Progress| observer.sampling_progress(p);
        let mut modes = ModeWatch::new(density.model());
        let control = RunControl {
            progress: Some(&mut on_progress),
            cancel: Some(cancel.shared()),
            watch: Some(&mut modes),
        };
        match start {
            Some(start) => dyad_sampler::run(density, &plan.sampler, start, sink, control),
            None => dyad_sampler::resume(density, &plan.sampler, sink, control),
        }
    };
    observer.sampling_finished();
    Ok(result?)
}

/// Makes (or, when asked, reuses) a run folder and records what the run is
/// made from: a verbatim copy of the configuration and data checksums.
pub fn open_run_folder(
    folder: &Path,
    config: &RunConfig,
    config_text: &str,
    overwrite: bool,
) -> Result<RunFiles> {
    dyad_report::prepare_run_folder(folder, overwrite)
        .with_context(|| format!("preparing the run folder {}", folder.display()))?;
    let files = RunFiles::new(folder);
    // A fresh run in a reused folder: remove the previous run's outputs so
    // that nothing stale can be mistaken for this run's.
    for stale in [
        files.outcome(),
        files.checkpoint(),
        files.chain(),
        files.window(),
    ] {
        if stale.exists() {
            fs::remove_file(&stale).with_context(|| format!("removing {}", stale.display()))?;
        }
    }
    let provenance = Provenance::record(config, config_text)?;
    write_text(&files.config_copy(), config_text)?;
    write_text(
        &files.provenance(),
        &serde_json::to_string_pretty(&provenance)?,
    )?;
    Ok(files)
}

/// Samples `density` from a fresh start into the run folder.
pub fn sample_fresh(
    files: &RunFiles,
    density: &Posterior<'_>,
    plan: &SamplingPlan,
    start: &Start<'_>,
    observer: &mut dyn Observer,
    cancel: &CancelFlag,
) -> Result<RunResult> {
    let dim = density.dim();
    let mut sink = FileSink::create_samples(files.chain(), dim, plan.sampler.n_walkers)?;
    run_sampler(density, plan, &mut sink, Some(start), observer, cancel)
}

fn report_warnings(outcome: &Outcome, observer: &mut dyn Observer) {
    for w in &outcome.warnings {
        observer.warning(w);
    }
}

/// Records how a run into a folder ended and, unless it was stopped,
/// writes the report.
pub fn finish(
    files: &RunFiles,
    config: &RunConfig,
    model: &Model,
    plan: &SamplingPlan,
    result: RunResult,
    observer: &mut dyn Observer,
) -> Result<FitResult> {
    let evidence = typed_evidence(&result)?;
    let outcome = Outcome::from_result(&result, evidence.as_ref(), model, plan)?;
    outcome.write(files)?;
    report_warnings(&outcome, observer);
    let posterior = if result.status == RunStatus::Cancelled {
        None
    } else {
        Some(crate::posterior::write_report(
            files, config, model, &outcome,
        )?)
    };
    Ok(FitResult {
        sampler: result,
        outcome,
        evidence,
        posterior,
        folder: Some(files.folder.clone()),
    })
}
