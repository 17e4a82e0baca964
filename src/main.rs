//! The `dyad` command line: parses arguments, runs the workflows of
//! `dyad-fit`, shows their progress and results, and turns errors into exit
//! codes.
//!
//! Commands: `fit` (sample a posterior into a run folder), `resume`
//! (continue a stopped run), `report` (redraw summaries and plots), `check`
//! (validate a configuration without sampling), `simulate` (invented data
//! from known elements), `periods` (compare period windows by evidence) and
//! `predict` (where the companion will be at given epochs) and `advise`
//! (which date and measurement would teach most); `batch` (a manifest of
//! systems, in shards) and `merge` (a batch's results into one table).

// The argument docs below are clap's help texts, where `[sampler]` names a
// table of the configuration file, not a documentation link.
#![allow(rustdoc::broken_intra_doc_links)]

mod progress;
mod terminal;

use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::OnceLock;
use std::time::Duration;

use dyad_fit::advise::{self, AdviseOptions};
use dyad_fit::batch;
use dyad_fit::calibrate::{self, CalibrateOptions};
use dyad_fit::periods::{self, PeriodOptions};
use dyad_fit::predict::{self, PredictOptions};
use dyad_fit::{CancelFlag, FitRequest, FitRun};

use crate::progress::Terminal;
use crate::terminal::{note, say, say_raw};

use anyhow::{Context, Result};
use clap::{Parser, Subcommand};

