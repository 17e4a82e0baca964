//! Cost of the evidence estimators and the convergence diagnostics on
//! synthetic tempered output of typical size (16 temperatures x 32 walkers x
//! 2000 recorded steps), independent of any sampling.

use criterion::{black_box, criterion_group, criterion_main, Criterion};
use dyad_sampler::diagnostics::{AutocorrEstimator, DiagnosticsWorkspace};
use dyad_sampler::evidence::{stepping_stone, thermodynamic_integration, window_probabilities};
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;

const N_TEMPERATURES: usize = 16;
const N_WALKERS: usize = 32;
const N_STEPS: usize = 2000;

/// Log-likelihoods shaped like those of a 5-D Gaussian problem: mean and
/// spread shrink towards the cold rung; AR(1) in steps.
fn synthetic_ladder() -> (Vec<f64>, Vec<Vec<f64>>) {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(1);
    let mut betas: Vec<f64> = (0..N_TEMPERATURES - 1)
        .map(|k| 10f64.powf(-0.4 * k as f64))
        .collect();
    betas.push(0.0);
    let series = betas
        .iter()
        .map(|&beta| {
            let (mean, sd) = (
                -10.0 - 200.0 / (1.0 + 50.0 * beta),
                2.0 + 50.0 / (1.0 + 50.0 * beta),
            );
            let mut state = vec![0.0f64; N_WALKERS];
            let mut out = Vec::with_capacity(N_STEPS * N_WALKERS);
            for _ in 0..N_STEPS {
                for s in state.iter_mut() {
                    let e: f64 = StandardNormal.sample(&mut rng);
                    *s = 0.8 * *s + 0.6 * e;
                    out.push(mean + sd * *s);
                }
            }
            out
        })
        .collect();
    (betas, series)
}

fn benches(c: &mut Criterion) {
    let (betas, series) = synthetic_ladder();
    c.bench_function("thermodynamic_integration 16x32x2000", |b| {
        b.iter(|| thermodynamic_integration(black_box(&betas), N_WALKERS, black_box(&series)))
    });
    c.bench_function("stepping_stone 16x32x2000", |b| {
        b.iter(|| stepping_stone(black_box(&betas), N_WALKERS, black_box(&series)))
    });
    c.bench_function("window_probabilities 12 windows", |b| {
        let ln_z: Vec<f64> = (0..12).map(|k| -(k as f64)).collect();
        let err = vec![0.05; 12];
        let mass = vec![1.0 / 12.0; 12];
        b.iter(|| window_probabilities(black_box(&ln_z), &err, &mass))
    });
    let cold = &series[0];
    let mut estimator = AutocorrEstimator::new();
    c.bench_function(
        "autocorr_time 32 walkers x 2000 steps (reused estimator)",
        |b| b.iter(|| estimator.estimate(black_box(cold), N_STEPS, N_WALKERS)),
    );
    let mut workspace = DiagnosticsWorkspace::new();
    c.bench_function("diagnose 1 parameter, 32 walkers x 2000 steps", |b| {
        b.iter(|| workspace.diagnose(black_box(cold), N_STEPS, N_WALKERS, 1))
    });
}

criterion_group!(evidence_benches, benches);
criterion_main!(evidence_benches);
