//! Evidence (marginal likelihood) from tempered chains, and posterior odds of
//! period windows.
//!
//! The input is, for each inverse temperature `beta_k` of a fixed ladder
//! (descending, `beta_0 = 1`, the hottest `beta = 0` samples the prior), the
//! log-likelihood of every walker at every recorded step, step-major
//! `[step * n_walkers + walker]`, as produced by parallel tempering
//! ([`TemperedLogLikelihoods`]). Nothing here runs a sampler.
//!
//! # Thermodynamic integration
//! `ln Z = integral_0^1 E_beta[ln L] d beta` (Gelman & Meng 1998, Stat. Sci.
//! 13, 163; Lartillot & Philippe 2006, Syst. Biol. 55, 195). Since
//! `d/d beta E_beta[ln L] = Var_beta[ln L]`, each rung also gives the slope of
//! the integrand, and we use the corrected trapezoid rule that uses it
//! (cubic Hermite quadrature; Friel, Hurn & Wyse 2014, Stat. Comput. 24, 709,
//! eq. 10). Between positive temperatures the rule is applied in `u = ln beta`
//! to `g(u) = beta E_beta[ln L]`, with `g'(u) = beta (E + beta Var)`, because
//! ladders are close to geometric and the integrand varies on a logarithmic
//! scale there; on the last interval `[0, beta_min]` it is applied in `beta`.
//! The estimate is linear in the per-rung means and variances.
//!
//! - Discretisation error. Stepping-stone sampling has none: it is
//!   unbiased for the ratio of each pair of rungs whatever the ladder (Xie
//!   et al. 2011). So when both estimators run on the same chains
//!   ([`estimate_evidence`]), the quadrature error of thermodynamic
//!   integration is estimated by `|ln Z(TI) - ln Z(SS)|` (its own noise is
//!   of the order of the Monte-Carlo errors). Alone
//!   ([`thermodynamic_integration`]), it is estimated by Richardson's rule
//!   for a fourth-order quadrature, `|ln Z(ladder) - ln Z(coarse)| / 15`,
//!   the larger over two coarse ladders that drop every other interior rung
//!   (the odd ones, then the even ones; beta = 1 and beta = 0 always kept).
//!   The unscaled difference, a bound that over-states the error by one to
//!   two orders of magnitude on ladders that are coarse near beta = 0 (a
//!   posterior much narrower than its prior), is kept as
//!   [`EvidenceEstimate::coarse_ladder_bound`]; it used to be quoted as the
//!   error and made errors of tens to hundreds in ln Z where the estimates
//!   scatter by 0.1 over seeds.
//! - Monte-Carlo error: the quadrature is a fixed linear combination of the
//!   per-step, walker-averaged series `ln L_k(t)` and `(ln L_k(t) - E_k)^2`,
//!   so the combined per-step series is formed and its mean's variance is
//!   estimated by batch means. Correlations between rungs (from swaps) are so
//!   included.
//!
//! # Stepping-stone sampling
//! Xie, Lewis, Fan, Kuo & Chen (2011, Syst. Biol. 60, 150), eqs. 6-9:
//! `ln Z = sum_k ln r_k`, `r_k = E_{beta_{k+1}}[L^{beta_k - beta_{k+1}}]`
//! estimated from the draws of the hotter rung with the largest
//! log-likelihood factored out (log-sum-exp). Monte-Carlo error by the delta
//! method, `d ln Z = sum_k d r_k / r_k`, of the per-step series of importance
//! weights, again by batch means so autocorrelation and swaps are included
//! (Xie et al. eq. 11 is the independent-draws special case).
//!
//! # Batch means
//! Batches of `b = max(ceil(sqrt(n)), ceil(5 tau))` steps, `tau` the
//! integrated autocorrelation time of the combined series (Sokal window), at
//! most `n / 4` so there are at least four batches (Flegal & Jones 2010, Ann.
//! Stat. 38, 1034, for `b ~ sqrt(n)`). The oldest steps that do not fill a
//! batch are left out of the error estimate (not of the estimate itself).
//!
//! # Window comparison
//! [`window_probabilities`]: each window's prior is the global prior
//! restricted to the window and renormalised, so its posterior probability is
//! proportional to (global prior mass of the window) x (evidence of the
//! window).

