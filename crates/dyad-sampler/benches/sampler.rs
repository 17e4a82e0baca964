//! Benchmarks: sampler overhead per walker-step, speed-up with two threads on
//! an expensive density, and the cost of one tau update of the stopping rule.
//!
//! Run with `cargo bench -p dyad-sampler -- --warm-up-time 1 --measurement-time 3`.

use std::hint::black_box;

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use dyad_sampler::diagnostics::AutocorrEstimator;
use dyad_sampler::{
    run, FnLogPdf, LogDensity, RunConfig, RunControl, SampleSink, SamplerError, Start,
};

/// Keeps nothing: measures the sampler, not the storage.
struct Discard;
impl SampleSink for Discard {
    fn append(&mut self, _step: u64, values: &[f64]) -> Result<(), SamplerError> {
        black_box(values);
        Ok(())
    }
    fn sync(&mut self) -> Result<u64, SamplerError> {
        Ok(0)
    }
    fn truncate(&mut self, _position: u64) -> Result<(), SamplerError> {
        Ok(())
    }
}

fn fixed_run<D: LogDensity>(density: &D, n_walkers: usize, steps: u64, parallel: bool) {
    let dim = density.dim();
    let mut config = RunConfig::new(n_walkers, 1, steps);
    config.convergence = None;
    config.parallel = parallel;
    config.thin = steps;
    config.history_capacity = 4;
    let start = Start::Ball {
        centre: vec![0.0; dim],
        scale: vec![1.0; dim],
    };
    let r = run(
        density,
        &config,
        &start,
        &mut Discard,
        RunControl::default(),
    );
    black_box(r.map(|r| r.steps).unwrap_or(0));
}

fn overhead(c: &mut Criterion) {
    // A trivial 4-D density: what is left is the sampler's own work per walker-step.
    let density = FnLogPdf::new(4, |x: &[f64]| -0.5 * x[0] * x[0]);
    let (nw, steps) = (32usize, 2000u64);
    let mut g = c.benchmark_group("overhead_per_walker_step");
    g.throughput(Throughput::Elements(nw as u64 * steps));
    for parallel in [false, true] {
        g.bench_function(
            BenchmarkId::new("trivial_4d", if parallel { "parallel" } else { "serial" }),
            |b| b.iter(|| fixed_run(&density, nw, steps, parallel)),
        );
    }
    g.finish();
}

fn busy_density() -> impl LogDensity {
    FnLogPdf::new(6, |x: &[f64]| {
        // About 20 microseconds of arithmetic the optimiser cannot drop
        // (3500 sines; `single_evaluation` reports the measured cost).
        let mut acc = 0.0;
        for k in 0..3500 {
            acc += (x[k % 6] + k as f64 * 1e-4).sin();
        }
        -0.5 * x.iter().map(|v| v * v).sum::<f64>() + 1e-300 * acc
    })
}

fn thread_speed_up(c: &mut Criterion) {
    let density = busy_density();
    let (nw, steps) = (32usize, 100u64);
    let mut g = c.benchmark_group("expensive_density_threads");
    g.throughput(Throughput::Elements(nw as u64 * steps));
    g.sample_size(10);
    g.bench_function("single_evaluation", |b| {
        let x = [0.1; 6];
        b.iter(|| black_box(density.log_likelihood(black_box(&x))))
    });
    for threads in [1usize, 2] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("thread pool");
        g.bench_function(BenchmarkId::new("threads", threads), |b| {
            b.iter(|| pool.install(|| fixed_run(&density, nw, steps, true)))
        });
        // Control: the same evaluations as one embarrassingly parallel batch
        // with no sampler at all, to show how much parallelism the machine
        // offers right now.
        let points = vec![[0.1f64; 6]; nw * steps as usize];
        g.bench_function(BenchmarkId::new("rayon_control", threads), |b| {
            b.iter(|| {
                pool.install(|| {
                    use rayon::prelude::*;
                    let s: f64 = points.par_iter().map(|x| density.log_likelihood(x)).sum();
                    black_box(s)
                })
            })
        });
    }
    g.finish();
}

fn tau_update(c: &mut Criterion) {
    // One stopping-rule check at full history: 12 parameters, 64 walkers,
    // 2048 snapshots of AR(1) draws.
    let (n_steps, nw, dim) = (2048usize, 64usize, 12usize);
    let mut state = 0x1234_5678u64;
    let mut uniform = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    };
    let columns: Vec<Vec<f64>> = (0..dim)
        .map(|_| {
            let mut prev = vec![0.0; nw];
            let mut out = Vec::with_capacity(n_steps * nw);
            for _ in 0..n_steps {
                for p in prev.iter_mut() {
                    *p = 0.9 * *p + uniform();
                    out.push(*p);
                }
            }
            out
        })
        .collect();
    let mut estimator = AutocorrEstimator::new();
    c.bench_function("tau_update_12x64x2048", |b| {
        b.iter(|| {
            let mut worst: f64 = 0.0;
            for col in &columns {
                let t = estimator
                    .estimate(col, n_steps, nw)
                    .map_or(f64::NAN, |a| a.tau);
                worst = worst.max(t);
            }
            black_box(worst)
        })
    });
}

criterion_group!(benches, overhead, thread_speed_up, tau_update);
criterion_main!(benches);
