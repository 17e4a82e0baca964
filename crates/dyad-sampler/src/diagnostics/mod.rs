//! Convergence diagnostics for ensemble MCMC output: integrated
//! autocorrelation time, rank-normalised split R-hat and bulk/tail effective
//! sample sizes.
//!
//! Pure functions over plain slices; nothing here knows about astronomy or
//! about the sampler's storage.
//!
//! # Layout of the draws
//! For one parameter the draws are *step-major*: `draws[step * n_walkers +
//! walker]`. For several parameters ([`diagnose`]) they are
//! `samples[(step * n_walkers + walker) * n_dim + dim]`.
//!
//! # Methods
//! - Integrated autocorrelation time: the normalised autocorrelation function
//!   of each walker's series (FFT, zero-padded to a power of two of at least
//!   twice the length), averaged over walkers, summed with Sokal's automatic
//!   window: the smallest lag `M` with `M >= c * tau(M)`, `c = 5`
//!   (Sokal 1997, "Monte Carlo methods in statistical mechanics", sect. 3;
//!   Goodman & Weare 2010, CAMCoS 5, 65, sect. 3). The estimate is trusted
//!   when the chain is longer than 50 `tau` (common practice).
//! - R-hat and ESS: Vehtari, Gelman, Simpson, Carpenter & Buerkner (2021),
//!   "Rank-normalization, folding, and localization: an improved R-hat for
//!   assessing convergence of MCMC", Bayesian Analysis 16, 667. Each walker
//!   is treated as one chain, each chain is split in two halves (the middle
//!   draw of an odd-length chain is dropped). R-hat is the larger of the
//!   bulk (rank-normalised) and tail (folded, rank-normalised) values; bulk
//!   ESS is the ESS of the rank-normalised split chains; tail ESS is the
//!   smaller of the ESS of the indicators `x <= q_0.05` and `x <= q_0.95`.
//!   The autocorrelation sum uses Geyer's initial positive and initial
//!   monotone sequences (Geyer 1992, Statistical Science 7, 473).
//!   Conventions (Blom offset 3/8, average ranks for ties, type-7 quantiles,
//!   the lower bound `1/log10(N)` on the autocorrelation time) follow the
//!   paper's reference implementation choices as also used by ArviZ 0.23.4,
//!   against which the tests check agreement to 1e-9 relative.
//!
//! # Invalid input
//! The `Result`-returning functions report bad shapes or non-finite draws as
//! [`DiagnosticsError`]. The plain `f64` convenience functions return NaN in
//! those cases (as general-purpose statistics libraries do).

use serde::Serialize;
use thiserror::Error;

/// Sokal's window constant `c`: the window is the smallest `M >= c tau(M)`.
pub const SOKAL_WINDOW_FACTOR: f64 = 5.0;

/// A chain is long enough to trust its autocorrelation time when it has more
/// than this many autocorrelation times of steps (common practice).
pub const MIN_STEPS_PER_TAU: f64 = 50.0;

/// Fewest steps for R-hat and ESS (each split half needs two draws).
pub const MIN_STEPS_RANK: usize = 4;

/// Fewest steps for an autocorrelation time.
pub const MIN_STEPS_AUTOCORR: usize = 2;

/// Why a diagnostic could not be computed.
#[derive(Debug, Clone, PartialEq, Error)]
#[non_exhaustive]
pub enum DiagnosticsError {
    /// The slice length does not match the declared shape.
    #[error("draws hold {len} values but the shape (steps {n_steps} x walkers {n_walkers} x dims {n_dim}) needs {expected}")]
    ShapeMismatch {
        /// Length of the slice given.
        len: usize,
        /// Declared number of steps.
        n_steps: usize,
        /// Declared number of walkers.
        n_walkers: usize,
        /// Declared number of parameters.
        n_dim: usize,
        /// Length the shape needs.
        expected: usize,
    },
    /// Too few steps for this diagnostic.
    #[error("{n_steps} steps given, this diagnostic needs at least {min}")]
    TooFewSteps {
        /// Steps given.
        n_steps: usize,
        /// Steps needed.
        min: usize,
    },
    /// No walkers or no parameters.
    #[error("need at least one walker and one parameter")]
    Empty,
    /// A draw is NaN or infinite.
    #[error("draw at flat index {index} is not finite ({value})")]
    NonFinite {
        /// Flat index into the slice given.
        index: usize,
        /// The offending value.
        value: f64,
    },
}

