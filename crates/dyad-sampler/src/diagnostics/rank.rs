//! Rank-normalised split R-hat and bulk/tail effective sample sizes
//! (Vehtari et al. 2021; the conventions are in the parent module's
//! documentation).

use super::autocorr::{AutocorrEstimator, Combine};
use super::{
    check_shape, transpose_to_chains, AutocorrTime, Diagnostics, DiagnosticsError,
    ParameterDiagnostics, MIN_STEPS_RANK,
};

/// sorting and rank buffers of R-hat and ESS).
#[derive(Debug, Default)]
pub struct DiagnosticsWorkspace {
    autocorr: AutocorrEstimator,
    /// Loaded parameter, chain-major.
    chains: Vec<f64>,
    /// Its split halves, chain-major.
    split: Vec<f64>,
    /// Rank-normalised split draws, valid when `bulk_ready`.
    bulk_z: Vec<f64>,
    /// Split draws in ascending order, valid when `bulk_ready`.
    sorted: Vec<f64>,
    bulk_ready: bool,
    transformed: Vec<f64>,
    folded: Vec<f64>,
    /// (value, index) pairs sorted by value (sorting pairs beats sorting
    /// indices through the values: no indirection in the comparisons).
    order: Vec<(f64, usize)>,
    sorted_all: Vec<f64>,
    /// Normal quantiles of the Blom scores, indexed by twice the rank
    /// (ties give half-integer ranks), for `z_cache_n` draws; NaN = not yet
    /// computed. Shared by all parameters of equal length.
    z_cache: Vec<f64>,
    z_cache_n: usize,
}

impl DiagnosticsWorkspace {
    /// Empty workspace; buffers grow on first use.
    pub fn new() -> Self {
        Self::default()
    }

    /// Diagnostics of every parameter, `samples[(step * n_walkers + walker) * n_dim + dim]`.
    pub fn diagnose(
        &mut self,
        samples: &[f64],
        n_steps: usize,
        n_walkers: usize,
        n_dim: usize,
    ) -> Result<Diagnostics, DiagnosticsError> {
        check_shape(samples, n_steps, n_walkers, n_dim, MIN_STEPS_RANK)?;
        let mut parameters = Vec::with_capacity(n_dim);
        for dim in 0..n_dim {
            self.load(samples, n_steps, n_walkers, n_dim, dim);
            let chains = std::mem::take(&mut self.chains);
            let tau = self
                .autocorr
                .estimate_chain_major(&chains, n_steps, n_walkers);
            self.chains = chains;
            parameters.push(ParameterDiagnostics {
                tau: tau.tau,
                tau_window: tau.window,
                tau_long_enough: tau.long_enough,
                rhat: self.rhat_loaded(n_steps, n_walkers),
                ess_bulk: self.ess_bulk_loaded(n_steps, n_walkers),
                ess_tail: self.ess_tail_loaded(n_steps, n_walkers),
            });
        }
        Ok(Diagnostics {
            n_steps,
            n_walkers,
            parameters,
        })
    }

    /// Integrated autocorrelation time of one parameter (step-major draws).
    pub fn autocorr_time(
        &mut self,
        draws: &[f64],
        n_steps: usize,
        n_walkers: usize,
    ) -> Result<AutocorrTime, DiagnosticsError> {
        self.autocorr.estimate(draws, n_steps, n_walkers)
    }

    /// Checks and loads the step-major draws of one parameter.
    fn load_one(
        &mut self,
        draws: &[f64],
        n_steps: usize,
        n_walkers: usize,
    ) -> Result<(), DiagnosticsError> {
        check_shape(draws, n_steps, n_walkers, 1, MIN_STEPS_RANK)?;
        self.load(draws, n_steps, n_walkers, 1, 0);
        Ok(())
    }

    /// Rank-normalised split R-hat of one parameter (step-major draws).
    pub fn split_rhat(
        &mut self,
        draws: &[f64],
        n_steps: usize,
        n_walkers: usize,
    ) -> Result<f64, DiagnosticsError> {
        self.load_one(draws, n_steps, n_walkers)?;
        Ok(self.rhat_loaded(n_steps, n_walkers))
    }