use serde::Serialize;
use thiserror::Error;

use crate::diagnostics::AutocorrEstimator;
use crate::tempering::TemperedLogLikelihoods;

/// Fewest recorded steps per rung for the batch-means error.
pub const MIN_STEPS: usize = 8;

/// Which estimator produced an [`EvidenceEstimate`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum EvidenceMethod {
    /// Thermodynamic integration over the ladder.
    ThermodynamicIntegration,
    /// Stepping-stone sampling.
    SteppingStone,
}

/// An evidence estimate with its error budget.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct EvidenceEstimate {
    /// Natural log of the evidence.
    pub ln_z: f64,
    /// Monte-Carlo standard error of `ln_z` (batch means).
    pub mc_error: f64,
    /// Estimated quadrature error (thermodynamic integration only; see the
    /// module docs for how it is estimated).
    pub discretisation_error: Option<f64>,
    /// Largest change of ln Z when every other interior rung is dropped: a
    /// conservative bound on the quadrature error, for diagnosis only
    /// (thermodynamic integration only).
    pub coarse_ladder_bound: Option<f64>,
    /// Whether the batches behind `mc_error` were at least five
    /// autocorrelation times long (with at least four batches); if not, the
    /// chains are too short and `mc_error` is likely an underestimate.
    pub mc_error_reliable: bool,
    /// The estimator.
    pub method: EvidenceMethod,
}

impl EvidenceEstimate {
    /// Monte-Carlo and discretisation errors added in quadrature.
    pub fn total_error(&self) -> f64 {
        let d = self.discretisation_error.unwrap_or(0.0);
        (self.mc_error * self.mc_error + d * d).sqrt()
    }
}

/// Both estimators on one set of tempered chains.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct EvidenceEstimates {
    /// Thermodynamic integration.
    pub thermodynamic_integration: EvidenceEstimate,
    /// Stepping-stone sampling.
    pub stepping_stone: EvidenceEstimate,
}

/// Posterior standing of one window (e.g. a range of orbital periods).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct WindowOdds {
    /// Log evidence of the window (prior renormalised within it).
    pub ln_z: f64,
    /// Its standard error, as given.
    pub ln_z_error: f64,
    /// Global prior mass of the window, as given.
    pub prior_mass: f64,
    /// Posterior probability among the windows given.
    pub posterior_probability: f64,
    /// Standard error of the posterior probability (delta method).
    pub posterior_probability_error: f64,
    /// `ln(p_k / p_best)`, 0 for the most probable window.
    pub ln_odds_vs_best: f64,
    /// Standard error of the log odds (0 for the best window itself).
    pub ln_odds_error: f64,
    /// Whether this is the most probable window.
    pub is_best: bool,
}