/// Bayesian orbits and masses of binary stars from relative astrometry and
/// radial velocities.
#[derive(Parser)]
#[command(name = "dyad", version, about)]
struct Cli {
    /// Worker threads for evaluating walkers (default: all cores). Results
    /// depend on the seed only, never on this.
    #[arg(long, global = true)]
    threads: Option<usize>,
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Sample the posterior of a run configuration and write a run folder.
    Fit {
        /// The run configuration (TOML; keys in configs/README.md).
        config: PathBuf,
        /// Run folder to write instead of the configuration's [output] folder.
        #[arg(long)]
        output: Option<PathBuf>,
        /// Reuse a run folder that already holds files.
        #[arg(long)]
        overwrite: bool,
        /// No progress bar and no summary on the terminal.
        #[arg(long)]
        quiet: bool,
        /// Seconds between checkpoints (default 5).
        #[arg(long, hide = true)]
        checkpoint_seconds: Option<f64>,
    },
    /// Continue a stopped run from its checkpoint.
    Resume {
        /// The run folder.
        run: PathBuf,
        /// New total number of steps (default: the configuration's max_steps).
        #[arg(long)]
        max_steps: Option<u64>,
        /// No progress bar and no summary on the terminal.
        #[arg(long)]
        quiet: bool,
    },
    /// Redraw the summaries and plots of a run folder.
    Report {
        /// The run folder.
        run: PathBuf,
    },
    /// Validate a configuration and its data and say what a fit would do.
    Check {
        /// The run configuration.
        config: PathBuf,
    },
    /// Compare period windows by evidence: a tempered run per window.
    Periods {
        /// The run configuration (windows: [sampler] period_windows_days or
        /// period_windows_years; none: found from a first tempered run).
        config: PathBuf,
        /// Folder for the comparison (default: the [output] folder + "-periods").
        #[arg(long)]
        output: Option<PathBuf>,
        /// Reuse a folder that already holds files.
        #[arg(long)]
        overwrite: bool,
        /// No progress bars.
        #[arg(long)]
        quiet: bool,
    },
    /// Where the companion will be: per period mode, the posterior
    /// separation, position angle, offsets and velocities at given epochs or
    /// over a range, written to a new numbered folder RUN/prediction-N.
    Predict {
        /// The run folder.
        run: PathBuf,
        /// Epochs, as Julian years (e.g. 2027.5) unless --scale says otherwise.
        #[arg(num_args = 0..)]
        epochs: Vec<f64>,
        /// First epoch of a range (with --to and --step).
        #[arg(long, allow_negative_numbers = true)]
        from: Option<f64>,
        /// Last epoch of a range.
        #[arg(long, allow_negative_numbers = true)]
        to: Option<f64>,
        /// Step of a range, in the unit of the time scale (years or days).
        #[arg(long, allow_negative_numbers = true)]
        step: Option<f64>,
        /// Time scale of the epochs: jyear, byear, jd or mjd.
        #[arg(long, default_value = "jyear")]
        scale: String,
    },
    /// Which date, and which kind of measurement, would shrink the mass
    /// intervals most: the expected gain of one more measurement at each
    /// candidate date, from a finished run.
    Advise {
        /// The run folder.
        run: PathBuf,
        /// First candidate date (Julian year unless --scale says otherwise).
        #[arg(long)]
        from: f64,
        /// Last candidate date.
        #[arg(long)]
        to: f64,
        /// Step between candidate dates (years for jyear/byear, days for jd/mjd).
        #[arg(long)]
        step: f64,
        /// Time scale of --from, --to and --step: jyear, byear, jd or mjd.
        #[arg(long, default_value = "jyear")]
        scale: String,
        /// Observing season as calendar months, e.g. 4-9 (April to
        /// September) or 10-3; may be given several times.
        #[arg(long = "season")]
        seasons: Vec<String>,
        /// Error of a new position, each offset, mas (default: the median
        /// quoted error of the run's positions).
        #[arg(long)]
        position_error_mas: Option<f64>,
        /// Error of a new velocity, km/s (default: the median quoted error).
        #[arg(long)]
        velocity_error_kms: Option<f64>,
        /// Posterior draws to reweight.
        #[arg(long, default_value_t = 10_000)]
        draws: usize,
        /// Simulated outcomes per date.
        #[arg(long, default_value_t = 48)]
        outcomes: usize,
        /// Seed of the simulated outcomes.
        #[arg(long, default_value_t = 1)]
        seed: u64,
        /// Replace an earlier advice in the run folder.
        #[arg(long)]
        overwrite: bool,
    },
    /// Simulation-based calibration: draw systems from the prior, simulate,
    /// fit each, and test that the truth's ranks are uniform
    /// (settings keys in configs/calibration/README.md).
    Calibrate {
        /// The calibration settings (TOML).
        settings: PathBuf,
        /// Number of systems instead of the settings' `systems`.
        #[arg(long)]
        systems: Option<usize>,
        /// Output folder instead of the settings' `output`.
        #[arg(long)]
        output: Option<PathBuf>,
        /// Reuse an output folder that already holds files.
        #[arg(long)]
        overwrite: bool,
    },
    /// Fit every system of a manifest (CSV: one row per system, its data
    /// files and changes to the base configuration; columns in
    /// configs/README.md), each into OUTPUT/systems/NAME; finished systems
    /// are skipped and stopped ones resumed. Exit status 0: all of the
    /// shard's systems finished; 1: some failed (the others ran) or the
    /// batch could not start; 3: stopped by Ctrl-C or SIGTERM
    /// (checkpointed: run it again).
    Batch(BatchArgs),
    /// Merge a batch's results into OUTPUT/results.csv and list the systems
    /// that did not finish in OUTPUT/failed.csv (exit status 1 if any).
    Merge {
        /// The batch's output folder.
        output: PathBuf,
    },
    /// Write invented measurements of a binary with known elements, as
    /// described by a scenario file (see demo-data/README.md).
    Simulate {
        /// The scenario (TOML).
        scenario: PathBuf,
        /// Replace output files that exist already.
        #[arg(long)]
        overwrite: bool,
    },
}

#[derive(clap::Args)]
struct BatchArgs {
    /// The manifest (CSV).
    manifest: PathBuf,
    /// The base configuration every system starts from (TOML; its [data]
    /// file names are not used).
    #[arg(long)]
    base: PathBuf,
    /// The batch's output folder.
    #[arg(long)]
    output: PathBuf,
    /// Run only shard I of N (1-based), e.g. 2/4 (default: from
    /// SLURM_ARRAY_TASK_ID and SLURM_ARRAY_TASK_COUNT in a Slurm array job,
    /// else the whole manifest, then merged).
    #[arg(long)]
    shard: Option<String>,
    /// No per-system messages (failures are still reported).
    #[arg(long)]
    quiet: bool,
    /// Seconds between checkpoints (default 5).
    #[arg(long, hide = true)]
    checkpoint_seconds: Option<f64>,
}

