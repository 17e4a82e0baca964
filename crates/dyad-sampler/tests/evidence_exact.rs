//! Evidence estimators on exact draws from tempered Gaussian posteriors (no
//! MCMC), against the analytic evidence.
//!
//! Model, per coordinate i: prior x_i ~ N(mu_i, s_i^2), likelihood
//! L(x) = prod_i N(y_i; x_i, sigma_i^2). The tempered posterior
//! prior * L^beta is Gaussian with precision 1/s^2 + beta/sigma^2 and mean
//! (mu/s^2 + beta y/sigma^2) / precision, so it can be sampled exactly at
//! every rung. The evidence is
//! ln Z = sum_i ln N(y_i; mu_i, s_i^2 + sigma_i^2)
//! (analytic: normal-normal conjugacy, e.g. Bishop 2006, "Pattern Recognition
//! and Machine Learning", eq. 2.115).
//!
//! Tolerances: within 0.1 nat, and within 4 quoted standard errors (the
//! discretisation bound and the batch-means Monte-Carlo error added in
//! quadrature). All draws are seeded.

use dyad_sampler::evidence::{
    estimate_evidence, stepping_stone, thermodynamic_integration, window_probabilities,
    EvidenceMethod,
};
use dyad_sampler::tempering::TemperedLogLikelihoods;
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;
use statrs::distribution::{ContinuousCDF, Normal};

struct Gaussian {
    prior_mean: Vec<f64>,
    prior_sd: Vec<f64>,
    data: Vec<f64>,
    noise_sd: Vec<f64>,
}

impl Gaussian {
    /// A d-dimensional case with a prior several times wider than the
    /// likelihood and data offset from the prior mean.
    fn new(d: usize) -> Self {
        let t = |i: usize| i as f64 / (d.max(2) - 1) as f64;
        Self {
            prior_mean: (0..d).map(|i| -0.5 + t(i)).collect(),
            prior_sd: (0..d).map(|i| 4.0 + 2.0 * t(i)).collect(),
            data: (0..d).map(|i| 1.0 + t(i)).collect(),
            noise_sd: (0..d).map(|i| 0.6 + 0.8 * t(i)).collect(),
        }
    }

    fn analytic_ln_z(&self) -> f64 {
        (0..self.data.len())
            .map(|i| {
                let var = self.prior_sd[i].powi(2) + self.noise_sd[i].powi(2);
                let r = self.data[i] - self.prior_mean[i];
                -0.5 * (2.0 * std::f64::consts::PI * var).ln() - 0.5 * r * r / var
            })
            .sum()
    }

    fn ln_likelihood(&self, x: &[f64]) -> f64 {
        x.iter()
            .enumerate()
            .map(|(i, xi)| {
                let s = self.noise_sd[i];
                let r = (xi - self.data[i]) / s;
                -0.5 * (2.0 * std::f64::consts::PI * s * s).ln() - 0.5 * r * r
            })
            .sum()
    }

    /// Exact draws of ln L at each rung, step-major.
    fn tempered(
        &self,
        betas: &[f64],
        n_steps: usize,
        n_walkers: usize,
        seed: u64,
    ) -> TemperedLogLikelihoods {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
        let d = self.data.len();
        let mut x = vec![0.0; d];
        let log_likelihoods = betas
            .iter()
            .map(|&beta| {
                let (mean, sd): (Vec<f64>, Vec<f64>) = (0..d)
                    .map(|i| {
                        let prec = self.prior_sd[i].powi(-2) + beta * self.noise_sd[i].powi(-2);
                        let m = (self.prior_mean[i] * self.prior_sd[i].powi(-2)
                            + beta * self.data[i] * self.noise_sd[i].powi(-2))
                            / prec;
                        (m, prec.powf(-0.5))
                    })
                    .unzip();
                (0..n_steps * n_walkers)
                    .map(|_| {
                        for i in 0..d {
                            let z: f64 = StandardNormal.sample(&mut rng);
                            x[i] = mean[i] + sd[i] * z;
                        }
                        self.ln_likelihood(&x)
                    })
                    .collect()
            })
            .collect();
        TemperedLogLikelihoods {
            betas: betas.to_vec(),
            n_walkers,
            log_likelihoods,
        }
    }
}

/// `n - 1` rungs geometric from 1 down to `hottest`, then 0.
fn ladder(n: usize, hottest: f64) -> Vec<f64> {
    let ratio = hottest.powf(1.0 / (n - 2) as f64);
    (0..n - 1)
        .map(|k| ratio.powi(k as i32))
        .chain(std::iter::once(0.0))
        .collect()
}

fn check_dimension(d: usize, seed: u64) {
    let model = Gaussian::new(d);
    let truth = model.analytic_ln_z();
    let betas = ladder(20, 1e-6);
    let tempered = model.tempered(&betas, 250, 32, seed);
    let both = estimate_evidence(&tempered).expect("valid ladder");
    for est in [both.thermodynamic_integration, both.stepping_stone] {
        let miss = (est.ln_z - truth).abs();
        assert!(
            miss < 0.1 && miss < 4.0 * est.total_error(),
            "d = {d}, {:?}: ln Z {} vs analytic {truth}, mc {} disc {:?}",
            est.method,
            est.ln_z,
            est.mc_error,
            est.discretisation_error
        );
        assert!(est.mc_error_reliable);
        // The quoted errors are informative, not huge.
        assert!(
            est.total_error() < 0.1,
            "{:?} error {}",
            est.method,
            est.total_error()
        );
    }
    assert_eq!(
        both.thermodynamic_integration.method,
        EvidenceMethod::ThermodynamicIntegration
    );
    assert!(both.stepping_stone.discretisation_error.is_none());
}

