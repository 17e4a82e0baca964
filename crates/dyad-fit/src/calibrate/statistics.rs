//! The rank statistics and interval coverage of simulation-based
//! calibration (Talts et al. 2018).

use rand::Rng;
use serde::Serialize;

use dyad_common::quantile::quantile_sorted;

use crate::error::{bail, FitError, Result};

/// Rank of `truth` among `draws`: the number of draws below it, ties
/// broken at random (Talts et al. 2018, Algorithm 1 and sec. 4.1).
pub fn rank_of<R: Rng + ?Sized>(truth: f64, draws: &[f64], rng: &mut R) -> usize {
    let below = draws.iter().filter(|&&d| d < truth).count();
    let ties = draws.iter().filter(|&&d| d == truth).count();
    below + if ties > 0 { rng.gen_range(0..=ties) } else { 0 }
}

/// Counts of ranks 0..=max_rank in `n_bins` bins (`bin = rank * n_bins /
/// (max_rank + 1)`, as in `dyad_report::plot_rank_histograms`), with the
/// expected count of each bin under uniform ranks.
pub fn binned_ranks(ranks: &[usize], max_rank: usize, n_bins: usize) -> (Vec<usize>, Vec<f64>) {
    let mut counts = vec![0usize; n_bins];
    for &r in ranks {
        counts[(r.min(max_rank) * n_bins / (max_rank + 1)).min(n_bins - 1)] += 1;
    }
    let mut width = vec![0usize; n_bins];
    for r in 0..=max_rank {
        width[r * n_bins / (max_rank + 1)] += 1;
    }
    let n = ranks.len() as f64;
    let expected = width
        .iter()
        .map(|&w| n * w as f64 / (max_rank + 1) as f64)
        .collect();
    (counts, expected)
}

/// Pearson's chi-square test of observed against expected counts: the
/// statistic, its degrees of freedom (bins - 1) and the upper-tail p-value
/// (Pearson 1900; any statistics text, e.g. NIST/SEMATECH e-Handbook of
/// Statistical Methods, sec. 1.3.5.15).
pub fn chi_square_test(counts: &[usize], expected: &[f64]) -> Result<(f64, usize, f64)> {
    use statrs::distribution::{ChiSquared, ContinuousCDF};
    if counts.len() < 2 || counts.len() != expected.len() {
        bail!("chi-square test needs at least two bins");
    }
    let statistic: f64 = counts
        .iter()
        .zip(expected)
        .map(|(&o, &e)| (o as f64 - e).powi(2) / e)
        .sum();
    let df = counts.len() - 1;
    let dist =
        ChiSquared::new(df as f64).map_err(|e| FitError::invalid(format!("chi-square: {e}")))?;
    Ok((statistic, df, dist.sf(statistic)))
}

/// Whether `truth` lies in the central `prob` interval of the sorted draws.
pub fn inside_central(sorted: &[f64], truth: f64, prob: f64) -> bool {
    let tail = 0.5 * (1.0 - prob);
    quantile_sorted(sorted, tail) <= truth && truth <= quantile_sorted(sorted, 1.0 - tail)
}

/// Coverage of a nominal probability: the fraction of `hits`, its binomial
/// standard error at the nominal value sqrt(p (1 - p) / n), and the
/// distance from nominal in standard errors.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Coverage {
    /// Nominal probability.
    pub nominal: f64,
    /// Observed fraction.
    pub fraction: f64,
    /// Binomial standard error at the nominal probability.
    pub standard_error: f64,
    /// (fraction - nominal) / standard_error.
    pub z: f64,
}

