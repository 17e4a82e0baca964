//! The stopping rule on synthetic chains whose effective draws are known.
//!
//! For a Gaussian AR(1) chain x_t = phi x_{t-1} + e_t the integrated
//! autocorrelation time is tau = (1 + phi) / (1 - phi), so N draws hold
//! N (1 - phi) / (1 + phi) effective draws (analytic; common practice, e.g.
//! Sokal 1997, "Monte Carlo methods in statistical mechanics", sect. 3).
//! The rule must refuse a chain whose analytic count is clearly below its
//! threshold and accept one clearly above; the margins (a factor 1.5 either
//! way) are several times the estimator's scatter (a few per cent for bulk
//! draws on chains this long; Vehtari et al. 2021 sect. 3). Seeded, fixed.

use dyad_sampler::diagnostics::DiagnosticsWorkspace;
use dyad_sampler::{Convergence, ConvergenceCheck, WatchedDiagnostics, WatchedSeries};
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;

/// `n_walkers` independent stationary AR(1) chains, step-major.
fn ar1(phi: f64, n_steps: usize, n_walkers: usize, seed: u64) -> Vec<f64> {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let innovation_sd = (1.0 - phi * phi).sqrt();
    let mut state: Vec<f64> = (0..n_walkers)
        .map(|_| StandardNormal.sample(&mut rng))
        .collect();
    let mut draws = Vec::with_capacity(n_steps * n_walkers);
    for _ in 0..n_steps {
        draws.extend_from_slice(&state);
        for x in state.iter_mut() {
            let e: f64 = StandardNormal.sample(&mut rng);
            *x = phi * *x + innovation_sd * e;
        }
    }
    draws
}

fn analytic_effective_draws(phi: f64, n_steps: usize, n_walkers: usize) -> f64 {
    (n_steps * n_walkers) as f64 * (1.0 - phi) / (1.0 + phi)
}

/// Checks two parameters: a fast AR(1) and a slow one (the slow one decides).
fn check(n_steps: usize, seed: u64) -> ConvergenceCheck {
    let n_walkers = 32;
    let fast = ar1(0.3, n_steps, n_walkers, seed);
    let slow = ar1(0.95, n_steps, n_walkers, seed + 1);
    let params = [fast, slow];
    ConvergenceCheck::measure(
        n_steps as u64,
        n_steps as u64,
        (n_steps, n_walkers, 2),
        |p| params[p].as_slice(),
        &mut DiagnosticsWorkspace::new(),
    )
}

#[test]
fn stops_once_the_slowest_parameter_has_enough_effective_draws_and_not_before() {
    let rule = Convergence {
        min_effective_draws: 2000.0,
        max_split_rhat: 1.05,
        min_check_interval: 1,
        ..Convergence::default()
    };
    let (phi, n_walkers) = (0.95, 32);
    // Steps at which the slow parameter has exactly the asked-for count.
    let exact = rule.min_effective_draws * (1.0 + phi) / ((1.0 - phi) * n_walkers as f64);
    let early = (exact / 1.5) as usize;
    let late = (exact * 1.5) as usize;
    for seed in [1, 7, 19] {
        let before = check(early, seed);
        assert!(
            !before.met(&rule),
            "seed {seed}: met at {early} steps ({:.0} analytic draws): {before:?}",
            analytic_effective_draws(phi, early, n_walkers)
        );
        let after = check(late, seed);
        assert!(
            after.met(&rule),
            "seed {seed}: not met at {late} steps ({:.0} analytic draws): {after:?}",
            analytic_effective_draws(phi, late, n_walkers)
        );
        // The bulk count is the slow chain's analytic one (15 % is some 4
        // standard errors of Geyer's estimator here).
        let want = analytic_effective_draws(phi, late, n_walkers);
        assert!(
            (after.fewest_bulk / want - 1.0).abs() < 0.15,
            "seed {seed}: bulk {} vs analytic {want}",
            after.fewest_bulk
        );
        // The projection of the steps still needed lands near the exact count.
        let needed = before.steps_needed(&rule, 0, None).expect("a rate") as f64 / 2.0;
        assert!(
            (needed / exact - 1.0).abs() < 0.3,
            "seed {seed}: projected {needed} vs exact {exact}"
        );
    }
}