/// Integrated autocorrelation time of one parameter, with its window.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct AutocorrTime {
    /// Integrated autocorrelation time in steps, `1 + 2 sum_{t=1}^{M} rho(t)`.
    /// Infinite when some walker never moved (its autocorrelation is
    /// undefined and the chain has certainly not mixed).
    pub tau: f64,
    /// Sokal window `M` (lags summed).
    pub window: usize,
    /// Whether a window with `M >= c tau(M)` was found within the chain.
    pub window_found: bool,
    /// Steps in the chain.
    pub n_steps: usize,
    /// Whether `n_steps > 50 tau` and the window was found: only then is
    /// `tau` a trustworthy estimate.
    pub long_enough: bool,
}

/// Diagnostics of one parameter.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ParameterDiagnostics {
    /// Integrated autocorrelation time (steps).
    pub tau: f64,
    /// Sokal window used for `tau`.
    pub tau_window: usize,
    /// `n_steps > 50 tau` (and a window was found).
    pub tau_long_enough: bool,
    /// Rank-normalised split R-hat, max of bulk and folded.
    pub rhat: f64,
    /// Bulk effective sample size (draws, all walkers together).
    #[serde(rename = "effective_draws_bulk")]
    pub ess_bulk: f64,
    /// Tail effective sample size (5 and 95 per cent quantiles).
    #[serde(rename = "effective_draws_tail")]
    pub ess_tail: f64,
}

/// Diagnostics of every parameter of a run, in parameter order.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Diagnostics {
    /// Steps used.
    pub n_steps: usize,
    /// Walkers (each treated as a chain).
    pub n_walkers: usize,
    /// One entry per parameter.
    pub parameters: Vec<ParameterDiagnostics>,
}

impl Diagnostics {
    /// Largest R-hat over parameters (NaN entries ignored; NaN if all are).
    pub fn max_rhat(&self) -> f64 {
        fold_finite(self.parameters.iter().map(|p| p.rhat), f64::max)
    }
    /// Smallest bulk ESS over parameters.
    pub fn min_ess_bulk(&self) -> f64 {
        fold_finite(self.parameters.iter().map(|p| p.ess_bulk), f64::min)
    }
    /// Smallest tail ESS over parameters.
    pub fn min_ess_tail(&self) -> f64 {
        fold_finite(self.parameters.iter().map(|p| p.ess_tail), f64::min)
    }
    /// Largest autocorrelation time over parameters (infinite if any walker
    /// never moved).
    pub fn max_tau(&self) -> f64 {
        fold_finite(self.parameters.iter().map(|p| p.tau), f64::max)
    }
    /// Whether every parameter's chain is longer than 50 autocorrelation times.
    pub fn all_long_enough(&self) -> bool {
        self.parameters.iter().all(|p| p.tau_long_enough)
    }
}

fn fold_finite(values: impl Iterator<Item = f64>, f: fn(f64, f64) -> f64) -> f64 {
    values.filter(|v| !v.is_nan()).reduce(f).unwrap_or(f64::NAN)
}

/// Reusable FFT plans and buffers for autocorrelation estimates: call it
mod autocorr;
mod rank;

pub use autocorr::AutocorrEstimator;
pub use rank::DiagnosticsWorkspace;

/// Integrated autocorrelation time (steps) of one parameter, step-major
/// draws; NaN for an invalid shape or non-finite draws, infinite when a
/// walker never moved. See [`AutocorrEstimator`] for repeated calls.
pub fn integrated_autocorr_time(draws: &[f64], n_steps: usize, n_walkers: usize) -> f64 {
    autocorr_time(draws, n_steps, n_walkers).map_or(f64::NAN, |a| a.tau)
}

/// Integrated autocorrelation time with its Sokal window and the 50-tau
/// length check.
pub fn autocorr_time(
    draws: &[f64],
    n_steps: usize,
    n_walkers: usize,
) -> Result<AutocorrTime, DiagnosticsError> {
    AutocorrEstimator::new().estimate(draws, n_steps, n_walkers)
}