/// Exit status of a batch stopped by a signal (checkpointed, resumable).
const EXIT_STOPPED: u8 = 3;

fn run(cli: Cli) -> Result<ExitCode> {
    if let Some(n) = cli.threads {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n.max(1))
            .build_global()
            .context("setting up the worker threads")?;
    }
    match cli.command {
        Command::Batch(args) => return run_batch(args),
        Command::Merge { output } => return merge_batch(&output),
        Command::Fit {
            config,
            output,
            overwrite,
            quiet,
            checkpoint_seconds,
        } => {
            let request = FitRequest::from_file(&config)?;
            let folder = output.unwrap_or_else(|| request.config.output.folder.clone());
            let mut request = request.into_folder(folder, overwrite);
            if let Some(seconds) = checkpoint_seconds {
                request = request.checkpoint_interval(Duration::from_secs_f64(seconds.max(0.0)));
            }
            let run = request.prepare()?;
            if !quiet {
                note!("{}", run.description());
            }
            sample(run, quiet)
        }
        Command::Resume {
            run,
            max_steps,
            quiet,
        } => {
            let run = FitRun::resume(&run, max_steps)?;
            if let (false, Some(done)) = (quiet, run.steps_done()) {
                note!(
                    "resuming at step {done} of {}",
                    run.plan().sampler.max_steps
                );
            }
            sample(run, quiet)
        }
        Command::Report { run } => {
            let report = dyad_fit::posterior::report(&run)?;
            say!("{}", report.text)?;
            say!("results in {}", run.display())?;
            Ok(())
        }
        Command::Check { config } => {
            say!("{}", dyad_fit::check::check(&config)?)?;
            say!("configuration and data are valid.")?;
            Ok(())
        }
        Command::Periods {
            config,
            output,
            overwrite,
            quiet,
        } => {
            let options = PeriodOptions { output, overwrite };
            let mut terminal = Terminal::new(quiet);
            let comparison =
                periods::compare(&config, &options, &mut terminal, &cancel_on_ctrl_c())?;
            if !quiet {
                say!("{}", comparison.table)?;
                say!("results in {}", comparison.folder.display())?;
            }
            Ok(())
        }
        Command::Predict {
            run,
            epochs,
            from,
            to,
            step,
            scale,
        } => {
            let options = PredictOptions {
                epochs,
                from,
                to,
                step,
                scale,
            };
            let prediction = predict::predict(&run, &options)?;
            say_raw!("{}", prediction.text)?;
            let folder = prediction.folder.display();
            match prediction.number {
                2 => say!("wrote {folder} (the earlier prediction-1 is kept)"),
                k if k > 2 => say!(
                    "wrote {folder} (the earlier prediction-1 to prediction-{} are kept)",
                    k - 1
                ),
                _ => say!("wrote {folder}"),
            }?;
            Ok(())
        }
        Command::Advise {
            run,
            from,
            to,
            step,
            scale,
            seasons,
            position_error_mas,
            velocity_error_kms,
            draws,
            outcomes,
            seed,
            overwrite,
        } => {
            let options = AdviseOptions {
                from,
                to,
                step,
                scale,
                seasons,
                position_error_mas,
                velocity_error_kms,
                draws,
                outcomes,
                seed,
                overwrite,
            };
            let advice = advise::advise(&run, &options)?;
            say_raw!("{}", advice.text)?;
            say!(
                "table: {}\nplot: {}",
                advice.table.display(),
                advice.plot.display()
            )?;
            Ok(())
        }
        Command::Calibrate {
            settings,
            systems,
            output,
            overwrite,
        } => {
            let options = CalibrateOptions {
                systems,
                output,
                overwrite,
            };
            let calibration = calibrate::calibrate(&settings, &options, &mut Terminal::new(false))?;
            say_raw!("{}", calibration.text)?;
            say!("wrote {}", calibration.folder.display())?;
            Ok(())
        }
        Command::Simulate {
            scenario,
            overwrite,
        } => {
            let written = dyad_model::simulate::run_scenario_file(&scenario, overwrite)
                .with_context(|| format!("simulating {}", scenario.display()))?;
            for file in written {
                say!("wrote {}", file.display())?;
            }
            Ok(())
        }
    }?;
    Ok(ExitCode::SUCCESS)
}

