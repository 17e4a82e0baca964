//! Memory stays bounded however long the run: 64 walkers, 12 parameters,
//! 10^6 steps (by default) of a cheap Gaussian, samples streamed to disk
//! with checkpoints every 5 s; prints the peak resident set size (VmHWM from
//! /proc/self/status) at the end.
//!
//! Usage: `long_run_memory [steps] [thin] [folder]`

use std::path::PathBuf;
use std::time::{Duration, Instant};

use dyad_sampler::{run, CheckpointConfig, FileSink, FnLogPdf, RunConfig, RunControl, Start};

fn peak_rss_kib() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let steps: u64 = args.get(1).map_or(Ok(1_000_000), |s| s.parse())?;
    let thin: u64 = args.get(2).map_or(Ok(100), |s| s.parse())?;
    let (folder, _keep) = match args.get(3) {
        Some(f) => (PathBuf::from(f), None),
        None => {
            let t = tempfile::tempdir()?;
            (t.path().to_path_buf(), Some(t))
        }
    };
    let (dim, nw) = (12, 64);
    // Independent normals with different widths: cheap to evaluate.
    let density = FnLogPdf::new(dim, |x: &[f64]| {
        -0.5 * x
            .iter()
            .enumerate()
            .map(|(i, v)| v * v / (1.0 + i as f64))
            .sum::<f64>()
    });
    let mut config = RunConfig::new(nw, 1, steps);
    config.convergence = None;
    config.thin = thin;
    config.checkpoint = Some(CheckpointConfig::new(
        folder.join("state.ckpt"),
        Duration::from_secs(5),
    ));
    let mut sink = FileSink::create_samples(folder.join("samples.bin"), dim, nw)?;
    let start = Start::Ball {
        centre: vec![0.0; dim],
        scale: vec![0.1; dim],
    };
    let t0 = Instant::now();
    let result = run(&density, &config, &start, &mut sink, RunControl::default())?;
    let secs = t0.elapsed().as_secs_f64();
    let file_mb = std::fs::metadata(folder.join("samples.bin"))?.len() as f64 / 1e6;
    println!(
        "{} walkers x {} steps x {dim} parameters in {secs:.1} s ({:.0} ns per walker-step); \
         samples file {file_mb:.1} MB; mean acceptance {:.3}",
        nw,
        result.steps,
        secs * 1e9 / (nw as f64 * result.steps as f64),
        result.diagnostics.mean_acceptance
    );
    match peak_rss_kib() {
        Some(k) => println!("peak RSS (VmHWM): {:.1} MB", k as f64 / 1024.0),
        None => println!("peak RSS unavailable (no /proc/self/status)"),
    }
    Ok(())
}
