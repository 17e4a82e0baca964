//! Results depend on the seed only: thread counts, parallel on/off,
//! interrupted and resumed runs all give bit-identical chains.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;

use crate::common::Gaussian;
use dyad_sampler::{
    checkpoint_step, resume, run, weighted, CheckpointConfig, DifferentialEvolution, FileSink,
    MemorySink, MoveMixture, Progress, RecordTable, RunConfig, RunControl, RunResult, RunStatus,
    SampleSink, SamplerError, Start, Stretch, TemperingConfig, Walk,
};

fn target() -> Gaussian {
    Gaussian::rotated(vec![0.0, 1.0, 2.0], &[0.5, 1.0, 4.0], 3)
}

fn config() -> RunConfig {
    let mut c = RunConfig::new(16, 77, 600);
    c.convergence = None;
    c.moves = MoveMixture::new(vec![
        weighted(Stretch::default(), 0.5),
        weighted(DifferentialEvolution::default(), 0.3),
        weighted(Walk::default(), 0.2),
    ])
    .unwrap();
    c.thin = 3;
    c
}

fn start() -> Start<'static> {
    Start::Ball {
        centre: vec![0.0; 3],
        scale: vec![0.1; 3],
    }
}

fn run_in_pool(threads: usize, config: &RunConfig) -> (RecordTable, RunResult) {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap();
    pool.install(|| {
        let mut sink = MemorySink::for_samples(3, config.n_walkers);
        let r = run(
            &target(),
            config,
            &start(),
            &mut sink,
            RunControl::default(),
        )
        .unwrap();
        (sink.into_table(), r)
    })
}

fn bits(t: &RecordTable) -> Vec<u64> {
    t.values.iter().map(|v| v.to_bits()).collect()
}

#[test]
fn one_two_and_sixteen_threads_give_identical_chains() {
    let c = config();
    let (t1, r1) = run_in_pool(1, &c);
    let (t2, r2) = run_in_pool(2, &c);
    let (t16, _) = run_in_pool(16, &c);
    assert_eq!(t1.len(), 200);
    assert_eq!(bits(&t1), bits(&t2));
    assert_eq!(bits(&t1), bits(&t16));
    assert_eq!(t1.steps, t2.steps);
    assert_eq!(r1.diagnostics.acceptance, r2.diagnostics.acceptance);
    let mut serial = c.clone();
    serial.parallel = false;
    let (ts, _) = run_in_pool(2, &serial);
    assert_eq!(bits(&t1), bits(&ts));
}

#[test]
fn different_seeds_give_different_chains() {
    let c = config();
    let mut other = c.clone();
    other.seed += 1;
    assert_ne!(bits(&run_in_pool(1, &c).0), bits(&run_in_pool(1, &other).0));
}

fn stop_and_resume(mut c: RunConfig, dim: usize) {
    let dir = tempfile::tempdir().unwrap();
    let total = c.max_steps;
    // Uninterrupted reference, with frequent checkpoints of its own (their
    // timing must not matter).
    c.checkpoint = Some(CheckpointConfig::new(
        dir.path().join("a.ckpt"),
        Duration::from_millis(20),
    ));
    let mut ref_sink =
        FileSink::create_samples(dir.path().join("a.bin"), dim, c.n_walkers).unwrap();
    let reference = run(
        &target(),
        &c,
        &start(),
        &mut ref_sink,
        RunControl::default(),
    )
    .unwrap();
    drop(ref_sink);

    // The same run cancelled part-way (from the progress callback), then resumed to the total.
    let ckpt = dir.path().join("b.ckpt");
    c.checkpoint = Some(CheckpointConfig::new(&ckpt, Duration::from_secs(3600)));
    c.progress_every = 50;
    let cancel = Arc::new(AtomicBool::new(false));
    let flag = cancel.clone();
    let mut cb = move |p: &Progress| {
        if p.step >= 250 {
            flag.store(true, Ordering::SeqCst);
        }
    };
    let mut sink = FileSink::create_samples(dir.path().join("b.bin"), dim, c.n_walkers).unwrap();
    let first = run(
        &target(),
        &c,
        &start(),
        &mut sink,
        RunControl {
            progress: Some(&mut cb),
            cancel: Some(cancel),
            watch: None,
        },
    )
    .unwrap();
    assert_eq!(first.status, RunStatus::Cancelled);
    assert_eq!(first.steps, 250);
    assert_eq!(checkpoint_step(&ckpt).unwrap(), 250);
    // Simulate a crash after the checkpoint: junk appended to the sample file
    // must be cut off on resume.
    sink.append(999_999, &vec![1.0; c.n_walkers * (dim + 2)])
        .unwrap();
    drop(sink);
    let mut sink = FileSink::open(dir.path().join("b.bin")).unwrap();
    let resumed = resume(&target(), &c, &mut sink, RunControl::default()).unwrap();
    drop(sink);
    assert_eq!(resumed.steps, reference.steps);
    if reference.status == RunStatus::StepCap {
        assert_eq!(
            resumed.steps, total,
            "resume runs to the total, not that many more"
        );
    }
    assert_eq!(resumed.status, reference.status);
    let a = std::fs::read(dir.path().join("a.bin")).unwrap();
    let b = std::fs::read(dir.path().join("b.bin")).unwrap();
    assert_eq!(a.len(), b.len());
    assert!(a == b, "sample files differ");
    assert_eq!(resumed.final_positions, reference.final_positions);
    assert_eq!(
        resumed.diagnostics.acceptance,
        reference.diagnostics.acceptance
    );
    assert_eq!(resumed.betas, reference.betas);
    assert_eq!(resumed.tempered, reference.tempered);

    // Resuming a finished run does nothing more.
    let mut sink = FileSink::open(dir.path().join("b.bin")).unwrap();
    let again = resume(&target(), &c, &mut sink, RunControl::default()).unwrap();
    assert_eq!(again.steps, reference.steps);
    drop(sink);
    assert_eq!(std::fs::read(dir.path().join("b.bin")).unwrap(), a);
}

#[test]
fn cancelled_and_resumed_run_is_bit_identical() {
    stop_and_resume(config(), 3);
}

#[test]
fn cancelled_and_resumed_convergence_run_is_bit_identical() {
    let mut c = config();
    c.max_steps = 5000;
    c.convergence = Some(dyad_sampler::Convergence {
        min_check_interval: 50,
        ..Default::default()
    });
    stop_and_resume(c, 3);
}

#[test]
fn cancelled_and_resumed_tempered_run_is_bit_identical() {
    let mut c = config();
    c.tempering = Some(TemperingConfig {
        n_temperatures: 4,
        burn_in_steps: 200,
        ..Default::default()
    });
    stop_and_resume(c, 3);
}

#[test]
fn resume_with_another_configuration_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let mut c = config();
    c.checkpoint = Some(CheckpointConfig::new(
        dir.path().join("c.ckpt"),
        Duration::ZERO,
    ));
    let mut sink = MemorySink::for_samples(3, c.n_walkers);
    run(&target(), &c, &start(), &mut sink, RunControl::default()).unwrap();
    c.seed += 1;
    let err = resume(&target(), &c, &mut sink, RunControl::default()).unwrap_err();
    assert!(matches!(err, SamplerError::CheckpointMismatch(_)), "{err}");
    // A damaged checkpoint is a typed error, not a panic.
    std::fs::write(dir.path().join("c.ckpt"), b"DYADCKP1garbage").unwrap();
    c.seed -= 1;
    let err = resume(&target(), &c, &mut sink, RunControl::default()).unwrap_err();
    assert!(matches!(err, SamplerError::BadFile { .. }), "{err}");
}
