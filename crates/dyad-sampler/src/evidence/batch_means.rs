//! The Monte-Carlo error of a per-step series by batch means (batch size
//! in the module docs of [`super`]).

use crate::diagnostics::AutocorrEstimator;

/// Standard error of the mean of `series` by batch means (see the module
/// docs for the batch size), and whether the batches were long enough.
/// Zero for a constant series.
pub(super) fn batch_means_error(series: &[f64]) -> (f64, bool) {
    let n = series.len();
    if series.iter().all(|&x| x == series[0]) {
        return (0.0, true);
    }
    let tau = AutocorrEstimator::new()
        .estimate(series, n, 1)
        .map_or(f64::INFINITY, |a| a.tau);
    let by_sqrt = (n as f64).sqrt().ceil();
    let by_tau = if tau.is_finite() {
        (5.0 * tau).ceil()
    } else {
        f64::INFINITY
    };
    let reliable = by_tau <= (n / 4) as f64;
    let batch = (by_sqrt.max(by_tau) as usize).clamp(1, n / 4);
    let n_batches = n / batch;
    let skip = n - n_batches * batch;
    let batch_means = series[skip..]
        .chunks_exact(batch)
        .map(|c| c.iter().sum::<f64>() / batch as f64);
    let used_mean = series[skip..].iter().sum::<f64>() / (n - skip) as f64;
    let var_between = batch_means
        .map(|m| (m - used_mean) * (m - used_mean))
        .sum::<f64>()
        / (n_batches as f64 - 1.0);
    ((var_between / n_batches as f64).sqrt(), reliable)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn batch_means_flags_chains_too_short_for_their_autocorrelation() {
        use rand::SeedableRng;
        use rand_distr::{Distribution, StandardNormal};
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(3);
        let mut ar1 = |phi: f64, n: usize| -> Vec<f64> {
            let mut x = 0.0;
            (0..n)
                .map(|_| {
                    let e: f64 = StandardNormal.sample(&mut rng);
                    x = phi * x + e;
                    x
                })
                .collect()
        };
        // tau ~ 199 steps in a 400-step series: batches cannot be 5 tau long.
        assert!(!batch_means_error(&ar1(0.99, 400)).1);
        // tau ~ 1 in 4000 steps: fine, and the error is close to 1/sqrt(n)
        // (unit-variance white noise; 20 per cent covers the estimate's own
        // scatter with its ~60 batches at 4 sigma).
        let (err, ok) = batch_means_error(&ar1(0.0, 4000));
        assert!(ok);
        assert!((err * 4000f64.sqrt() - 1.0).abs() < 0.4, "{err}");
    }
}