/// Why an evidence estimate could not be made.
#[derive(Debug, Clone, PartialEq, Error)]
#[non_exhaustive]
pub enum EvidenceError {
    /// Too few temperatures for the estimator.
    #[error("{got} temperatures given, this estimator needs at least {min}")]
    TooFewTemperatures {
        /// Temperatures given.
        got: usize,
        /// Temperatures needed.
        min: usize,
    },
    /// The number of series differs from the number of temperatures.
    #[error("{n_betas} inverse temperatures but {n_series} log-likelihood series")]
    LengthMismatch {
        /// Inverse temperatures given.
        n_betas: usize,
        /// Series given.
        n_series: usize,
    },
    /// The coldest rung is not the posterior.
    #[error("the coldest inverse temperature must be 1, got {0}")]
    ColdestNotOne(f64),
    /// The hottest rung is not the prior.
    #[error("the hottest inverse temperature must be 0 (the prior) for an evidence estimate, got {0}; run the ladder up to infinite temperature")]
    HottestNotPrior(f64),
    /// The ladder is not finite and strictly descending in [0, 1].
    #[error("inverse temperatures must be finite, in [0, 1] and strictly descending; beta[{index}] = {value}")]
    BadLadder {
        /// Offending index.
        index: usize,
        /// Its value.
        value: f64,
    },
    /// No walkers.
    #[error("the number of walkers must be positive")]
    NoWalkers,
    /// A series is not a whole number of steps.
    #[error("temperature {temperature}: {len} values is not a whole number of steps of {n_walkers} walkers")]
    RaggedSeries {
        /// Rung index.
        temperature: usize,
        /// Values in its series.
        len: usize,
        /// Walkers per step.
        n_walkers: usize,
    },
    /// Rungs have different numbers of steps.
    #[error("temperature {temperature} has {n_steps} steps but temperature 0 has {expected}")]
    UnequalSteps {
        /// Rung index.
        temperature: usize,
        /// Its steps.
        n_steps: usize,
        /// Steps of rung 0.
        expected: usize,
    },
    /// Too few steps for the batch-means error.
    #[error("{n_steps} recorded steps per temperature, at least {min} are needed")]
    TooFewSteps {
        /// Steps given.
        n_steps: usize,
        /// Steps needed.
        min: usize,
    },
    /// A log-likelihood is NaN or infinite.
    #[error("temperature {temperature}: log-likelihood at index {index} is not finite ({value})")]
    NonFinite {
        /// Rung index.
        temperature: usize,
        /// Index in its series.
        index: usize,
        /// The value.
        value: f64,
    },
    /// Window inputs of different lengths.
    #[error(
        "window inputs differ in length: {n_ln_z} ln Z, {n_errors} errors, {n_masses} prior masses"
    )]
    WindowLengthMismatch {
        /// ln Z values.
        n_ln_z: usize,
        /// Errors.
        n_errors: usize,
        /// Prior masses.
        n_masses: usize,
    },
    /// A window input is out of range.
    #[error("window {index}: {reason}")]
    BadWindow {
        /// Window index.
        index: usize,
        /// What is wrong.
        reason: &'static str,
    },
}

/// Checked view of a ladder and its series.
struct Ladder<'a> {
    betas: &'a [f64],
    series: Vec<&'a [f64]>,
    n_walkers: usize,
    n_steps: usize,
}

fn check_ladder<'a, L: AsRef<[f64]>>(
    betas: &'a [f64],
    n_walkers: usize,
    log_likelihoods: &'a [L],
    min_temperatures: usize,
) -> Result<Ladder<'a>, EvidenceError> {
    if betas.len() < min_temperatures {
        return Err(EvidenceError::TooFewTemperatures {
            got: betas.len(),
            min: min_temperatures,
        });
    }
    if betas.len() != log_likelihoods.len() {
        return Err(EvidenceError::LengthMismatch {
            n_betas: betas.len(),
            n_series: log_likelihoods.len(),
        });
    }
    if n_walkers == 0 {
        return Err(EvidenceError::NoWalkers);
    }
    for (index, &value) in betas.iter().enumerate() {
        let in_range = value.is_finite() && (0.0..=1.0).contains(&value);
        let descending = index == 0 || value < betas[index - 1];
        if !(in_range && descending) {
            return Err(EvidenceError::BadLadder { index, value });
        }
    }
    if (betas[0] - 1.0).abs() > 1e-12 {
        return Err(EvidenceError::ColdestNotOne(betas[0]));
    }
    let hottest = betas[betas.len() - 1];
    if hottest != 0.0 {
        return Err(EvidenceError::HottestNotPrior(hottest));
    }
    let series: Vec<&[f64]> = log_likelihoods.iter().map(AsRef::as_ref).collect();
    let n_steps = series[0].len() / n_walkers;
    for (temperature, s) in series.iter().enumerate() {
        if !s.len().is_multiple_of(n_walkers) {
            return Err(EvidenceError::RaggedSeries {
                temperature,
                len: s.len(),
                n_walkers,
            });
        }
        if s.len() / n_walkers != n_steps {
            return Err(EvidenceError::UnequalSteps {
                temperature,
                n_steps: s.len() / n_walkers,
                expected: n_steps,
            });
        }
        if let Some((index, &value)) = s.iter().enumerate().find(|(_, v)| !v.is_finite()) {
            return Err(EvidenceError::NonFinite {
                temperature,
                index,
                value,
            });
        }
    }
    if n_steps < MIN_STEPS {
        return Err(EvidenceError::TooFewSteps {
            n_steps,
            min: MIN_STEPS,
        });
    }
    Ok(Ladder {
        betas,
        series,
        n_walkers,
        n_steps,
    })
}