#[test]
fn walkers_that_disagree_fail_the_rule() {
    // Half the walkers sit 1 sd away from the others, each half white
    // noise: 64 000 draws that would be independent within a walker, but
    // split R-hat far above its bound (Vehtari et al. 2021 sect. 4: R-hat
    // detects chains that have not mixed).
    let (n_steps, n_walkers) = (2000, 32);
    let mut draws = ar1(0.0, n_steps, n_walkers, 3);
    for (i, x) in draws.iter_mut().enumerate() {
        if i % n_walkers < n_walkers / 2 {
            *x += 1.0;
        }
    }
    let got = ConvergenceCheck::measure(
        n_steps as u64,
        n_steps as u64,
        (n_steps, n_walkers, 1),
        |_| draws.as_slice(),
        &mut DiagnosticsWorkspace::new(),
    );
    let rule = Convergence::default();
    assert!(got.largest_rhat > 1.1, "{got:?}");
    assert!(!got.met(&rule));
}

#[test]
fn a_parameter_that_never_moves_never_converges() {
    let (n_steps, n_walkers) = (500, 16);
    let stuck = vec![1.0; n_steps * n_walkers];
    let got = ConvergenceCheck::measure(
        n_steps as u64,
        n_steps as u64,
        (n_steps, n_walkers, 1),
        |_| stuck.as_slice(),
        &mut DiagnosticsWorkspace::new(),
    );
    assert!(!got.met(&Convergence::default()), "{got:?}");
}

/// Indicators of `n_walkers` walkers over `n_steps` steps, step-major: at
/// each step every walker is in "the mode" with probability `p_t`, on its
/// own (so each walker hops in and out all the time), where `p_t` is
/// `share + drift_sd * a_t` with `a_t` a unit-variance AR(1) of coefficient
/// `phi`: the walkers' share drifts as a whole.
fn drifting_indicators(
    (share, drift_sd, phi): (f64, f64, f64),
    n_steps: usize,
    n_walkers: usize,
    seed: u64,
) -> WatchedSeries {
    use rand::Rng;
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let drift = ar1(phi, n_steps, 1, seed + 7);
    let mut values = Vec::with_capacity(n_steps * n_walkers);
    for a in drift {
        let p = (share + drift_sd * a).clamp(0.0, 1.0);
        values.extend((0..n_walkers).map(|_| f64::from(u8::from(rng.gen::<f64>() < p))));
    }
    WatchedSeries {
        name: "share of draws in the mode".into(),
        values,
    }
}

#[test]
fn a_share_that_drifts_as_a_whole_is_not_settled_however_often_walkers_hop() {
    // The share wanders with an autocorrelation time of (1 + 0.995) /
    // (1 - 0.995) = 399 steps (AR(1), analytic); 4000 steps are only 10 of
    // them. Walker by walker everything looks excellent, which is why the
    // rule judges the ensemble-mean series instead.
    let (n_steps, n_walkers) = (4000, 32);
    let series = drifting_indicators((0.3, 0.1, 0.995), n_steps, n_walkers, 11);
    let d = WatchedDiagnostics::measure(
        &series,
        (n_steps, n_walkers, 1),
        &mut DiagnosticsWorkspace::new(),
    );
    assert!(
        d.effective_draws_bulk > 1000.0 && d.split_rhat < 1.03,
        "{d:?}"
    );
    assert!(!d.long_enough, "{d:?}");
    let rule = Convergence::default();
    assert!(!d.settled(rule.max_watched_error, rule.max_split_rhat));

    // 100 autocorrelation times: the error is believed, and it is the
    // analytic one, sqrt((var_drift * tau_drift + p (1 - p) / walkers) / T)
    // = sqrt((0.01 * 399 + 0.21 / 32) / 40 000) = 0.0100, to Sokal's
    // estimator's scatter (about 20 % at this length).
    let n_steps = 40_000;
    let series = drifting_indicators((0.3, 0.1, 0.995), n_steps, n_walkers, 12);
    let d = WatchedDiagnostics::measure(
        &series,
        (n_steps, n_walkers, 1),
        &mut DiagnosticsWorkspace::new(),
    );
    let analytic = ((0.01 * 399.0 + 0.21 / 32.0) / n_steps as f64).sqrt();
    assert!(d.long_enough, "{d:?}");
    assert!(
        (d.standard_error / analytic - 1.0).abs() < 0.35,
        "{} vs {analytic}",
        d.standard_error
    );
}

