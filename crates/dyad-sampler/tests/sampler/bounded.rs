//! A density with support edges: truncated exponential times a uniform box.

use crate::common::*;
use dyad_sampler::{run, FnDensity, MemorySink, RunConfig, RunControl, RunStatus, Start};

/// x1 has density proportional to exp(-x1) on [0, 2], x2 is uniform on
/// [-1, 1]. Analytic: E[x1] = 1 - 2 / (e^2 - 1), CDF (1 - e^-x)/(1 - e^-2);
/// x2 has CDF (x + 1)/2 and variance 1/3. The prior carries the box (so the
/// likelihood is never evaluated outside it). KS at the 0.1 per cent level
/// with the ESS as sample size (common practice); no draw may leave the box.
#[test]
fn truncated_exponential_and_box() {
    let target = FnDensity::new(
        2,
        |x: &[f64]| {
            if (0.0..=2.0).contains(&x[0]) && (-1.0..=1.0).contains(&x[1]) {
                0.0
            } else {
                f64::NEG_INFINITY
            }
        },
        |x: &[f64]| {
            assert!((0.0..=2.0).contains(&x[0]) && (-1.0..=1.0).contains(&x[1]));
            -x[0]
        },
    );
    let nw = 24;
    let config = RunConfig::new(nw, 5, 400_000);
    let start = Start::Ball {
        centre: vec![0.5, 0.0],
        scale: vec![0.1, 0.1],
    };
    let mut sink = MemorySink::for_samples(2, nw);
    let result = run(&target, &config, &start, &mut sink, RunControl::default()).unwrap();
    assert_eq!(result.status, RunStatus::Converged, "{:?}", result.warnings);
    let draws = draws_after(sink.table(), 2, result.burn_in);
    let (x1, x2) = (&draws.columns[0], &draws.columns[1]);
    assert!(x1.iter().all(|v| (0.0..=2.0).contains(v)));
    assert!(x2.iter().all(|v| (-1.0..=1.0).contains(v)));

    let e2 = (2.0f64).exp();
    let mean1 = 1.0 - 2.0 / (e2 - 1.0);
    // E[x^2] = (2 - e^-2 (4 + 4 + 2)) / (1 - e^-2) for rate 1 on [0, 2].
    let m2 = (2.0 - (-2.0f64).exp() * 10.0) / (1.0 - (-2.0f64).exp());
    let var1 = m2 - mean1 * mean1;
    assert_within("E[x1]", mean(x1), mean1, (var1 / draws.ess[0]).sqrt(), 4.0);
    let norm = 1.0 - (-2.0f64).exp();
    let d1 = ks_statistic(x1, |v| (1.0 - (-v).exp()) / norm);
    assert!(
        d1 * draws.ess[0].sqrt() < 1.95,
        "KS x1: D = {d1}, ESS {}",
        draws.ess[0]
    );
    let d2 = ks_statistic(x2, |v| (v + 1.0) / 2.0);
    assert!(
        d2 * draws.ess[1].sqrt() < 1.95,
        "KS x2: D = {d2}, ESS {}",
        draws.ess[1]
    );
    assert_within(
        "Var x2",
        covariance(x2, x2),
        1.0 / 3.0,
        (4.0 / 45.0 / draws.ess[1]).sqrt(),
        4.0,
    );
}
