//! `dyad fit`, `dyad resume`: run the sampler on a configuration, with a
//! progress bar, Ctrl-C handling and checkpoints, then write the report.

use std::fs;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

use anyhow::{bail, Context, Result};
use serde::{Deserialize, Serialize};

use dyad_model::config::RunConfig;
use dyad_model::likelihood::Model;
use dyad_model::start::{find_starting_points, StartSettings};
use dyad_sampler::evidence::estimate_evidence;
use dyad_sampler::{
    CheckpointConfig, FileSink, LogDensity, RunControl, RunDiagnostics, RunResult, RunStatus, Start,
};

use crate::density::Posterior;
use crate::plan::{checkpoint_every, SamplingPlan};
use crate::progress::ProgressBar;
use crate::run_folder::{write_text, ExistingRun, Provenance, RunFiles};
use crate::terminal::note;

/// Options of `dyad fit`.
pub struct FitOptions {
    /// Run folder instead of the configuration's `[output] folder`.
    pub output: Option<PathBuf>,
    /// Reuse a run folder that holds files already.
    pub overwrite: bool,
    /// No progress bar.
    pub quiet: bool,
    /// Seconds between checkpoints (default: a few).
    pub checkpoint_seconds: Option<f64>,
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
    pub diagnostics: serde_json::Value,
    /// Inverse temperatures of the final ladder.
    #[serde(alias = "betas")]
    pub inverse_temperatures: Vec<f64>,
    /// Swap acceptance rate between neighbouring temperatures.
    #[serde(alias = "swap_acceptance")]
    pub swap_acceptance_rate: Vec<f64>,
    /// Evidence, when the run was tempered.
    pub evidence: Option<serde_json::Value>,
}

impl Outcome {
    fn from_result(result: &RunResult) -> Result<Self> {
        let status = match result.status {
            RunStatus::Converged => "converged",
            RunStatus::StepCap => "step cap",
            RunStatus::Cancelled => "stopped by the user",
        };
        let evidence = match &result.tempered {
            Some(t) if result.status != RunStatus::Cancelled => Some(serde_json::to_value(
                estimate_evidence(t).context("estimating the evidence from the tempered chains")?,
            )?),
            _ => None,
        };
        Ok(Self {
            status: status.to_owned(),
            steps: result.steps,
            // The sampler discards exactly the configured share of the steps.
            burn_in: result.burn_in,
            warnings: result.warnings.clone(),
            diagnostics: diagnostics_json(&result.diagnostics)?,
            inverse_temperatures: result.betas.clone(),
            swap_acceptance_rate: result.swap_acceptance.clone(),
            evidence,
        })
    }

    /// Reads `outcome.json` of a run.
    pub fn read(files: &RunFiles) -> Result<Self> {
        let path = files.outcome();
        let text = fs::read_to_string(&path).with_context(|| {
            format!(
                "reading {} (the run has not finished a sampling session yet: `dyad resume {}`)",
                path.display(),
                files.folder.display()
            )
        })?;
        serde_json::from_str(&text)
            .with_context(|| format!("{}: not a valid outcome record", path.display()))
    }

    fn write(&self, files: &RunFiles) -> Result<()> {
        write_text(&files.outcome(), &serde_json::to_string_pretty(self)?)
    }
}

fn diagnostics_json(d: &RunDiagnostics) -> Result<serde_json::Value> {
    Ok(serde_json::to_value(d)?)
}

