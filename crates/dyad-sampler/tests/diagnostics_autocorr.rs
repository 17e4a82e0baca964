//! Integrated autocorrelation time on AR(1) chains.
//!
//! For x_t = phi x_{t-1} + e_t the autocorrelation is rho(t) = phi^|t|, so the
//! integrated time is tau = 1 + 2 sum_{t>=1} phi^t = (1 + phi) / (1 - phi)
//! (analytic; common practice, e.g. Sokal 1997, "Monte Carlo methods in
//! statistical mechanics", sect. 3).
//!
//! Tolerance: Sokal's large-sample variance of the windowed estimator,
//! var(tau_hat) ~= 2 (2M + 1) / N tau^2 (Sokal 1997, eq. 3.19, after Madras &
//! Sokal 1988), with N the number of draws over all (independent) walkers and
//! M the window; we allow 4.5 standard deviations plus the known negative bias
//! of order tau (2M + 1) / n_steps from subtracting each walker's own mean.
//! The chains are seeded, so the outcome is fixed.

use dyad_sampler::diagnostics::{
    autocorr_time, ess_bulk, integrated_autocorr_time, AutocorrEstimator, DiagnosticsWorkspace,
    MIN_STEPS_PER_TAU, SOKAL_WINDOW_FACTOR,
};
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;

/// Step-major AR(1) draws with unit stationary variance, started stationary.
fn ar1(phi: f64, n_steps: usize, n_walkers: usize, seed: u64) -> Vec<f64> {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let innovation_sd = (1.0 - phi * phi).sqrt();
    let mut state: Vec<f64> = (0..n_walkers)
        .map(|_| StandardNormal.sample(&mut rng))
        .collect();
    let mut draws = Vec::with_capacity(n_steps * n_walkers);
    draws.extend_from_slice(&state);
    for _ in 1..n_steps {
        for x in state.iter_mut() {
            let e: f64 = StandardNormal.sample(&mut rng);
            *x = phi * *x + innovation_sd * e;
        }
        draws.extend_from_slice(&state);
    }
    draws
}

fn check_ar1(phi: f64, seed: u64) {
    let (n_steps, n_walkers) = (100_000, 32);
    let draws = ar1(phi, n_steps, n_walkers, seed);
    let expected = (1.0 + phi) / (1.0 - phi);
    let got = autocorr_time(&draws, n_steps, n_walkers).expect("valid shape");
    assert!(got.window_found);
    let m = got.window as f64;
    let n_total = (n_steps * n_walkers) as f64;
    let sigma = (2.0 * (2.0 * m + 1.0) / n_total).sqrt() * expected;
    let bias = expected * (2.0 * m + 1.0) / n_steps as f64;
    let tolerance = 4.5 * sigma + bias;
    assert!(
        (got.tau - expected).abs() < tolerance,
        "phi {phi}: tau {} vs analytic {expected}, tolerance {tolerance}",
        got.tau
    );
    // Also within a few per cent, as the estimator is meant to be.
    assert!((got.tau / expected - 1.0).abs() < 0.05);
    // Sokal's rule: the window is the first lag with M >= c tau(M).
    assert!(m >= SOKAL_WINDOW_FACTOR * got.tau);
    assert!(got.long_enough);
    assert_eq!(
        integrated_autocorr_time(&draws, n_steps, n_walkers),
        got.tau
    );
}

#[test]
fn white_noise_has_tau_one() {
    check_ar1(0.0, 11);
}

#[test]
fn ar1_half_has_tau_three() {
    check_ar1(0.5, 12);
}

#[test]
fn ar1_point_nine_has_tau_nineteen() {
    check_ar1(0.9, 13);
}

#[test]
fn reused_estimator_matches_fresh_estimates_as_the_chain_grows() {
    // The sampler calls the estimator on a growing chain; cached FFT plans
    // and buffers must not leak between calls of different length.
    let (n_steps, n_walkers) = (3000, 10);
    let draws = ar1(0.7, n_steps, n_walkers, 5);
    let mut estimator = AutocorrEstimator::new();
    for steps in [200, 700, 1500, 3000, 1000] {
        let part = &draws[..steps * n_walkers];
        let reused = estimator.estimate(part, steps, n_walkers).expect("valid");
        let fresh = autocorr_time(part, steps, n_walkers).expect("valid");
        assert_eq!(reused, fresh);
    }
}

#[test]
fn short_chain_is_not_long_enough() {
    // 200 steps of tau ~ 19 is about 10 tau, far below 50 tau.
    let draws = ar1(0.9, 200, 16, 3);
    let got = autocorr_time(&draws, 200, 16).expect("valid");
    assert!((200.0) < MIN_STEPS_PER_TAU * got.tau);
    assert!(!got.long_enough);
}

#[test]
fn odd_walker_count_matches_even_packing() {
    // Walkers are FFT'd in pairs (real and imaginary parts) and an odd count
    // leaves one alone; the mean autocorrelation must not depend on that:
    // five identical walkers give exactly the single walker's estimate.
    let single = ar1(0.6, 2000, 1, 9);
    let mut copies = Vec::with_capacity(5 * 2000);
    for &x in &single {
        for _ in 0..5 {
            copies.push(x);
        }
    }
    let one = autocorr_time(&single, 2000, 1).expect("valid");
    let five = autocorr_time(&copies, 2000, 5).expect("valid");
    assert!((one.tau - five.tau).abs() < 1e-12 * one.tau);
    assert_eq!(one.window, five.window);
}

#[test]
fn bulk_ess_of_ar1_is_n_over_tau() {
    // For a Gaussian AR(1) the rank normalisation is nearly the identity, so
    // bulk ESS ~= N / tau with tau = (1 + phi) / (1 - phi) (Vehtari et al.
    // 2021, sect. 3; analytic tau). Geyer's estimator has a few per cent
    // relative error here; 15 per cent is ~4 sigma.
    let (n_steps, n_walkers, phi) = (5000, 16, 0.5);
    let draws = ar1(phi, n_steps, n_walkers, 21);
    let expected = (n_steps * n_walkers) as f64 * (1.0 - phi) / (1.0 + phi);
    let got = ess_bulk(&draws, n_steps, n_walkers);
    assert!(
        (got / expected - 1.0).abs() < 0.15,
        "ess_bulk {got} vs {expected}"
    );
    let d = DiagnosticsWorkspace::new()
        .diagnose(&draws, n_steps, n_walkers, 1)
        .expect("valid");
    assert!(d.max_rhat() < 1.01);
    assert!((d.parameters[0].tau - 3.0).abs() < 0.3);
}
