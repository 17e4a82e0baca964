//! Thermodynamic integration (corrected trapezoid rule) and stepping-stone
//! sampling over plain slices (method and sources in the module docs of
//! [`super`]).

use super::batch_means::batch_means_error;
use super::ladder::check_ladder;
use super::{EvidenceError, EvidenceEstimate, EvidenceMethod};

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
}
