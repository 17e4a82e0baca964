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

mod batch_means;
mod error;
mod estimators;
mod ladder;
mod windows;

use serde::{Deserialize, Serialize};

use crate::tempering::TemperedLogLikelihoods;

pub use error::EvidenceError;
pub use estimators::{stepping_stone, thermodynamic_integration};
pub use windows::{window_probabilities, WindowOdds};

/// Fewest recorded steps per rung for the batch-means error.
pub const MIN_STEPS: usize = 8;

/// Which estimator produced an [`EvidenceEstimate`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum EvidenceMethod {
    /// Thermodynamic integration over the ladder.
    ThermodynamicIntegration,
    /// Stepping-stone sampling.
    SteppingStone,
}

/// An evidence estimate with its error budget.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct EvidenceEstimate {
    /// Natural log of the evidence.
    #[serde(deserialize_with = "crate::serde_float::nan_if_null")]
    pub ln_z: f64,
    /// Monte-Carlo standard error of `ln_z` (batch means).
    #[serde(deserialize_with = "crate::serde_float::nan_if_null")]
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
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct EvidenceEstimates {
    /// Thermodynamic integration.
    pub thermodynamic_integration: EvidenceEstimate,
    /// Stepping-stone sampling.
    pub stepping_stone: EvidenceEstimate,
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