/// Rank-normalised split R-hat (max of bulk and folded), each walker a
/// chain; NaN on invalid input or when all draws are equal.
pub fn split_rhat(draws: &[f64], n_steps: usize, n_walkers: usize) -> f64 {
    DiagnosticsWorkspace::new()
        .split_rhat(draws, n_steps, n_walkers)
        .unwrap_or(f64::NAN)
}

/// Bulk effective sample size (draws of all walkers together); NaN on
/// invalid input or fewer than 8 steps (split halves shorter than 4).
pub fn ess_bulk(draws: &[f64], n_steps: usize, n_walkers: usize) -> f64 {
    DiagnosticsWorkspace::new()
        .ess_bulk(draws, n_steps, n_walkers)
        .unwrap_or(f64::NAN)
}

/// Tail effective sample size (min over the 5 and 95 per cent quantile
/// indicators); NaN on invalid input or fewer than 8 steps.
pub fn ess_tail(draws: &[f64], n_steps: usize, n_walkers: usize) -> f64 {
    DiagnosticsWorkspace::new()
        .ess_tail(draws, n_steps, n_walkers)
        .unwrap_or(f64::NAN)
}

/// Diagnostics of every parameter from `samples[(step * n_walkers + walker) *
/// n_dim + dim]`.
pub fn diagnose(
    samples: &[f64],
    n_steps: usize,
    n_walkers: usize,
    n_dim: usize,
) -> Result<Diagnostics, DiagnosticsError> {
    DiagnosticsWorkspace::new().diagnose(samples, n_steps, n_walkers, n_dim)
}

/// Reusable buffers for all diagnostics (an [`AutocorrEstimator`] plus the
fn check_shape(
    draws: &[f64],
    n_steps: usize,
    n_walkers: usize,
    n_dim: usize,
    min_steps: usize,
) -> Result<(), DiagnosticsError> {
    if n_walkers == 0 || n_dim == 0 {
        return Err(DiagnosticsError::Empty);
    }
    let expected = n_steps
        .checked_mul(n_walkers)
        .and_then(|x| x.checked_mul(n_dim));
    if expected != Some(draws.len()) {
        return Err(DiagnosticsError::ShapeMismatch {
            len: draws.len(),
            n_steps,
            n_walkers,
            n_dim,
            expected: expected.unwrap_or(usize::MAX),
        });
    }
    if n_steps < min_steps {
        return Err(DiagnosticsError::TooFewSteps {
            n_steps,
            min: min_steps,
        });
    }
    if let Some((index, &value)) = draws.iter().enumerate().find(|(_, x)| !x.is_finite()) {
        return Err(DiagnosticsError::NonFinite { index, value });
    }
    Ok(())
}

/// `out[walker * n_steps + step] = samples[(step * n_walkers + walker) * n_dim + dim]`.
fn transpose_to_chains(
    samples: &[f64],
    n_steps: usize,
    n_walkers: usize,
    n_dim: usize,
    dim: usize,
    out: &mut [f64],
) {
    for step in 0..n_steps {
        for walker in 0..n_walkers {
            out[walker * n_steps + step] = samples[(step * n_walkers + walker) * n_dim + dim];
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bad_shapes_are_errors() {
        let d = vec![0.0; 10];
        assert!(matches!(
            autocorr_time(&d, 3, 3),
            Err(DiagnosticsError::ShapeMismatch { .. })
        ));
        assert!(matches!(
            DiagnosticsWorkspace::new().split_rhat(&d, 2, 5),
            Err(DiagnosticsError::TooFewSteps { .. })
        ));
        let mut e = vec![0.0; 12];
        e[7] = f64::NAN;
        assert!(matches!(
            diagnose(&e, 4, 3, 1),
            Err(DiagnosticsError::NonFinite { index: 7, .. })
        ));
        assert!(split_rhat(&d, 3, 3).is_nan());
    }

    #[test]
    fn stuck_walker_gives_infinite_tau() {
        let mut d: Vec<f64> = (0..200).map(|i| ((i * 7919) % 101) as f64).collect();
        for step in 0..100 {
            d[step * 2 + 1] = 3.0;
        }
        let a = autocorr_time(&d, 100, 2).unwrap();
        assert!(a.tau.is_infinite() && !a.long_enough);
    }
}
