//! A strongly curved ("banana") 2-D density with analytic marginals.

use crate::common::*;
use dyad_sampler::{run, FnLogPdf, MemorySink, RunConfig, RunControl, RunStatus, Start};
use statrs::distribution::{ContinuousCDF, Normal};

/// x1 ~ N(0, 1) and x2 = z + b (x1^2 - 1), z ~ N(0, s^2): the shear has unit
/// Jacobian, so the marginal of x1 is exactly N(0, 1) and
/// E[x2] = 0, E[x2^2] = s^2 + 2 b^2 (analytic; the twisted-Gaussian test
/// density of Haario, Saksman & Tamminen 1999, Comput. Stat. 14, 375, from memory).
/// The x1 marginal is compared with N(0, 1) (statrs 0.17 CDF) by a KS test
/// whose sample size is the ESS: D sqrt(ESS) < 1.95 (the 0.1 per cent
/// critical value of the Kolmogorov distribution, 1.949; common practice).
#[test]
fn banana_marginals() {
    let (b, s) = (1.5, 0.3);
    let target = FnLogPdf::new(2, move |x: &[f64]| {
        let z = x[1] - b * (x[0] * x[0] - 1.0);
        -0.5 * x[0] * x[0] - 0.5 * (z / s) * (z / s)
    });
    let nw = 32;
    let config = RunConfig::new(nw, 99, 400_000);
    let start = Start::Ball {
        centre: vec![0.0, -b],
        scale: vec![0.1, 0.1],
    };
    let mut sink = MemorySink::for_samples(2, nw);
    let result = run(&target, &config, &start, &mut sink, RunControl::default()).unwrap();
    assert_eq!(result.status, RunStatus::Converged, "{:?}", result.warnings);
    let draws = draws_after(sink.table(), 2, result.burn_in);
    let x1 = &draws.columns[0];
    let x2 = &draws.columns[1];

    let normal = Normal::new(0.0, 1.0).unwrap();
    let d = ks_statistic(x1, |v| normal.cdf(v));
    let n_eff = draws.ess[0];
    assert!(
        d * n_eff.sqrt() < 1.95,
        "KS statistic {d} with ESS {n_eff}: D sqrt(n) = {}",
        d * n_eff.sqrt()
    );

    let ess2 = draws.ess[1];
    let var2 = s * s + 2.0 * b * b;
    assert_within("E[x2]", mean(x2), 0.0, (var2 / ess2).sqrt(), 4.0);
    let sq: Vec<f64> = x2.iter().map(|v| v * v).collect();
    let sd_sq = covariance(&sq, &sq).sqrt();
    assert_within("E[x2^2]", mean(&sq), var2, sd_sq / ess2.sqrt(), 4.0);
    let x1sq: Vec<f64> = x1.iter().map(|v| v * v).collect();
    // Var(x1^2) = 2 for a standard normal.
    assert_within("E[x1^2]", mean(&x1sq), 1.0, (2.0 / n_eff).sqrt(), 4.0);
}
