//! Shared targets and helpers.

use dyad_sampler::diagnostics::ess_bulk;
use dyad_sampler::{LogDensity, RecordTable};
use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

/// A multivariate normal N(mean, cov) given by its mean and covariance, with
/// a flat prior (everything in the likelihood).
pub struct Gaussian {
    pub mean: Vec<f64>,
    pub cov: Vec<f64>,
    pub precision: Vec<f64>,
}

impl Gaussian {
    /// cov = R diag(variances) R^T with a seeded random rotation R.
    pub fn rotated(mean: Vec<f64>, variances: &[f64], seed: u64) -> Self {
        let d = variances.len();
        let r = random_rotation(d, seed);
        let mut cov = vec![0.0; d * d];
        let mut precision = vec![0.0; d * d];
        for i in 0..d {
            for j in 0..d {
                for k in 0..d {
                    cov[i * d + j] += r[i * d + k] * variances[k] * r[j * d + k];
                    precision[i * d + j] += r[i * d + k] / variances[k] * r[j * d + k];
                }
            }
        }
        Self {
            mean,
            cov,
            precision,
        }
    }
}

impl LogDensity for Gaussian {
    fn dim(&self) -> usize {
        self.mean.len()
    }
    fn log_prior(&self, _x: &[f64]) -> f64 {
        0.0
    }
    fn log_likelihood(&self, x: &[f64]) -> f64 {
        let d = self.mean.len();
        let mut q = 0.0;
        for i in 0..d {
            let di = x[i] - self.mean[i];
            let mut row = 0.0;
            for j in 0..d {
                row += self.precision[i * d + j] * (x[j] - self.mean[j]);
            }
            q += di * row;
        }
        -0.5 * q
    }
}

/// Orthogonal matrix from Gram-Schmidt on a seeded uniform random matrix (row-major).
pub fn random_rotation(d: usize, seed: u64) -> Vec<f64> {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let mut cols: Vec<Vec<f64>> = Vec::new();
    while cols.len() < d {
        let mut v: Vec<f64> = (0..d).map(|_| rng.gen::<f64>() - 0.5).collect();
        for q in &cols {
            let dot: f64 = q.iter().zip(&v).map(|(a, b)| a * b).sum();
            v.iter_mut().zip(q).for_each(|(x, qv)| *x -= dot * qv);
        }
        let n = v.iter().map(|x| x * x).sum::<f64>().sqrt();
        if n > 1e-6 {
            cols.push(v.into_iter().map(|x| x / n).collect());
        }
    }
    let mut r = vec![0.0; d * d];
    for (k, c) in cols.iter().enumerate() {
        for i in 0..d {
            r[i * d + k] = c[i];
        }
    }
    r
}

/// Per-parameter draws after burn-in (step-major) and their bulk ESS.
pub struct Draws {
    pub columns: Vec<Vec<f64>>,
    pub ess: Vec<f64>,
}

pub fn draws_after(table: &RecordTable, dim: usize, burn_in: u64) -> Draws {
    let first = table.first_after(burn_in);
    let n_steps = table.len() - first;
    let columns: Vec<Vec<f64>> = (0..dim).map(|p| table.column(p, first)).collect();
    let ess = columns
        .iter()
        .map(|c| ess_bulk(c, n_steps, table.n_walkers))
        .collect();
    Draws { columns, ess }
}

pub fn mean(v: &[f64]) -> f64 {
    v.iter().sum::<f64>() / v.len() as f64
}

pub fn covariance(a: &[f64], b: &[f64]) -> f64 {
    let (ma, mb) = (mean(a), mean(b));
    a.iter()
        .zip(b)
        .map(|(x, y)| (x - ma) * (y - mb))
        .sum::<f64>()
        / (a.len() as f64 - 1.0)
}

/// One-sample Kolmogorov-Smirnov statistic of `x` against `cdf`.
pub fn ks_statistic(x: &[f64], cdf: impl Fn(f64) -> f64) -> f64 {
    let mut s = x.to_vec();
    s.sort_by(f64::total_cmp);
    let n = s.len() as f64;
    s.iter()
        .enumerate()
        .map(|(i, &v)| {
            let f = cdf(v);
            (f - i as f64 / n).abs().max(((i + 1) as f64 / n - f).abs())
        })
        .fold(0.0, f64::max)
}

/// Asserts `|estimate - truth| < k * se`, printing both.
pub fn assert_within(what: &str, estimate: f64, truth: f64, se: f64, k: f64) {
    assert!(
        (estimate - truth).abs() < k * se,
        "{what}: expected {truth}, got {estimate} (difference {:.3} standard errors of {se:.3e})",
        (estimate - truth) / se
    );
}
