//! Parallel tempering on a bimodal target with known mode weights.

use dyad_sampler::diagnostics::integrated_autocorr_time;
use dyad_sampler::{run, FnDensity, MemorySink, RunConfig, RunControl, Start, TemperingConfig};

/// Mixture 0.2 N((-4,-4), 0.5^2 I) + 0.8 N((4,4), 0.5^2 I) under a uniform
/// prior on [-10, 10]^2. The modes are 16 standard deviations apart, so an
/// untempered ensemble started in one mode never visits the other; tempered,
/// the cold chain must put weight 0.2 on the first mode (analytic), within
/// 4 Monte-Carlo standard errors from the autocorrelation time of the mode
/// indicator (common practice).
fn mixture() -> impl dyad_sampler::LogDensity {
    let log_prior = |x: &[f64]| {
        if x.iter().all(|v| (-10.0..=10.0).contains(v)) {
            -(400.0f64).ln()
        } else {
            f64::NEG_INFINITY
        }
    };
    let log_like = |x: &[f64]| {
        let s2 = 0.25;
        let q = |m: f64| ((x[0] - m).powi(2) + (x[1] - m).powi(2)) / (2.0 * s2);
        let norm = -(2.0 * std::f64::consts::PI * s2).ln();
        let a = (0.2f64).ln() + norm - q(-4.0);
        let b = (0.8f64).ln() + norm - q(4.0);
        let m = a.max(b);
        m + ((a - m).exp() + (b - m).exp()).ln()
    };
    FnDensity::new(2, log_prior, log_like)
}

fn start() -> Start<'static> {
    // Every walker starts in the minor mode.
    Start::Ball {
        centre: vec![-4.0, -4.0],
        scale: vec![0.3, 0.3],
    }
}

#[test]
fn tempered_cold_chain_recovers_mode_weights() {
    let nw = 16;
    let mut config = RunConfig::new(nw, 31, 6000);
    config.convergence = None;
    config.thin = 2;
    config.tempering = Some(TemperingConfig {
        n_temperatures: 6,
        burn_in_steps: 1500,
        ..Default::default()
    });
    let mut sink = MemorySink::for_samples(2, nw);
    let result = run(
        &mixture(),
        &config,
        &start(),
        &mut sink,
        RunControl::default(),
    )
    .unwrap();

    let tempered = result.tempered.as_ref().unwrap();
    assert_eq!(tempered.betas.len(), 6);
    assert_eq!(tempered.betas[0], 1.0);
    assert_eq!(*tempered.betas.last().unwrap(), 0.0);
    assert!(
        tempered.betas.windows(2).all(|w| w[0] > w[1]),
        "{:?}",
        tempered.betas
    );
    assert_eq!(tempered.n_walkers, nw);
    // Recorded from the freeze at step 1500 on (inclusive), every 2nd step.
    let n_rec = (6000 - 1500) / 2 + 1;
    for ll in &tempered.log_likelihoods {
        assert_eq!(ll.len(), n_rec * nw);
    }
    assert!(
        result.swap_acceptance.iter().all(|a| *a > 0.05),
        "{:?}",
        result.swap_acceptance
    );

    let table = sink.table();
    let first = table.first_after(1500);
    let n_steps = table.len() - first;
    let ind: Vec<f64> = table
        .column(0, first)
        .iter()
        .map(|&x| if x < 0.0 { 1.0 } else { 0.0 })
        .collect();
    let frac = ind.iter().sum::<f64>() / ind.len() as f64;
    // The walkers of an ensemble are not independent (swaps and moves tie
    // them together), so the error comes from the series of ensemble
    // means, one value per recorded step, and its own autocorrelation
    // time (common practice: batch the correlated units together).
    // Per-walker chains gave 0.003 here, far too small: seeds 31-40 give
    // weights of 0.199 +- 0.012 (scatter), this estimate 0.006-0.010.
    let means: Vec<f64> = ind
        .chunks_exact(nw)
        .map(|step| step.iter().sum::<f64>() / nw as f64)
        .collect();
    let tau = integrated_autocorr_time(&means, n_steps, 1);
    let var = means.iter().map(|m| (m - frac).powi(2)).sum::<f64>() / n_steps as f64;
    let se = (var * tau / n_steps as f64).sqrt();
    assert!(
        (frac - 0.2).abs() < 4.0 * se,
        "minor-mode weight {frac}, expected 0.2 +- {se} (tau {tau} records)"
    );
    // Hottest rung samples the prior: mean log-likelihood there is far below the cold one.
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    assert!(mean(&tempered.log_likelihoods[5]) < mean(&tempered.log_likelihoods[0]) - 10.0);
}

#[test]
fn untempered_ensemble_stays_in_its_mode() {
    // The control experiment: without tempering no walker reaches the major mode.
    let nw = 16;
    let mut config = RunConfig::new(nw, 31, 3000);
    config.convergence = None;
    let mut sink = MemorySink::for_samples(2, nw);
    run(
        &mixture(),
        &config,
        &start(),
        &mut sink,
        RunControl::default(),
    )
    .unwrap();
    assert!(sink.table().column(0, 0).iter().all(|&x| x < 0.0));
}

#[test]
fn adaptive_ladder_evens_out_swap_acceptance() {
    // Vousden et al. (2016, sect. 3) aim the adaptation at equal swap
    // acceptance between all neighbouring pairs; starting from a poor
    // geometric ladder the spread of acceptance must shrink.
    let nw = 16;
    let base = |adapt: bool| {
        let mut config = RunConfig::new(nw, 5, 4000);
        config.convergence = None;
        config.thin = 10;
        config.tempering = Some(TemperingConfig {
            n_temperatures: 5,
            max_temperature: 1e4,
            adapt,
            burn_in_steps: 2000,
            adaptation_lag: 1000.0,
            adaptation_time: 20.0,
        });
        let mut sink = MemorySink::for_samples(2, nw);
        run(
            &mixture(),
            &config,
            &start(),
            &mut sink,
            RunControl::default(),
        )
        .unwrap()
    };
    let spread = |a: &[f64]| {
        a.iter().cloned().fold(f64::MIN, f64::max) - a.iter().cloned().fold(f64::MAX, f64::min)
    };
    let fixed = base(false);
    let adapted = base(true);
    assert!((fixed.betas[4] / 1e-4 - 1.0).abs() < 1e-12);
    assert_eq!(adapted.betas[4], fixed.betas[4], "hottest rung stays fixed");
    assert_eq!(adapted.betas[0], 1.0, "coldest rung stays fixed");
    assert!(
        spread(&adapted.swap_acceptance) < spread(&fixed.swap_acceptance),
        "adapted {:?} vs fixed {:?}",
        adapted.swap_acceptance,
        fixed.swap_acceptance
    );
}
