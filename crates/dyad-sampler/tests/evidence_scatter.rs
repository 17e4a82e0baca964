//! The quoted evidence errors against the scatter of the estimates over
//! seeds, on a posterior much narrower than its prior (the situation of a
//! sparse orbit with a sampled jitter: at beta = 0 the log-likelihood is
//! hundreds of thousands below its maximum, so the integrand of
//! thermodynamic integration spans many decades).
//!
//! Gaussian likelihood of width 0.05 under a Gaussian prior of width 30 in
//! each of 3 dimensions; ln Z = sum_i ln N(y_i; m_i, s_i^2 + sigma_i^2)
//! (analytic, normal-normal conjugacy; e.g. Bishop 2006, "Pattern
//! Recognition and Machine Learning", eq. 2.115).

use dyad_sampler::evidence::estimate_evidence;
use dyad_sampler::{run, FnDensity, MemorySink, RunConfig, RunControl, Start, TemperingConfig};

const LN_2PI: f64 = 1.837_877_066_409_345_5;
const DIM: usize = 3;
const PRIOR_SD: f64 = 30.0;
const NOISE_SD: f64 = 0.05;

fn ln_normal(x: f64, m: f64, v: f64) -> f64 {
    -0.5 * (LN_2PI + v.ln()) - 0.5 * (x - m) * (x - m) / v
}

fn data(i: usize) -> f64 {
    1.0 + 0.3 * i as f64
}

/// (ln Z, error) of thermodynamic integration and of stepping stone.
fn estimates(seed: u64) -> [(f64, f64); 2] {
    let density = FnDensity::new(
        DIM,
        |x: &[f64]| {
            x.iter()
                .map(|&v| ln_normal(v, 0.0, PRIOR_SD * PRIOR_SD))
                .sum()
        },
        |x: &[f64]| {
            x.iter()
                .enumerate()
                .map(|(i, &v)| ln_normal(data(i), v, NOISE_SD * NOISE_SD))
                .sum()
        },
    );
    let nw = 16;
    let mut config = RunConfig::new(nw, seed, 3000);
    config.convergence = None;
    config.parallel = false;
    config.tempering = Some(TemperingConfig {
        n_temperatures: 12,
        burn_in_steps: 1000,
        ..Default::default()
    });
    let start = Start::Ball {
        centre: (0..DIM).map(data).collect(),
        scale: vec![0.05; DIM],
    };
    let mut sink = MemorySink::for_samples(DIM, nw);
    let result = run(&density, &config, &start, &mut sink, RunControl::default()).unwrap();
    let e = estimate_evidence(result.tempered.as_ref().unwrap()).unwrap();
    [
        (
            e.thermodynamic_integration.ln_z,
            e.thermodynamic_integration.total_error(),
        ),
        (e.stepping_stone.ln_z, e.stepping_stone.total_error()),
    ]
}

#[test]
fn quoted_errors_match_the_scatter_over_seeds() {
    let truth: f64 = (0..DIM)
        .map(|i| ln_normal(data(i), 0.0, PRIOR_SD * PRIOR_SD + NOISE_SD * NOISE_SD))
        .sum();
    let runs: Vec<[(f64, f64); 2]> = (1..=20).map(estimates).collect();
    for (m, name) in ["thermodynamic integration", "stepping stone"]
        .iter()
        .enumerate()
    {
        let z: Vec<f64> = runs.iter().map(|r| r[m].0).collect();
        let n = z.len() as f64;
        let mean = z.iter().sum::<f64>() / n;
        let scatter = (z.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
        let quoted = runs.iter().map(|r| r[m].1).sum::<f64>() / n;
        assert!(
            quoted < 3.0 * scatter && quoted > scatter / 3.0,
            "{name}: quoted error {quoted} vs scatter {scatter} over 20 seeds"
        );
        // The estimates agree with the analytic value within their errors.
        let miss = (mean - truth).abs();
        assert!(
            miss < 4.0 * quoted.max(scatter / n.sqrt()),
            "{name}: mean {mean} vs analytic {truth}"
        );
    }
}
