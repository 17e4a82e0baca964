//! The checks every estimator makes of its ladder and series.

use super::{EvidenceError, MIN_STEPS};

/// Checked view of a ladder and its series.
pub(super) struct Ladder<'a> {
    pub(super) betas: &'a [f64],
    pub(super) series: Vec<&'a [f64]>,
    pub(super) n_walkers: usize,
    pub(super) n_steps: usize,
}

pub(super) fn check_ladder<'a, L: AsRef<[f64]>>(
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