/// `dyad batch`: one shard (or, outside a Slurm array and without
/// --shard, the whole manifest followed by the merge).
fn run_batch(args: BatchArgs) -> Result<ExitCode> {
    let from_slurm = batch::Shard::from_slurm(|name| std::env::var(name).ok())?;
    let shard = match (&args.shard, from_slurm) {
        (Some(text), _) => batch::Shard::parse(text)?,
        (None, Some(shard)) => shard,
        (None, None) => batch::Shard::ALL,
    };
    let options = batch::ShardOptions {
        base: args.base,
        output: args.output.clone(),
        shard,
        checkpoint_interval: args
            .checkpoint_seconds
            .map(|s| Duration::from_secs_f64(s.max(0.0))),
    };
    let summary = batch::run_shard(
        &args.manifest,
        &options,
        &mut Terminal::new(args.quiet),
        &cancel_on_ctrl_c(),
    )?;
    if let Some((system, at)) = &summary.stopped {
        note!("shard {shard} stopped: {system} {at}; run the same command again to continue");
        return Ok(ExitCode::from(EXIT_STOPPED));
    }
    if shard == batch::Shard::ALL {
        return merge_batch(&args.output);
    }
    note!(
        "shard {shard}: {} finished now, {} earlier, {} failed",
        summary.finished.len(),
        summary.skipped.len(),
        summary.failed.len()
    );
    for (system, reason) in &summary.failed {
        note!("failed: {system}: {reason}");
    }
    for system in &summary.busy {
        note!("not run: {system}: another process was running it");
    }
    Ok(if summary.all_finished() {
        ExitCode::SUCCESS
    } else {
        ExitCode::FAILURE
    })
}

/// `dyad merge`: the batch's tables; failure when a system did not finish.
fn merge_batch(output: &std::path::Path) -> Result<ExitCode> {
    let merged = batch::merge(output)?;
    say!(
        "{} of {} systems finished: {}",
        merged.finished.len(),
        merged.systems,
        merged.results_table.display()
    )?;
    if merged.unfinished.is_empty() {
        return Ok(ExitCode::SUCCESS);
    }
    say!(
        "{} did not finish (listed in {}):",
        merged.unfinished.len(),
        merged.failures_table.display()
    )?;
    for u in &merged.unfinished {
        say!("  {} ({}): {}", u.system, u.state, u.reason)?;
    }
    Ok(ExitCode::FAILURE)
}

/// Samples a prepared run with a progress line, then says how it ended.
fn sample(run: FitRun, quiet: bool) -> Result<()> {
    let max_steps = run.plan().sampler.max_steps;
    let result = run.run(&mut Terminal::new(quiet), &cancel_on_ctrl_c())?;
    let folder = result.folder.clone().unwrap_or_default();
    if result.was_cancelled() {
        note!(
            "stopped at step {} of {max_steps}; the state is checkpointed: continue with `dyad resume {}`",
            result.sampler.steps,
            folder.display()
        );
    } else if let (false, Some(posterior)) = (quiet, &result.posterior) {
        say!("{}", posterior.text)?;
        say!("results in {}", folder.display())?;
    }
    Ok(())
}

/// A cancel flag set by Ctrl-C or by SIGTERM (what a scheduler sends to a
/// job it preempts or cancels; ctrlc's `termination` feature). The handler
/// is installed once per process; if that fails the run simply cannot be
/// interrupted cleanly, which is no reason to refuse to run.
fn cancel_on_ctrl_c() -> CancelFlag {
    static FLAG: OnceLock<CancelFlag> = OnceLock::new();
    FLAG.get_or_init(|| {
        let flag = CancelFlag::new();
        let handler_flag = flag.clone();
        let _ = ctrlc::set_handler(move || handler_flag.cancel());
        flag
    })
    .clone()
}

fn main() -> ExitCode {
    match run(Cli::parse()) {
        Ok(code) => code,
        // The reader of a pipe stopped early (`dyad check ... | head`): it
        // has what it wanted, so end quietly and successfully.
        Err(e) if terminal::is_broken_pipe(&e) => ExitCode::SUCCESS,
        Err(e) => {
            note!("error: {e:#}");
            ExitCode::FAILURE
        }
    }
}
