//! 10-D correlated Gaussian with condition number 1e4.

use crate::common::*;
use dyad_sampler::{run, MemorySink, RunConfig, RunControl, RunStatus, Start};

/// Means and covariances of a 10-D Gaussian with covariance eigenvalues
/// log-spaced over 1e-2 .. 1e2 (condition number 1e4) in a random rotation.
/// Truth is the analytic mean and covariance; tolerances are 4 Monte-Carlo
/// standard errors with the ESS of the draws (common practice). The
/// standard error of a sample covariance of Gaussian variables is
/// sqrt((C_ii C_jj + C_ij^2) / n) (Anderson, An Introduction to Multivariate
/// Statistical Analysis, 3rd ed., sect. 3.4, from memory).
#[test]
fn ill_conditioned_gaussian_moments() {
    let d = 10;
    let variances: Vec<f64> = (0..d)
        .map(|k| 10f64.powf(-2.0 + 4.0 * k as f64 / (d - 1) as f64))
        .collect();
    let mean: Vec<f64> = (0..d).map(|i| i as f64 - 4.5).collect();
    let target = Gaussian::rotated(mean.clone(), &variances, 7);
    let nw = 40;
    let config = RunConfig::new(nw, 2024, 200_000);
    let start = Start::Ball {
        centre: mean.iter().map(|m| m + 0.5).collect(),
        scale: vec![1e-3; d],
    };
    let mut sink = MemorySink::for_samples(d, nw);
    let result = run(&target, &config, &start, &mut sink, RunControl::default()).unwrap();
    assert_eq!(result.status, RunStatus::Converged, "{:?}", result.warnings);
    // Goodman & Weare (2010) report acceptance of the stretch move well inside (0.1, 0.6)
    // on Gaussians; the affine invariance makes it independent of the conditioning.
    assert!(
        result.diagnostics.mean_acceptance > 0.1 && result.diagnostics.mean_acceptance < 0.6,
        "acceptance {}",
        result.diagnostics.mean_acceptance
    );
    let draws = draws_after(sink.table(), d, result.burn_in);
    for i in 0..d {
        let cii = target.cov[i * d + i];
        assert_within(
            &format!("mean of x{i}"),
            mean_of(&draws.columns[i]),
            mean[i],
            (cii / draws.ess[i]).sqrt(),
            4.0,
        );
        for j in 0..=i {
            let cij = target.cov[i * d + j];
            let cjj = target.cov[j * d + j];
            let n = draws.ess[i].min(draws.ess[j]);
            assert_within(
                &format!("cov(x{i}, x{j})"),
                covariance(&draws.columns[i], &draws.columns[j]),
                cij,
                ((cii * cjj + cij * cij) / n).sqrt(),
                4.0,
            );
        }
    }
    // R-hat near 1 after convergence (Vehtari et al. 2021 recommend < 1.01;
    // with walkers as chains allow 1.05).
    for (p, r) in result.diagnostics.split_rhat.iter().enumerate() {
        assert!(*r < 1.05, "R-hat of x{p} is {r}");
    }
}

fn mean_of(v: &[f64]) -> f64 {
    mean(v)
}
