//! The burn-in is exactly the configured share of the steps done, whether
//! the run converged or hit the step cap, or the ladder's adaptation when a
//! tempered run stops before the share covers it; and walkers started around
//! a mode on a prior bound start inside the support.

use dyad_sampler::{
    run, FnDensity, MemorySink, RunConfig, RunControl, RunStatus, Start, TemperingConfig,
};

/// A standard normal in x[0] and a half-normal in x[1] >= 0 (a bound at 0,
/// like a jitter floor).
fn bounded() -> impl dyad_sampler::LogDensity {
    FnDensity::new(
        2,
        |x: &[f64]| if x[1] >= 0.0 { 0.0 } else { f64::NEG_INFINITY },
        |x: &[f64]| -0.5 * (x[0] * x[0] + x[1] * x[1]),
    )
}

fn run_with(
    fraction: f64,
    max_steps: u64,
    temperatures: usize,
    seed: u64,
) -> (u64, u64, RunStatus) {
    let nw = 8;
    let mut config = RunConfig::new(nw, seed, max_steps);
    config.burn_in_fraction = Some(fraction);
    config.parallel = false;
    if temperatures > 1 {
        config.tempering = Some(TemperingConfig {
            n_temperatures: temperatures,
            burn_in_steps: (fraction * max_steps as f64).round() as u64,
            ..Default::default()
        });
    }
    // Both centres sit on the bound x[1] = 0: half of all unconstrained
    // draws around them fall outside the support.
    let start = Start::Balls {
        centres: vec![vec![-1.0, 0.0], vec![1.0, 0.0]],
        scales: vec![vec![0.5, 0.5]; 2],
    };
    let mut sink = MemorySink::for_samples(2, nw);
    let result = run(
        &bounded(),
        &config,
        &start,
        &mut sink,
        RunControl::default(),
    )
    .unwrap();
    (result.burn_in, result.steps, result.status)
}

#[test]
fn burn_in_is_the_configured_share_of_the_steps() {
    let mut statuses = Vec::new();
    for (fraction, max_steps, temps) in [
        (0.5, 40_000, 1),
        (0.2, 40_000, 1),
        (0.3, 500, 1),
        (0.25, 3000, 4),
        (0.5, 3000, 4),
    ] {
        for seed in 1..=3 {
            let (burn_in, steps, status) = run_with(fraction, max_steps, temps, seed);
            // The ladder adapts for the share of max_steps.
            let adaptation = if temps > 1 {
                (fraction * max_steps as f64).round() as u64
            } else {
                0
            };
            let expected = ((fraction * steps as f64).round() as u64).max(adaptation);
            assert_eq!(
                burn_in, expected,
                "fraction {fraction}, {steps} steps ({status:?}), {temps} temperatures"
            );
            statuses.push((temps > 1, status));
        }
    }
    // Both ways of ending are covered, and a tempered run can stop on the
    // rule before its cap (it never could while the burn-in had to be the
    // share of the steps done and the ladder adapted for the share of the
    // cap).
    for ending in [RunStatus::Converged, RunStatus::StepCap] {
        assert!(statuses.contains(&(false, ending)), "{statuses:?}");
    }
    assert!(
        statuses.contains(&(true, RunStatus::Converged)),
        "{statuses:?}"
    );
}