#[test]
fn independent_indicators_settle_with_the_binomial_error() {
    // No drift: each draw is in the mode with probability 0.3 on its own,
    // so the error of the share is sqrt(p (1 - p) / N) (binomial; common
    // practice) = 0.00128 for N = 128 000 draws.
    let (n_steps, n_walkers) = (4000, 32);
    let series = drifting_indicators((0.3, 0.0, 0.0), n_steps, n_walkers, 13);
    let d = WatchedDiagnostics::measure(
        &series,
        (n_steps, n_walkers, 1),
        &mut DiagnosticsWorkspace::new(),
    );
    let binomial = (0.3 * 0.7 / (n_steps * n_walkers) as f64).sqrt();
    assert!(d.long_enough, "{d:?}");
    assert!(
        (d.standard_error / binomial - 1.0).abs() < 0.15,
        "{d:?} vs {binomial}"
    );
    assert!((d.mean - 0.3).abs() < 4.0 * binomial);
    let rule = Convergence::default();
    assert!(d.settled(rule.max_watched_error, rule.max_split_rhat));
}

#[test]
fn a_share_that_slides_steadily_fails_the_drift_test() {
    // Every walker on its own, but the share slides linearly from 0.30 to
    // 0.26 over the span: within any short stretch the draws look
    // independent (long enough, error 0.0015), yet the first tenth's share
    // (0.298) and the last half's (0.270) differ by about 5 standard errors
    // of the difference, sqrt(0.0067 * 1.4 * (1/400 + 1/2000)) = 0.0053
    // (Geweke 1992; variance of the share 0.21 / 32 + 0.04^2 / 12).
    use rand::Rng;
    let (n_steps, n_walkers) = (4000, 32);
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(21);
    let mut values = Vec::with_capacity(n_steps * n_walkers);
    for t in 0..n_steps {
        let p = 0.30 - 0.04 * t as f64 / n_steps as f64;
        values.extend((0..n_walkers).map(|_| f64::from(u8::from(rng.gen::<f64>() < p))));
    }
    let series = WatchedSeries {
        name: "sliding share".into(),
        values,
    };
    let d = WatchedDiagnostics::measure(
        &series,
        (n_steps, n_walkers, 1),
        &mut DiagnosticsWorkspace::new(),
    );
    let rule = Convergence::default();
    assert!(
        d.long_enough && d.standard_error < rule.max_watched_error,
        "{d:?}"
    );
    assert!(d.drift_z > 3.0, "{d:?}");
    assert!(!d.settled(rule.max_watched_error, rule.max_split_rhat));
}

#[test]
fn steps_left_follow_the_burn_in_of_a_tempered_run() {
    // Half the effective draws asked for, over a kept span of 1 000 steps:
    // the kept span must double to 2 000. After a ladder's freeze at step
    // 10 000 with a burn-in share of one half, the burn-in is the freeze
    // until the share overtakes it, so the kept span grows step for step:
    // 12 000 steps. Without a share (the first half of the history is
    // burn-in) the history must grow by twice the span: 14 000. Arithmetic
    // of the burn-in rules (RunConfig::burn_in_fraction).
    let check = ConvergenceCheck {
        step: 11_000,
        span: 1_000,
        fewest_bulk: 500.0,
        fewest_tail: 800.0,
        largest_rhat: 1.01,
        watched: None,
    };
    let rule = Convergence::default();
    assert_eq!(check.steps_needed(&rule, 10_000, Some(0.5)), Some(12_000));
    assert_eq!(check.steps_needed(&rule, 10_000, None), Some(14_000));
    // Untempered (history from step 0), share one half: twice the span.
    assert_eq!(check.steps_needed(&rule, 0, Some(0.5)), Some(4_000));
}
