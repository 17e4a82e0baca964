//! The `dyad` command line: parses arguments and wires the crates together.

use std::path::PathBuf;

use anyhow::Context;
use clap::{Parser, Subcommand};

/// Bayesian orbits and masses of binary stars.
#[derive(Parser)]
#[command(name = "dyad", version, about)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
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

fn main() -> anyhow::Result<()> {
    let cli = Cli::parse();
    match cli.command {
        Command::Simulate {
            scenario,
            overwrite,
        } => {
            let written = dyad_model::simulate::run_scenario_file(&scenario, overwrite)
                .with_context(|| format!("simulating {}", scenario.display()))?;
            for file in written {
                println!("wrote {}", file.display());
            }
        }
    }
    Ok(())
}
