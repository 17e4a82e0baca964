//! Small helpers that several dyad crates need, written once.
//!
//! What it is for: the few numerical and file-system routines that the
//! model, the sampler, the report and the workflows would otherwise each
//! write for themselves — type-7 sample quantiles ([`quantile`]), the
//! standard normal distribution function and its inverse ([`normal`]),
//! SplitMix64 seed mixing ([`seed`]), atomic file writes ([`atomic`]), the
//! CSV dialect of every table written ([`csv_table`]) and the rounding of a
//! burn-in share to whole steps ([`burn_in_steps`]).
//!
//! What it is not for: anything about orbits, priors, samplers or reports.
//! It depends on no other dyad crate, so every one of them can use it.
//!
//! ```
//! use dyad_common::quantile::quantile_sorted;
//! assert_eq!(quantile_sorted(&[1.0, 2.0, 3.0, 4.0, 5.0], 0.25), 2.0);
//! assert_eq!(dyad_common::burn_in_steps(0.5, 7), 4);
//! ```
#![deny(missing_docs)]

pub mod atomic;
pub mod csv_table;
pub mod normal;
pub mod quantile;
pub mod seed;

/// Steps discarded as burn-in when a share `fraction` of `steps` is:
/// rounded to the nearest whole step (halves away from zero), so that a
/// fit, its resumption and a calibration all discard the very same steps.
pub fn burn_in_steps(fraction: f64, steps: u64) -> u64 {
    (fraction * steps as f64).round() as u64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn burn_in_rounds_to_the_nearest_step() {
        assert_eq!(burn_in_steps(0.5, 8000), 4000);
        assert_eq!(burn_in_steps(0.3, 5), 2); // 1.5 rounds up
        assert_eq!(burn_in_steps(0.25, 5), 1); // 1.25 rounds down
        assert_eq!(burn_in_steps(0.0, 100), 0);
    }
}
