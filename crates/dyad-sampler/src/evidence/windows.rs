//! Posterior odds of windows (e.g. period ranges) from their evidences.

use serde::Serialize;

use super::EvidenceError;

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

    #[test]
    fn window_inputs_are_checked() {
        assert!(window_probabilities(&[0.0], &[0.1, 0.1], &[1.0]).is_err());
        assert!(window_probabilities(&[0.0], &[0.1], &[0.0]).is_err());
        assert!(window_probabilities(&[f64::NAN], &[0.1], &[1.0]).is_err());
        assert!(window_probabilities(&[0.0], &[-0.1], &[1.0]).is_err());
        assert!(window_probabilities(&[], &[], &[]).unwrap().is_empty());
    }
}