    /// Bulk ESS of one parameter (step-major draws).
    pub fn ess_bulk(
        &mut self,
        draws: &[f64],
        n_steps: usize,
        n_walkers: usize,
    ) -> Result<f64, DiagnosticsError> {
        self.load_one(draws, n_steps, n_walkers)?;
        Ok(self.ess_bulk_loaded(n_steps, n_walkers))
    }

    /// Tail ESS of one parameter (step-major draws).
    pub fn ess_tail(
        &mut self,
        draws: &[f64],
        n_steps: usize,
        n_walkers: usize,
    ) -> Result<f64, DiagnosticsError> {
        self.load_one(draws, n_steps, n_walkers)?;
        Ok(self.ess_tail_loaded(n_steps, n_walkers))
    }

    /// Effective sample size of the mean of one parameter (step-major
    /// draws): the ESS of the split chains of the draws themselves, not of
    /// their ranks, as the Monte Carlo standard error of a mean,
    /// `sd / sqrt(ESS)`, needs (Vehtari et al. 2021, sect. 3.2). For a 0/1
    /// indicator it equals the bulk ESS (ranks of two values are an affine
    /// map of them).
    pub fn ess_mean(
        &mut self,
        draws: &[f64],
        n_steps: usize,
        n_walkers: usize,
    ) -> Result<f64, DiagnosticsError> {
        self.load_one(draws, n_steps, n_walkers)?;
        Ok(ess_basic(
            &mut self.autocorr,
            &self.split,
            2 * n_walkers,
            n_steps / 2,
        ))
    }

    /// Copy parameter `dim` into `self.chains`, chain-major, and its split
    /// halves into `self.split` (chain-major, 2 n_walkers chains of n_steps/2).
    fn load(
        &mut self,
        samples: &[f64],
        n_steps: usize,
        n_walkers: usize,
        n_dim: usize,
        dim: usize,
    ) {
        self.chains.clear();
        self.chains.resize(n_steps * n_walkers, 0.0);
        transpose_to_chains(samples, n_steps, n_walkers, n_dim, dim, &mut self.chains);
        self.bulk_ready = false;
        let half = n_steps / 2;
        self.split.clear();
        for chain in self.chains.chunks_exact(n_steps) {
            self.split.extend_from_slice(&chain[..half]);
            self.split.extend_from_slice(&chain[n_steps - half..]);
        }
    }

    /// Rank-normalise the split draws once per loaded parameter (shared by
    /// R-hat and bulk ESS) and keep them sorted (for the median and the
    /// quantiles).
    fn ensure_bulk(&mut self) {
        if self.bulk_ready {
            return;
        }
        let split = std::mem::take(&mut self.split);
        let mut z = std::mem::take(&mut self.bulk_z);
        self.z_scale_into(&split, &mut z);
        self.sorted.clear();
        self.sorted.extend(self.order.iter().map(|&(x, _)| x));
        self.split = split;
        self.bulk_z = z;
        self.bulk_ready = true;
    }

    fn rhat_loaded(&mut self, n_steps: usize, n_walkers: usize) -> f64 {
        let half = n_steps / 2;
        let n_chain = 2 * n_walkers;
        // Bulk: rank-normalised split chains (Vehtari et al. 2021, eq. 14).
        self.ensure_bulk();
        let bulk = rhat_basic(&self.bulk_z, n_chain, half);
        // Tail: fold about the median of the split draws, then rank-normalise
        // (Vehtari et al. 2021, sect. 4.2).
        let n = self.sorted.len();
        let median = if n % 2 == 1 {
            self.sorted[n / 2]
        } else {
            0.5 * (self.sorted[n / 2 - 1] + self.sorted[n / 2])
        };
        let mut abs_dev = std::mem::take(&mut self.transformed);
        abs_dev.clear();
        abs_dev.extend(self.split.iter().map(|x| (x - median).abs()));
        let mut folded = std::mem::take(&mut self.folded);
        self.z_scale_into(&abs_dev, &mut folded);
        let tail = rhat_basic(&folded, n_chain, half);
        self.folded = folded;
        self.transformed = abs_dev;
        if bulk.is_nan() || tail.is_nan() {
            f64::NAN
        } else {
            bulk.max(tail)
        }
    }

