//! Evidence from the sampler's own parallel tempering (adaptive ladder,
//! Vousden, Farr & Mandel 2016) against analytic evidences.
//!
//! - Gaussian likelihood, Gaussian prior: ln Z = sum_i ln N(y_i; mu_i,
//!   s_i^2 + sigma_i^2) (analytic, normal-normal conjugacy; e.g. Bishop 2006,
//!   "Pattern Recognition and Machine Learning", eq. 2.115).
//! - Two-component Gaussian-mixture likelihood, Gaussian prior:
//!   Z = sum_c w_c N(y_c; mu, S + Sigma_c) (analytic, the same conjugacy per
//!   component, by linearity of the integral).
//!
//! Each check: |ln Z - analytic| < 0.1 and < 4 quoted standard errors
//! (Monte-Carlo and, for thermodynamic integration, discretisation in
//! quadrature). Seeded runs, so the outcome is fixed. Run times in --release
//! are a few seconds each.

use dyad_sampler::evidence::{estimate_evidence, EvidenceEstimate};
use dyad_sampler::{
    run, FnDensity, LogDensity, MemorySink, RunConfig, RunControl, Start, TemperingConfig,
};

const LN_2PI: f64 = 1.837_877_066_409_345_5;

/// ln N(x; m, v) for a scalar.
fn ln_normal(x: f64, m: f64, v: f64) -> f64 {
    -0.5 * (LN_2PI + v.ln()) - 0.5 * (x - m) * (x - m) / v
}

struct Case {
    prior_mean: Vec<f64>,
    prior_sd: Vec<f64>,
}

impl Case {
    fn new(d: usize) -> Self {
        let t = |i: usize| i as f64 / (d.max(2) - 1) as f64;
        Self {
            prior_mean: (0..d).map(|i| -0.5 + t(i)).collect(),
            prior_sd: (0..d).map(|i| 3.0 + t(i)).collect(),
        }
    }

    fn ln_prior(&self, x: &[f64]) -> f64 {
        x.iter()
            .enumerate()
            .map(|(i, &xi)| ln_normal(xi, self.prior_mean[i], self.prior_sd[i].powi(2)))
            .sum()
    }
}

fn tempered_evidence<D: LogDensity>(
    density: &D,
    dim: usize,
    n_temperatures: usize,
    seed: u64,
    steps: u64,
    burn_in: u64,
) -> (EvidenceEstimate, EvidenceEstimate) {
    let n_walkers = (4 * dim).max(16);
    let mut config = RunConfig::new(n_walkers, seed, steps);
    config.convergence = None;
    config.thin = 2;
    config.tempering = Some(TemperingConfig {
        n_temperatures,
        burn_in_steps: burn_in,
        ..Default::default()
    });
    let start = Start::Ball {
        centre: vec![0.0; dim],
        scale: vec![0.5; dim],
    };
    let mut sink = MemorySink::for_samples(dim, n_walkers);
    let result = run(density, &config, &start, &mut sink, RunControl::default()).expect("run");
    let tempered = result.tempered.as_ref().expect("tempered output");
    let both = estimate_evidence(tempered).expect("evidence");
    (both.thermodynamic_integration, both.stepping_stone)
}

fn check(name: &str, est: &EvidenceEstimate, truth: f64) {
    let miss = (est.ln_z - truth).abs();
    assert!(
        est.mc_error_reliable,
        "{name}: chains too short for the error estimate"
    );
    assert!(
        miss < 0.1 && miss < 4.0 * est.total_error(),
        "{name} {:?}: ln Z {} vs analytic {truth} (mc {}, discretisation {:?})",
        est.method,
        est.ln_z,
        est.mc_error,
        est.discretisation_error
    );
}

fn gaussian(d: usize, seed: u64, steps: u64) {
    let case = Case::new(d);
    let data: Vec<f64> = (0..d).map(|i| 1.0 + 0.1 * i as f64).collect();
    let noise_sd: Vec<f64> = (0..d).map(|i| 0.7 + 0.05 * i as f64).collect();
    let truth: f64 = (0..d)
        .map(|i| {
            ln_normal(
                data[i],
                case.prior_mean[i],
                case.prior_sd[i].powi(2) + noise_sd[i].powi(2),
            )
        })
        .sum();
    let (data_l, sd_l) = (data.clone(), noise_sd.clone());
    let density = FnDensity::new(
        d,
        move |x: &[f64]| case.ln_prior(x),
        move |x: &[f64]| {
            x.iter()
                .enumerate()
                .map(|(i, &xi)| ln_normal(data_l[i], xi, sd_l[i] * sd_l[i]))
                .sum()
        },
    );
    let (ti, ss) = tempered_evidence(&density, d, 16, seed, steps, steps / 4);
    check(&format!("gaussian d={d}"), &ti, truth);
    check(&format!("gaussian d={d}"), &ss, truth);
}

#[test]
fn tempered_gaussian_evidence_2d() {
    gaussian(2, 41, 6000);
}

#[test]
fn tempered_gaussian_evidence_5d() {
    gaussian(5, 42, 8000);
}

#[test]
fn tempered_gaussian_evidence_10d() {
    gaussian(10, 43, 12000);
}

#[test]
fn tempered_two_component_mixture_evidence() {
    // Components at (-3, -3) and (3, 3), sd 0.5 and 0.7, weights 0.3 and
    // 0.7: two well separated posterior modes that the cold chain alone
    // would not cross.
    let d = 2;
    let case = Case::new(d);
    let centres = [[-3.0, -3.0], [3.0, 3.0]];
    let sds = [0.5, 0.7];
    let weights = [0.3f64, 0.7];
    let truth = {
        let terms: Vec<f64> = (0..2)
            .map(|c| {
                weights[c].ln()
                    + (0..d)
                        .map(|i| {
                            ln_normal(
                                centres[c][i],
                                case.prior_mean[i],
                                case.prior_sd[i].powi(2) + sds[c] * sds[c],
                            )
                        })
                        .sum::<f64>()
            })
            .collect();
        let m = terms[0].max(terms[1]);
        m + terms.iter().map(|t| (t - m).exp()).sum::<f64>().ln()
    };
    let density = FnDensity::new(
        d,
        move |x: &[f64]| case.ln_prior(x),
        move |x: &[f64]| {
            let terms: Vec<f64> = (0..2)
                .map(|c| {
                    weights[c].ln()
                        + (0..2)
                            .map(|i| ln_normal(centres[c][i], x[i], sds[c] * sds[c]))
                            .sum::<f64>()
                })
                .collect();
            let m = terms[0].max(terms[1]);
            m + terms.iter().map(|t| (t - m).exp()).sum::<f64>().ln()
        },
    );
    let (ti, ss) = tempered_evidence(&density, d, 16, 44, 8000, 2000);
    check("mixture", &ti, truth);
    check("mixture", &ss, truth);
}