/// Quadrature weights `(alpha_k, gamma_k)` with
/// `ln Z ~= sum_k alpha_k E_k + gamma_k V_k` for the rungs `nodes` (indices
/// into `betas`, descending, first 1, last 0), by the corrected trapezoid rule
/// in ln beta between positive rungs and in beta on the last interval
/// (Friel, Hurn & Wyse 2014, eq. 10: `integral_a^b f = h/2 (f_a + f_b) +
/// h^2/12 (f'_a - f'_b) + O(h^5)`).
fn ti_weights(betas: &[f64], nodes: &[usize], alpha: &mut [f64], gamma: &mut [f64]) {
    alpha.iter_mut().for_each(|a| *a = 0.0);
    gamma.iter_mut().for_each(|g| *g = 0.0);
    for pair in nodes.windows(2) {
        let (cold, hot) = (pair[0], pair[1]);
        let (b_cold, b_hot) = (betas[cold], betas[hot]);
        if b_hot > 0.0 {
            // In u = ln beta: g = beta E, g' = beta E + beta^2 V.
            // a = u_hot < b = u_cold, so
            // integral = h/2 (g_hot + g_cold) + h^2/12 (g'_hot - g'_cold).
            let h = b_cold.ln() - b_hot.ln();
            let c = h * h / 12.0;
            alpha[hot] += 0.5 * h * b_hot + c * b_hot;
            alpha[cold] += 0.5 * h * b_cold - c * b_cold;
            gamma[hot] += c * b_hot * b_hot;
            gamma[cold] -= c * b_cold * b_cold;
        } else {
            // In beta on [0, b_cold]: f = E, f' = V.
            let h = b_cold - b_hot;
            let c = h * h / 12.0;
            alpha[hot] += 0.5 * h;
            alpha[cold] += 0.5 * h;
            gamma[hot] += c;
            gamma[cold] -= c;
        }
    }
}

/// Thermodynamic-integration evidence over plain slices: `betas` descending
/// from 1 to 0, `log_likelihoods[k]` step-major for rung `k`. Needs at least
/// three temperatures (for the discretisation error).
pub fn thermodynamic_integration<L: AsRef<[f64]>>(
    betas: &[f64],
    n_walkers: usize,
    log_likelihoods: &[L],
) -> Result<EvidenceEstimate, EvidenceError> {
    let ladder = check_ladder(betas, n_walkers, log_likelihoods, 3)?;
    let k = betas.len();
    let (n_steps, n_walkers) = (ladder.n_steps, ladder.n_walkers);
    let n_draws = (n_steps * n_walkers) as f64;

    // Per-rung mean and (population) variance of ln L over all draws.
    let means: Vec<f64> = ladder
        .series
        .iter()
        .map(|s| s.iter().sum::<f64>() / n_draws)
        .collect();
    let variances: Vec<f64> = ladder
        .series
        .iter()
        .zip(&means)
        .map(|(s, m)| s.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / n_draws)
        .collect();

    let mut alpha = vec![0.0; k];
    let mut gamma = vec![0.0; k];
    let quadrature = |alpha: &[f64], gamma: &[f64]| -> f64 {
        (0..k)
            .map(|i| alpha[i] * means[i] + gamma[i] * variances[i])
            .sum()
    };
    // Two coarse ladders, each dropping every other interior rung (the odd
    // and the even ones), always keeping beta = 1 and beta = 0: one of them
    // may match the full ladder by accident, both rarely do.
    let mut coarse_estimates = [0.0; 2];
    for (kept, estimate) in coarse_estimates.iter_mut().enumerate() {
        let coarse: Vec<usize> = (0..k)
            .filter(|&i| i == 0 || i == k - 1 || i % 2 == kept)
            .collect();
        ti_weights(betas, &coarse, &mut alpha, &mut gamma);
        *estimate = quadrature(&alpha, &gamma);
    }
    let all: Vec<usize> = (0..k).collect();
    ti_weights(betas, &all, &mut alpha, &mut gamma);
    let ln_z = quadrature(&alpha, &gamma);
    let coarse_ladder_bound = coarse_estimates
        .iter()
        .map(|c| (ln_z - c).abs())
        .fold(0.0, f64::max);
    // Richardson: halving the spacing of a fourth-order rule divides its
    // error by 2^4, so error(full) ~ |full - coarse| / (2^4 - 1).
    let discretisation_error = coarse_ladder_bound / 15.0;
    // Combined per-step series whose mean is ln Z (variances linearised
    // about the rung means).
    let combined: Vec<f64> = (0..n_steps)
        .map(|t| {
            (0..k)
                .map(|i| {
                    let step = &ladder.series[i][t * n_walkers..(t + 1) * n_walkers];
                    let mean = step.iter().sum::<f64>() / n_walkers as f64;
                    let sq = step
                        .iter()
                        .map(|x| (x - means[i]) * (x - means[i]))
                        .sum::<f64>()
                        / n_walkers as f64;
                    alpha[i] * mean + gamma[i] * sq
                })
                .sum()
        })
        .collect();
    let (mc_error, mc_error_reliable) = batch_means_error(&combined);
    Ok(EvidenceEstimate {
        ln_z,
        mc_error,
        mc_error_reliable,
        discretisation_error: Some(discretisation_error),
        coarse_ladder_bound: Some(coarse_ladder_bound),
        method: EvidenceMethod::ThermodynamicIntegration,
    })
}