    fn ess_bulk_loaded(&mut self, n_steps: usize, n_walkers: usize) -> f64 {
        self.ensure_bulk();
        ess_basic(&mut self.autocorr, &self.bulk_z, 2 * n_walkers, n_steps / 2)
    }

    fn ess_tail_loaded(&mut self, n_steps: usize, n_walkers: usize) -> f64 {
        let half = n_steps / 2;
        // Quantiles of all draws; for an even chain length the split halves
        // are all the draws.
        let quantiles = if n_steps.is_multiple_of(2) {
            self.ensure_bulk();
            [0.05, 0.95].map(|p| quantile_type7_sorted(&self.sorted, p))
        } else {
            self.sorted_all.clear();
            self.sorted_all.extend_from_slice(&self.chains);
            self.sorted_all.sort_unstable_by(f64::total_cmp);
            [0.05, 0.95].map(|p| quantile_type7_sorted(&self.sorted_all, p))
        };
        let mut worst = f64::INFINITY;
        for q in quantiles {
            let mut ind = std::mem::take(&mut self.transformed);
            ind.clear();
            for chain in self.chains.chunks_exact(n_steps) {
                let below = |x: &f64| if *x <= q { 1.0 } else { 0.0 };
                ind.extend(chain[..half].iter().map(below));
                ind.extend(chain[n_steps - half..].iter().map(below));
            }
            let ess = ess_basic(&mut self.autocorr, &ind, 2 * n_walkers, half);
            self.transformed = ind;
            if ess.is_nan() {
                return f64::NAN;
            }
            worst = worst.min(ess);
        }
        worst
    }

    /// Rank-normalisation: average ranks over all draws (ties share the
    /// mean rank), Blom's offset `(r - 3/8) / (S + 1/4)`, then the normal
    /// quantile (Vehtari et al. 2021, eq. 14; Blom 1958).
    fn z_scale_into(&mut self, values: &[f64], out: &mut Vec<f64>) {
        let n = values.len();
        self.order.clear();
        self.order.extend(values.iter().copied().zip(0..n));
        self.order.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        out.clear();
        out.resize(n, 0.0);
        if self.z_cache_n != n {
            self.z_cache.clear();
            self.z_cache.resize(2 * n + 2, f64::NAN);
            self.z_cache_n = n;
        }
        let denom = n as f64 + 0.25;
        let mut start = 0;
        while start < n {
            let mut end = start + 1;
            while end < n && self.order[end].0 == self.order[start].0 {
                end += 1;
            }
            // 0-based positions start..end tie: their mean 1-based rank is
            // key / 2 with key = start + 1 + end.
            let key = start + 1 + end;
            let mut z = self.z_cache[key];
            if z.is_nan() {
                z = normal_quantile((0.5 * key as f64 - 0.375) / denom);
                self.z_cache[key] = z;
                // Blom scores are symmetric: rank r and n + 1 - r give p and
                // 1 - p (equal to rounding), hence z and -z.
                let mirror = 2 * (n + 1) - key;
                if self.z_cache[mirror].is_nan() {
                    self.z_cache[mirror] = -z;
                }
            }
            for &(_, i) in &self.order[start..end] {
                out[i] = z;
            }
            start = end;
        }
    }
}

/// Classic R-hat of chain-major `data` (n_chain chains of n_draw):
/// `sqrt(((n-1)/n W + B/n) / W)` with `B = n var(chain means)`, `W` the mean
/// within-chain variance (Gelman & Rubin 1992; Vehtari et al. 2021, eqs. 3-4).
fn rhat_basic(data: &[f64], n_chain: usize, n_draw: usize) -> f64 {
    if n_draw < 2 || n_chain < 2 {
        return f64::NAN;
    }
    let n = n_draw as f64;
    let mut means = 0.0;
    let mut within = 0.0;
    for chain in data.chunks_exact(n_draw) {
        let mean = chain.iter().sum::<f64>() / n;
        let var = chain.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / (n - 1.0);
        means += mean;
        within += var;
    }
    let m = n_chain as f64;
    let grand = means / m;
    // Two-pass variance of chain means for accuracy.
    let mut var_means = 0.0;
    for chain in data.chunks_exact(n_draw) {
        let mean = chain.iter().sum::<f64>() / n;
        var_means += (mean - grand) * (mean - grand);
    }
    var_means /= m - 1.0;
    let within = within / m;
    let between = n * var_means;
    ((between / within + n - 1.0) / n).sqrt()
}

