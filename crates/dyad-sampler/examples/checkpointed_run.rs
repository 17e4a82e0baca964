//! A checkpointed run on a 6-D correlated Gaussian whose log-density is made
//! deliberately slow, used by the kill-and-resume test and as a usage example.
//!
//! Usage: `checkpointed_run <folder> <total steps> [resume]`
//!
//! Writes `<folder>/samples.bin` and `<folder>/state.ckpt`; with `resume` it
//! continues the checkpointed run up to the total. Ctrl-C checkpoints and
//! exits cleanly; progress is drawn as a bar on a terminal.

use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;

use dyad_sampler::{
    resume, run, weighted, CheckpointConfig, DifferentialEvolution, FileSink, FnLogPdf,
    MoveMixture, Progress, RunConfig, RunControl, Start, Stretch,
};

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().collect();
    if args.len() < 3 {
        eprintln!("usage: checkpointed_run <folder> <total steps> [resume]");
        return ExitCode::from(2);
    }
    let folder = PathBuf::from(&args[1]);
    let Ok(total) = args[2].parse::<u64>() else {
        eprintln!("total steps must be a whole number, got {}", args[2]);
        return ExitCode::from(2);
    };
    let resuming = args.get(3).is_some_and(|a| a == "resume");
    match go(folder, total, resuming) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::FAILURE
        }
    }
}

fn go(folder: PathBuf, total: u64, resuming: bool) -> Result<(), dyad_sampler::SamplerError> {
    let dim = 6;
    let density = FnLogPdf::new(dim, |x: &[f64]| {
        // About 10 microseconds of busy work that does not change the value,
        // so that a run lasts long enough to be killed part-way.
        let mut waste = 0.0f64;
        for k in 0..1000 {
            waste += (k as f64 * 1e-3 + x[0]).sin();
        }
        let mut q = 0.0;
        for i in 0..x.len() {
            let prev = if i == 0 { 0.0 } else { x[i - 1] };
            let d = x[i] - 0.5 * prev;
            q += d * d / (1.0 + i as f64);
        }
        -0.5 * q + 0.0 * waste
    });
    let mut config = RunConfig::new(16, 20_261_201, total);
    config.convergence = None;
    config.thin = 2;
    config.moves = MoveMixture::new(vec![
        weighted(Stretch::default(), 0.7),
        weighted(DifferentialEvolution::default(), 0.3),
    ])?;
    config.checkpoint = Some(CheckpointConfig::new(
        folder.join("state.ckpt"),
        Duration::from_millis(50),
    ));
    let samples_path = folder.join("samples.bin");

    let cancel = Arc::new(AtomicBool::new(false));
    let flag = cancel.clone();
    // Ctrl-C asks the loop to checkpoint and return; ignore failure to install.
    let _ = ctrlc::set_handler(move || flag.store(true, Ordering::SeqCst));
    let bar = indicatif::ProgressBar::new(total);
    let mut on_progress = |p: &Progress| {
        bar.set_position(p.step);
        bar.set_message(format!(
            "acceptance {:.2}, eta {}",
            p.acceptance,
            p.eta
                .map_or("?".into(), |d| format!("{:.0} s", d.as_secs_f64()))
        ));
    };
    let control = RunControl {
        progress: Some(&mut on_progress),
        cancel: Some(cancel),
        watch: None,
    };
    let result = if resuming {
        let mut sink = FileSink::open(&samples_path)?;
        resume(&density, &config, &mut sink, control)?
    } else {
        let mut sink = FileSink::create_samples(&samples_path, dim, config.n_walkers)?;
        let start = Start::Ball {
            centre: vec![0.0; dim],
            scale: vec![0.1; dim],
        };
        run(&density, &config, &start, &mut sink, control)?
    };
    bar.finish_and_clear();
    println!("{:?} after {} steps", result.status, result.steps);
    Ok(())
}