#[test]
fn gaussian_evidence_in_2_dimensions() {
    check_dimension(2, 101);
}

#[test]
fn gaussian_evidence_in_5_dimensions() {
    check_dimension(5, 102);
}

#[test]
fn gaussian_evidence_in_10_dimensions() {
    check_dimension(10, 103);
}

#[test]
fn quoted_monte_carlo_errors_match_the_scatter_of_replicates() {
    // 40 independent replicates with few draws: the standard deviation of
    // the estimates must match the mean quoted Monte-Carlo error. With 40
    // replicates the sample sd has ~11 per cent relative error, so a factor
    // range [0.6, 1.5] is beyond 4 sigma (common practice).
    let model = Gaussian::new(3);
    let betas = ladder(16, 1e-5);
    let n_rep = 40;
    let mut ti = Vec::new();
    let mut ss = Vec::new();
    for rep in 0..n_rep {
        let tempered = model.tempered(&betas, 64, 8, 1000 + rep);
        let t = thermodynamic_integration(&betas, 8, &tempered.log_likelihoods).unwrap();
        let s = stepping_stone(&betas, 8, &tempered.log_likelihoods).unwrap();
        ti.push((t.ln_z, t.mc_error));
        ss.push((s.ln_z, s.mc_error));
    }
    for (name, reps) in [("TI", &ti), ("SS", &ss)] {
        let n = reps.len() as f64;
        let mean = reps.iter().map(|r| r.0).sum::<f64>() / n;
        let sd = (reps.iter().map(|r| (r.0 - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
        let quoted = (reps.iter().map(|r| r.1 * r.1).sum::<f64>() / n).sqrt();
        let ratio = sd / quoted;
        assert!(
            (0.6..1.5).contains(&ratio),
            "{name}: replicate sd {sd}, quoted {quoted}"
        );
    }
}

#[test]
fn window_probabilities_follow_prior_mass_times_evidence() {
    // Analytic: with Z = (1, 2, 3) and prior masses (0.5, 0.25, 0.25),
    // m Z = (0.5, 0.5, 0.75), so p = (2/7, 2/7, 3/7) and the log odds against
    // the third window are ln(2/3).
    let ln_z = [0.0, 2f64.ln(), 3f64.ln()];
    let err = [0.01, 0.02, 0.03];
    let odds = window_probabilities(&ln_z, &err, &[0.5, 0.25, 0.25]).unwrap();
    let want = [2.0 / 7.0, 2.0 / 7.0, 3.0 / 7.0];
    for (o, w) in odds.iter().zip(want) {
        assert!((o.posterior_probability - w).abs() < 1e-14);
    }
    assert!(odds[2].is_best && !odds[0].is_best);
    assert!((odds[0].ln_odds_vs_best - (2.0f64 / 3.0).ln()).abs() < 1e-14);
    assert_eq!(odds[2].ln_odds_vs_best, 0.0);
    assert!((odds[1].ln_odds_error - (0.02f64.powi(2) + 0.03f64.powi(2)).sqrt()).abs() < 1e-15);

    // Delta-method probability errors against a seeded Monte Carlo over the
    // ln Z errors (small errors, so the two agree to a few per cent).
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(7);
    let n = 20_000;
    let mut sum = [0.0; 3];
    let mut sum_sq = [0.0; 3];
    for _ in 0..n {
        let w: Vec<f64> = (0..3)
            .map(|k| {
                let z: f64 = StandardNormal.sample(&mut rng);
                (ln_z[k] + err[k] * z).exp() * [0.5, 0.25, 0.25][k]
            })
            .collect();
        let total: f64 = w.iter().sum();
        for k in 0..3 {
            sum[k] += w[k] / total;
            sum_sq[k] += (w[k] / total).powi(2);
        }
    }
    for k in 0..3 {
        let mean = sum[k] / n as f64;
        let sd = (sum_sq[k] / n as f64 - mean * mean).sqrt();
        let delta = odds[k].posterior_probability_error;
        assert!(
            (delta / sd - 1.0).abs() < 0.05,
            "window {k}: {delta} vs MC {sd}"
        );
    }
}

#[test]
fn window_evidences_recover_the_split_of_a_one_dimensional_posterior() {
    // One parameter with a uniform prior on [0, 3] and likelihood
    // N(1.3; x, 0.4^2), split into windows [0,1], [1,2], [2,3]. Each window's
    // prior is uniform on the window (density 1), so Z_k is the likelihood's
    // integral over the window and p_k must equal the posterior mass of the
    // window, (Phi(b_k) - Phi(a_k)) / (Phi(3) - Phi(0)) in the likelihood's
    // normal CDF (analytic; CDF from statrs 0.17).
    let normal = Normal::new(1.3, 0.4).unwrap();
    let edges = [0.0, 1.0, 2.0, 3.0];
    let mass: Vec<f64> = edges
        .windows(2)
        .map(|w| normal.cdf(w[1]) - normal.cdf(w[0]))
        .collect();
    let ln_z: Vec<f64> = mass.iter().map(|m| m.ln()).collect();
    let odds = window_probabilities(&ln_z, &[0.0; 3], &[1.0 / 3.0; 3]).unwrap();
    let total: f64 = mass.iter().sum();
    for (o, m) in odds.iter().zip(&mass) {
        assert!((o.posterior_probability - m / total).abs() < 1e-12);
        assert_eq!(o.posterior_probability_error, 0.0);
    }
    assert!(odds[1].is_best);
}