/// Effective sample size of chain-major `data` (n_chain chains of n_draw),
/// Vehtari et al. (2021), eqs. 10-13, with Geyer's (1992) initial positive
/// sequence (pairs of autocorrelations summed while positive) and initial
/// monotone sequence.
fn ess_basic(est: &mut AutocorrEstimator, data: &[f64], n_chain: usize, n_draw: usize) -> f64 {
    let size = (n_chain * n_draw) as f64;
    let (lo, hi) = data
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &x| {
            (lo.min(x), hi.max(x))
        });
    // All draws equal (to double resolution): each draw is independent
    // information in the sense that there is nothing to estimate (same
    // convention as ArviZ).
    if hi - lo < 1e-15 {
        return size;
    }
    if n_draw < 4 {
        return f64::NAN;
    }
    est.mean_autocov(data, n_chain, n_draw, Combine::MeanAutocovariance);
    let acov = &est.lags;
    let n = n_draw as f64;
    let mean_var = acov[0] * n / (n - 1.0);
    let mut var_plus = mean_var * (n - 1.0) / n;
    if n_chain > 1 {
        let means = &est.chain_means;
        let grand = means.iter().sum::<f64>() / n_chain as f64;
        let var_means =
            means.iter().map(|m| (m - grand) * (m - grand)).sum::<f64>() / (n_chain as f64 - 1.0);
        var_plus += var_means;
    }
    let rho = |t: usize| 1.0 - (mean_var - acov[t]) / var_plus;
    let rho_hat = &mut est.rho;
    rho_hat.clear();
    rho_hat.resize(n_draw, 0.0);
    let mut rho_even = 1.0;
    let mut rho_odd = rho(1);
    rho_hat[0] = rho_even;
    rho_hat[1] = rho_odd;
    // Initial positive sequence: sum pairs (rho_{2k}, rho_{2k+1}) while the
    // pair sum is positive.
    let mut t = 1;
    while t < n_draw - 3 && rho_even + rho_odd > 0.0 {
        rho_even = rho(t + 1);
        rho_odd = rho(t + 2);
        if rho_even + rho_odd >= 0.0 {
            rho_hat[t + 1] = rho_even;
            rho_hat[t + 2] = rho_odd;
        }
        t += 2;
    }
    let max_t = t - 2;
    // The first even lag of the truncated pair still carries information
    // when positive.
    if rho_even > 0.0 {
        rho_hat[max_t + 1] = rho_even;
    }
    // Initial monotone sequence: pair sums must not increase.
    let mut t = 1;
    while t + 2 <= max_t {
        if rho_hat[t + 1] + rho_hat[t + 2] > rho_hat[t - 1] + rho_hat[t] {
            rho_hat[t + 1] = 0.5 * (rho_hat[t - 1] + rho_hat[t]);
            rho_hat[t + 2] = rho_hat[t + 1];
        }
        t += 2;
    }
    let tau = -1.0 + 2.0 * rho_hat[..=max_t].iter().sum::<f64>() + rho_hat[max_t + 1];
    // Cap the ESS at N log10(N) for antithetic chains (Vehtari et al. 2021, sect. 3.2).
    let tau = tau.max(1.0 / size.log10());
    if rho_hat.iter().any(|r| r.is_nan()) {
        return f64::NAN;
    }
    size / tau
}

// Type-7 sample quantile of sorted values (Hyndman & Fan 1996, Am. Stat.
// 50, 361).
use dyad_common::quantile::quantile_sorted as quantile_type7_sorted;

// Standard normal quantile, accurate in both tails.
use dyad_common::normal::quantile as normal_quantile;