/// The coverage of `hits` at `nominal` (binomial standard error: common
/// practice).
pub fn coverage(hits: &[bool], nominal: f64) -> Coverage {
    let n = hits.len().max(1) as f64;
    let fraction = hits.iter().filter(|&&h| h).count() as f64 / n;
    let standard_error = (nominal * (1.0 - nominal) / n).sqrt();
    Coverage {
        nominal,
        fraction,
        standard_error,
        z: (fraction - nominal) / standard_error,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};
    use rand_xoshiro::Xoshiro256PlusPlus;

    #[test]
    fn rank_counts_draws_below_the_truth() {
        // Definition of the rank statistic (Talts et al. 2018, Algorithm 1).
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(1);
        assert_eq!(rank_of(2.5, &[1.0, 2.0, 3.0, 4.0], &mut rng), 2);
        assert_eq!(rank_of(0.0, &[1.0, 2.0, 3.0], &mut rng), 0);
        assert_eq!(rank_of(9.0, &[1.0, 2.0, 3.0], &mut rng), 3);
        // Ties are broken at random over every position among the ties.
        let mut seen = [false; 3];
        for _ in 0..200 {
            seen[rank_of(2.0, &[2.0, 2.0], &mut rng)] = true;
        }
        assert_eq!(seen, [true, true, true]);
    }

    #[test]
    fn bins_match_the_plot_and_the_expected_counts_sum_to_n() {
        // 20 ranks 0..=19 into 5 bins of 4 ranks.
        let ranks: Vec<usize> = (0..20).collect();
        let (counts, expected) = binned_ranks(&ranks, 19, 5);
        assert_eq!(counts, vec![4; 5]);
        assert_eq!(expected, vec![4.0; 5]);
        // Unequal bins: ranks 0..=9 into 3 bins get widths 4, 3, 3.
        let (counts, expected) = binned_ranks(&(0..10).collect::<Vec<_>>(), 9, 3);
        assert_eq!(counts, vec![4, 3, 3]);
        assert!((expected.iter().sum::<f64>() - 10.0).abs() < 1e-12);
    }

    #[test]
    fn chi_square_p_values_match_the_table() {
        // Upper critical values of the chi-square distribution (NIST/SEMATECH
        // e-Handbook of Statistical Methods, table 1.3.6.7.4): 7.815 for
        // df = 3 and 16.919 for df = 9 at upper-tail probability 0.05.
        let (x, df, p) = chi_square_test(&[0, 0], &[1.0, 1.0]).expect("test runs");
        assert_eq!((x, df), (2.0, 1));
        // df = 1: P(chi2 > 2) = erfc(1) = 0.157299... (from memory)
        assert!((p - 0.157_299_207).abs() < 1e-6, "{p}");
        use statrs::distribution::{ChiSquared, ContinuousCDF};
        let sf3 = ChiSquared::new(3.0).expect("valid").sf(7.815);
        assert!((sf3 - 0.05).abs() < 2e-4, "{sf3}");
        let sf9 = ChiSquared::new(9.0).expect("valid").sf(16.919);
        assert!((sf9 - 0.05).abs() < 2e-4, "{sf9}");
        // Perfectly uniform counts: statistic 0, p = 1.
        let (x, _, p) = chi_square_test(&[5, 5, 5, 5], &[5.0; 4]).expect("test runs");
        assert_eq!(x, 0.0);
        assert!((p - 1.0).abs() < 1e-12);
    }

    #[test]
    fn central_intervals() {
        // Type-7 quantiles (Hyndman & Fan 1996) of an even grid on [0, 1].
        let grid: Vec<f64> = (0..=1000).map(|i| i as f64 / 1000.0).collect();
        assert!(inside_central(&grid, 0.5, 0.68));
        assert!(inside_central(&grid, 0.17, 0.68));
        assert!(!inside_central(&grid, 0.15, 0.68));
        assert!(inside_central(&grid, 0.03, 0.95));
        assert!(!inside_central(&grid, 0.02, 0.95));
    }

    #[test]
    fn coverage_and_its_binomial_error() {
        // 19 of 20 inside at nominal 0.95: fraction 0.95, se sqrt(0.95 0.05 / 20).
        let mut hits = vec![true; 19];
        hits.push(false);
        let c = coverage(&hits, 0.95);
        assert!((c.fraction - 0.95).abs() < 1e-12);
        assert!((c.standard_error - (0.95f64 * 0.05 / 20.0).sqrt()).abs() < 1e-12);
        assert!(c.z.abs() < 1e-9);
        let c = coverage(&[true, false, false, false], 0.5);
        // 1 of 4 at nominal 0.5: fraction 0.25, se sqrt(0.25 / 4) = 0.25, z = -1.
        assert!((c.z + 1.0).abs() < 1e-12);
    }

    /// SBC of a conjugate normal model, where the exact posterior is known:
    /// theta ~ N(0, 1), y ~ N(theta, 1) gives theta | y ~ N(y/2, 1/2)
    /// (any Bayesian text, e.g. Gelman et al., Bayesian Data Analysis, 3rd
    /// ed., sec. 2.5). `shift` and `scale` corrupt the posterior draws the
    /// way a sign error or a unit error in a pipeline would.
    fn conjugate_sbc(shift: f64, scale: f64) -> (f64, Coverage) {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(2024);
        let (n_sims, l, bins) = (400, 39, 8);
        let unit = Normal::new(0.0, 1.0).expect("valid");
        let mut ranks = Vec::new();
        let mut hits = Vec::new();
        for _ in 0..n_sims {
            let theta: f64 = unit.sample(&mut rng);
            let y = theta + unit.sample(&mut rng);
            let post = Normal::new(y / 2.0 + shift, scale * 0.5f64.sqrt()).expect("valid");
            let mut draws: Vec<f64> = (0..l).map(|_| post.sample(&mut rng)).collect();
            ranks.push(rank_of(theta, &draws, &mut rng));
            draws.sort_by(f64::total_cmp);
            hits.push(inside_central(&draws, theta, 0.68));
        }
        let (counts, expected) = binned_ranks(&ranks, l, bins);
        let (_, _, p) = chi_square_test(&counts, &expected).expect("test runs");
        (p, coverage(&hits, 0.68))
    }

    #[test]
    fn exact_posterior_passes_and_corrupted_posteriors_fail() {
        let (p, c) = conjugate_sbc(0.0, 1.0);
        assert!(p > 0.001, "exact posterior rejected: p = {p}");
        // 39 draws estimate the 68 % interval only roughly; within 4 sigma.
        assert!(c.z.abs() < 4.0, "{c:?}");
        // Biased posterior (shifted by one posterior sd): ranks pile up at one end.
        let (p, _) = conjugate_sbc(0.7, 1.0);
        assert!(p < 1e-6, "shifted posterior not detected: p = {p}");
        // Too narrow posterior (a unit error of a factor 2 in the error bars):
        // U-shaped ranks, and under-coverage.
        let (p, c) = conjugate_sbc(0.0, 0.5);
        assert!(p < 1e-6, "narrow posterior not detected: p = {p}");
        assert!(c.z < -4.0, "{c:?}");
    }
}