/// A cancel flag set by Ctrl-C (installed once per process).
fn ctrl_c_flag() -> Arc<AtomicBool> {
    let flag = Arc::new(AtomicBool::new(false));
    let handler_flag = flag.clone();
    // Installing fails only if a handler exists already; the run then simply
    // cannot be interrupted cleanly, which is no reason to refuse to run.
    let _ = ctrlc::set_handler(move || handler_flag.store(true, Ordering::SeqCst));
    flag
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

fn run_sampler(
    density: &dyn LogDensity,
    plan: &SamplingPlan,
    sink: &mut FileSink,
    start: Option<&Start<'_>>,
    quiet: bool,
) -> Result<RunResult> {
    let cancel = ctrl_c_flag();
    let mut bar = ProgressBar::new(plan.sampler.max_steps, quiet);
    let mut on_progress = |p: &dyad_sampler::Progress| bar.update(p);
    let control = RunControl {
        progress: Some(&mut on_progress),
        cancel: Some(cancel),
    };
    let result = match start {
        Some(start) => dyad_sampler::run(density, &plan.sampler, start, sink, control),
        None => dyad_sampler::resume(density, &plan.sampler, sink, control),
    };
    bar.finish();
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
    quiet: bool,
) -> Result<RunResult> {
    let dim = density.dim();
    let mut sink = FileSink::create_samples(files.chain(), dim, plan.sampler.n_walkers)?;
    run_sampler(density, plan, &mut sink, Some(start), quiet)
}

/// `dyad fit CONFIG`.
pub fn fit(config_path: &Path, options: &FitOptions) -> Result<()> {
    let config_text = fs::read_to_string(config_path)
        .with_context(|| format!("reading {}", config_path.display()))?;
    let config = RunConfig::from_toml_str(&config_text, config_path)?;
    let model = Model::from_config(&config)?;
    let folder = options
        .output
        .clone()
        .unwrap_or_else(|| config.output.folder.clone());
    let files = open_run_folder(&folder, &config, &config_text, options.overwrite)?;
    let mut checkpoint = checkpoint_config(&files);
    if let Some(seconds) = options.checkpoint_seconds {
        checkpoint.interval = std::time::Duration::from_secs_f64(seconds.max(0.0));
    }
    let plan = SamplingPlan::new(&config, &model, Some(checkpoint))?;
    if !options.quiet {
        note!("{}", crate::check::describe(&config, &model, &plan));
        note!("searching for a starting point ...");
    }
    let start = starting_ensemble(&model, &config, &plan)?;
    let density = Posterior::new(&model);
    let result = sample_fresh(&files, &density, &plan, &start, options.quiet)?;
    finish(&files, &config, &model, &plan, &result, options.quiet)
}

/// `dyad resume RUN`: continues a stopped run up to its total step count
/// (or a new total), bit-identically to a run that was never interrupted.
pub fn resume(folder: &Path, max_steps: Option<u64>, quiet: bool) -> Result<()> {
    let run = ExistingRun::open(folder)?;
    let model = Model::from_config(&run.config)?;
    let mut plan = SamplingPlan::new(&run.config, &model, Some(checkpoint_config(&run.files)))?;
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
    if !quiet {
        note!("resuming at step {done} of {}", plan.sampler.max_steps);
    }
    // A run restricted to a period window (made by `dyad periods`) resumes
    // with the same restriction.
    let density = match crate::run_folder::read_window(&run.files)? {
        Some((lo, hi)) => Posterior::in_period_window(&model, lo, hi)
            .context("the run's period window is not valid for this model")?,
        None => Posterior::new(&model),
    };
    let mut sink = FileSink::open(run.files.chain())?;
    let result = run_sampler(&density, &plan, &mut sink, None, quiet)?;
    finish(&run.files, &run.config, &model, &plan, &result, quiet)
}

pub fn checkpoint_config(files: &RunFiles) -> CheckpointConfig {
    CheckpointConfig::new(files.checkpoint(), checkpoint_every())
}

/// Records how the run ended and, unless it was stopped, writes the report.
pub fn finish(
    files: &RunFiles,
    config: &RunConfig,
    model: &Model,
    plan: &SamplingPlan,
    result: &RunResult,
    quiet: bool,
) -> Result<()> {
    let mut outcome = Outcome::from_result(result)?;
    let worst_rhat =
        result
            .diagnostics
            .split_rhat
            .iter()
            .fold(1.0f64, |a, &r| if r.is_nan() { a } else { a.max(r) });
    let unconverged = result.status == RunStatus::StepCap || worst_rhat > 1.1;
    if !plan.tempered() && crate::plan::is_sparse(model) && unconverged {
        outcome.warnings.push(format!(
            "largest split R-hat {worst_rhat:.2}; {}",
            crate::plan::temper_hint(model)
        ));
    }
    outcome.write(files)?;
    for w in &outcome.warnings {
        note!("warning: {w}");
    }
    if result.status == RunStatus::Cancelled {
        note!(
            "stopped at step {} of {}; the state is checkpointed: continue with `dyad resume {}`",
            result.steps,
            plan.sampler.max_steps,
            files.folder.display()
        );
        return Ok(());
    }
    crate::posterior::write_report(files, config, model, &outcome, quiet)
}