/// Stepping-stone evidence over plain slices: `betas` descending from 1 to
/// 0, `log_likelihoods[k]` step-major for rung `k`.
pub fn stepping_stone<L: AsRef<[f64]>>(
    betas: &[f64],
    n_walkers: usize,
    log_likelihoods: &[L],
) -> Result<EvidenceEstimate, EvidenceError> {
    let ladder = check_ladder(betas, n_walkers, log_likelihoods, 2)?;
    let k = betas.len();
    let (n_steps, n_walkers) = (ladder.n_steps, ladder.n_walkers);
    let mut ln_z = 0.0;
    let mut combined = vec![0.0; n_steps];
    let mut weights = vec![0.0; n_steps];
    for cold in 0..k - 1 {
        let hot = cold + 1;
        let delta = ladder.betas[cold] - ladder.betas[hot];
        let draws = ladder.series[hot];
        // Factor out the largest weight (Xie et al. 2011, eq. 9).
        let max = draws.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        for (w, step) in weights.iter_mut().zip(draws.chunks_exact(n_walkers)) {
            *w = step.iter().map(|x| (delta * (x - max)).exp()).sum::<f64>() / n_walkers as f64;
        }
        let mean_weight = weights.iter().sum::<f64>() / n_steps as f64;
        ln_z += delta * max + mean_weight.ln();
        for (c, w) in combined.iter_mut().zip(&weights) {
            *c += w / mean_weight;
        }
    }
    let (mc_error, mc_error_reliable) = batch_means_error(&combined);
    Ok(EvidenceEstimate {
        ln_z,
        mc_error,
        mc_error_reliable,
        discretisation_error: None,
        coarse_ladder_bound: None,
        method: EvidenceMethod::SteppingStone,
    })
}

/// Thermodynamic integration on the sampler's tempered output.
pub fn thermodynamic_integration_tempered(
    tempered: &TemperedLogLikelihoods,
) -> Result<EvidenceEstimate, EvidenceError> {
    thermodynamic_integration(
        &tempered.betas,
        tempered.n_walkers,
        &tempered.log_likelihoods,
    )
}

/// Stepping-stone sampling on the sampler's tempered output.
pub fn stepping_stone_tempered(
    tempered: &TemperedLogLikelihoods,
) -> Result<EvidenceEstimate, EvidenceError> {
    stepping_stone(
        &tempered.betas,
        tempered.n_walkers,
        &tempered.log_likelihoods,
    )
}

