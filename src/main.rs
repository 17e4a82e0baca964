//! The `dyad` command line: parses arguments and wires the crates together.
//!
//! Commands: `fit` (sample a posterior into a run folder), `resume`
//! (continue a stopped run), `report` (redraw summaries and plots), `check`
//! (validate a configuration without sampling), `simulate` (invented data
//! from known elements), `periods` (compare period windows by evidence) and
//! `predict` (where the companion will be at given epochs) and `advise`
//! (which date and measurement would teach most).

// The argument docs below are clap's help texts, where `[sampler]` names a
// table of the configuration file, not a documentation link.
#![allow(rustdoc::broken_intra_doc_links)]

use dyad_fit::{advise, calibrate, check, fit, periods, posterior, predict, terminal};

use std::path::PathBuf;
use std::process::ExitCode;

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

fn run(cli: Cli) -> Result<()> {
    if let Some(n) = cli.threads {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n.max(1))
            .build_global()
            .context("setting up the worker threads")?;
    }
    match cli.command {
        Command::Fit {
            config,
            output,
            overwrite,
            quiet,
            checkpoint_seconds,
        } => fit::fit(
            &config,
            &fit::FitOptions {
                output,
                overwrite,
                quiet,
                checkpoint_seconds,
            },
        ),
        Command::Resume {
            run,
            max_steps,
            quiet,
        } => fit::resume(&run, max_steps, quiet),
        Command::Report { run } => posterior::report(&run),
        Command::Check { config } => check::check(&config),
        Command::Periods {
            config,
            output,
            overwrite,
            quiet,
        } => periods::periods(
            &config,
            &periods::PeriodOptions {
                output,
                overwrite,
                quiet,
            },
        ),
        Command::Predict {
            run,
            epochs,
            from,
            to,
            step,
            scale,
        } => predict::predict(
            &run,
            &predict::PredictOptions {
                epochs,
                from,
                to,
                step,
                scale,
            },
        ),
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
        } => advise::advise(
            &run,
            &advise::AdviseOptions {
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
            },
        ),
        Command::Calibrate {
            settings,
            systems,
            output,
            overwrite,
        } => calibrate::calibrate(
            &settings,
            &calibrate::CalibrateOptions {
                systems,
                output,
                overwrite,
            },
        ),
        Command::Simulate {
            scenario,
            overwrite,
        } => {
            let written = dyad_model::simulate::run_scenario_file(&scenario, overwrite)
                .with_context(|| format!("simulating {}", scenario.display()))?;
            for file in written {
                terminal::write_line(&format!("wrote {}", file.display()))?;
            }
            Ok(())
        }
    }
}

fn main() -> ExitCode {
    match run(Cli::parse()) {
        Ok(()) => ExitCode::SUCCESS,
        // The reader of a pipe stopped early (`dyad check ... | head`): it
        // has what it wanted, so end quietly and successfully.
        Err(e) if terminal::is_broken_pipe(&e) => ExitCode::SUCCESS,
        Err(e) => {
            terminal::write_note(&format!("error: {e:#}"));
            ExitCode::FAILURE
        }
    }
}
