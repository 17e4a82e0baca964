//! Why an evidence estimate or a window comparison could not be made.

use thiserror::Error;

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