/// Both estimators on the sampler's tempered output; the discretisation
/// error of thermodynamic integration is its difference from stepping stone
/// (see the module docs).
pub fn estimate_evidence(
    tempered: &TemperedLogLikelihoods,
) -> Result<EvidenceEstimates, EvidenceError> {
    let mut thermodynamic_integration = thermodynamic_integration_tempered(tempered)?;
    let stepping_stone = stepping_stone_tempered(tempered)?;
    thermodynamic_integration.discretisation_error =
        Some((thermodynamic_integration.ln_z - stepping_stone.ln_z).abs());
    Ok(EvidenceEstimates {
        thermodynamic_integration,
        stepping_stone,
    })
}

/// Standard error of the mean of `series` by batch means (see the module
/// docs for the batch size), and whether the batches were long enough.
/// Zero for a constant series.
fn batch_means_error(series: &[f64]) -> (f64, bool) {
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

/// Posterior probabilities and odds of windows (e.g. period ranges) from
/// their evidences: `p_k = m_k Z_k / sum_j m_j Z_j` with `m_k` the global
/// prior mass of window `k` (the windows need not cover the whole prior;
/// probabilities are then conditional on the windows given). Errors by the
/// delta method, treating the windows' ln Z errors as independent (separate
/// runs): `d p_k / d ln Z_j = p_k (delta_kj - p_j)`.
pub fn window_probabilities(
    ln_z: &[f64],
    ln_z_err: &[f64],
    prior_mass: &[f64],
) -> Result<Vec<WindowOdds>, EvidenceError> {
    if ln_z.len() != ln_z_err.len() || ln_z.len() != prior_mass.len() {
        return Err(EvidenceError::WindowLengthMismatch {
            n_ln_z: ln_z.len(),
            n_errors: ln_z_err.len(),
            n_masses: prior_mass.len(),
        });
    }
    for index in 0..ln_z.len() {
        if !ln_z[index].is_finite() {
            return Err(EvidenceError::BadWindow {
                index,
                reason: "ln Z is not finite",
            });
        }
        if !(ln_z_err[index].is_finite() && ln_z_err[index] >= 0.0) {
            return Err(EvidenceError::BadWindow {
                index,
                reason: "the ln Z error must be finite and non-negative",
            });
        }
        if !(prior_mass[index].is_finite() && prior_mass[index] > 0.0) {
            return Err(EvidenceError::BadWindow {
                index,
                reason: "the prior mass must be finite and positive",
            });
        }
    }
    if ln_z.is_empty() {
        return Ok(Vec::new());
    }
    let ln_weight: Vec<f64> = ln_z
        .iter()
        .zip(prior_mass)
        .map(|(l, m)| l + m.ln())
        .collect();
    let (best, &ln_best) =
        ln_weight
            .iter()
            .enumerate()
            .fold((0, &f64::NEG_INFINITY), |acc, (i, w)| {
                if *w > *acc.1 {
                    (i, w)
                } else {
                    acc
                }
            });
    let sum: f64 = ln_weight.iter().map(|w| (w - ln_best).exp()).sum();
    let prob: Vec<f64> = ln_weight
        .iter()
        .map(|w| (w - ln_best).exp() / sum)
        .collect();
    let odds = (0..ln_z.len())
        .map(|k| {
            let p_k = prob[k];
            let var_p: f64 = (0..ln_z.len())
                .map(|j| {
                    let kron = if j == k { 1.0 } else { 0.0 };
                    let d = p_k * (kron - prob[j]) * ln_z_err[j];
                    d * d
                })
                .sum();
            let ln_odds_error = if k == best {
                0.0
            } else {
                (ln_z_err[k] * ln_z_err[k] + ln_z_err[best] * ln_z_err[best]).sqrt()
            };
            WindowOdds {
                ln_z: ln_z[k],
                ln_z_error: ln_z_err[k],
                prior_mass: prior_mass[k],
                posterior_probability: p_k,
                posterior_probability_error: var_p.sqrt(),
                ln_odds_vs_best: ln_weight[k] - ln_best,
                ln_odds_error,
                is_best: k == best,
            }
        })
        .collect();
    Ok(odds)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rule(betas: &[f64], f: &dyn Fn(f64) -> (f64, f64)) -> f64 {
        let nodes: Vec<usize> = (0..betas.len()).collect();
        let mut alpha = vec![0.0; betas.len()];
        let mut gamma = vec![0.0; betas.len()];
        ti_weights(betas, &nodes, &mut alpha, &mut gamma);
        betas
            .iter()
            .enumerate()
            .map(|(i, &b)| {
                let (e, v) = f(b);
                alpha[i] * e + gamma[i] * v
            })
            .sum()
    }

    fn geometric(ratio: f64, n: usize) -> Vec<f64> {
        (0..n as i32)
            .map(|i| ratio.powi(i))
            .chain(std::iter::once(0.0))
            .collect()
    }

    #[test]
    fn hermite_rule_is_exact_for_cubics_in_beta() {
        // On [0, 1] alone the rule works in beta and is exact for cubics
        // (Friel et al. 2014, eq. 10; analytic integral of 1 + b^3 is 5/4).
        let got = rule(&[1.0, 0.0], &|b| (1.0 + b * b * b, 3.0 * b * b));
        assert!((got - 1.25).abs() < 1e-15, "{got}");
    }

    #[test]
    fn hermite_rule_in_ln_beta_converges_at_fourth_order() {
        // E = 2 + 3 beta + exp(beta), V = 3 + exp(beta); integral over [0, 1]
        // is 2 + 3/2 + e - 1 (analytic). Halving the ln-beta spacing must
        // cut the error by about 2^4 = 16 (the rule is fourth order).
        let f = |b: f64| (2.0 + 3.0 * b + b.exp(), 3.0 + b.exp());
        let exact = 3.5 + std::f64::consts::E - 1.0;
        let coarse = rule(&geometric(0.6, 40), &f) - exact;
        let fine = rule(&geometric(0.6f64.sqrt(), 80), &f) - exact;
        let ratio = coarse / fine;
        assert!(
            coarse.abs() < 1e-2 && (12.0..20.0).contains(&ratio),
            "{coarse} {fine} {ratio}"
        );
    }

    #[test]
    fn ladder_checks() {
        let ll = vec![vec![0.0; 16]; 3];
        let ok = thermodynamic_integration(&[1.0, 0.5, 0.0], 2, &ll);
        assert!(ok.is_ok());
        assert!(matches!(
            thermodynamic_integration(&[1.0, 0.5, 0.1], 2, &ll),
            Err(EvidenceError::HottestNotPrior(_))
        ));
        assert!(matches!(
            stepping_stone(&[1.0, 0.5, 0.6], 2, &ll),
            Err(EvidenceError::BadLadder { index: 2, .. })
        ));
        assert!(matches!(
            stepping_stone(&[0.9, 0.5, 0.0], 2, &ll),
            Err(EvidenceError::ColdestNotOne(_))
        ));
        assert!(matches!(
            stepping_stone(&[1.0, 0.5, 0.0], 3, &ll),
            Err(EvidenceError::RaggedSeries { .. })
        ));
        assert!(matches!(
            stepping_stone(&[1.0, 0.5, 0.0], 4, &ll),
            Err(EvidenceError::TooFewSteps { .. })
        ));
        let mut bad = ll.clone();
        bad[1][3] = f64::NEG_INFINITY;
        assert!(matches!(
            stepping_stone(&[1.0, 0.5, 0.0], 2, &bad),
            Err(EvidenceError::NonFinite {
                temperature: 1,
                index: 3,
                ..
            })
        ));
        // A constant likelihood L = e^0 = 1 has ln Z = 0 exactly, no MC error.
        let ss = stepping_stone(&[1.0, 0.5, 0.0], 2, &ll).unwrap();
        assert_eq!((ss.ln_z, ss.mc_error), (0.0, 0.0));
    }

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

    #[test]
    fn window_inputs_are_checked() {
        assert!(window_probabilities(&[0.0], &[0.1, 0.1], &[1.0]).is_err());
        assert!(window_probabilities(&[0.0], &[0.1], &[0.0]).is_err());
        assert!(window_probabilities(&[f64::NAN], &[0.1], &[1.0]).is_err());
        assert!(window_probabilities(&[0.0], &[-0.1], &[1.0]).is_err());
        assert!(window_probabilities(&[], &[], &[]).unwrap().is_empty());
    }
}
