//! The regularised incomplete beta function and the beta quantile, accurate
//! in both tails (for the beta prior's cdf and quantile).

use statrs::function::beta::{checked_beta_reg, inv_beta_reg, ln_beta};

/// Regularised incomplete beta function I_x(alpha, beta).
///
/// statrs `beta_reg` (a continued fraction) treats x within 2.2e-16 of 0 or 1
/// as exactly 0 or 1; there the power series
/// I_x(a, b) = x^a / B(a, b) * sum_n (1-b)_n / n! * x^n / (a + n)
/// (Abramowitz & Stegun, Handbook of Mathematical Functions, 1964, eq. 26.5.4;
/// from memory) is used instead, and its reflection near 1.
pub(super) fn incomplete_beta(alpha: f64, beta: f64, x: f64) -> f64 {
    const SERIES_BELOW: f64 = 1e-8;
    if x <= 0.0 {
        0.0
    } else if x >= 1.0 {
        1.0
    } else if x < SERIES_BELOW {
        incomplete_beta_series(alpha, beta, x)
    } else if 1.0 - x < SERIES_BELOW {
        1.0 - incomplete_beta_series(beta, alpha, 1.0 - x)
    } else {
        checked_beta_reg(alpha, beta, x).unwrap_or(f64::NAN)
    }
}

fn incomplete_beta_series(alpha: f64, beta: f64, x: f64) -> f64 {
    let mut coefficient = 1.0;
    let mut sum = 1.0 / alpha;
    for n in 1..50 {
        let n = f64::from(n);
        coefficient *= (n - beta) * x / n;
        let term = coefficient / (alpha + n);
        sum += term;
        if term.abs() <= 1e-17 * sum.abs() {
            break;
        }
    }
    (alpha * x.ln() - ln_beta(alpha, beta)).exp() * sum
}

/// Quantile of Beta(alpha, beta) for 0 < p < 1.
///
/// Starts from the AS 109 inverse (statrs `inv_beta_reg`) and refines it by
/// Newton's method in ln x on I_x(alpha, beta) = p, kept inside a bracket
/// (bisecting geometrically when a step leaves it), which stays accurate for
/// p far in the lower tail where the density may diverge. Upper-half
/// probabilities use the reflection I_x(a, b) = 1 - I_{1-x}(b, a).
pub(super) fn beta_quantile(alpha: f64, beta: f64, p: f64) -> f64 {
    if p > 0.5 {
        return 1.0 - beta_quantile_lower(beta, alpha, 1.0 - p);
    }
    beta_quantile_lower(alpha, beta, p)
}

fn beta_quantile_lower(alpha: f64, beta: f64, p: f64) -> f64 {
    let ln_b = ln_beta(alpha, beta);
    let (mut lo, mut hi) = (0.0_f64, 1.0_f64);
    let start = inv_beta_reg(alpha, beta, p);
    let mut x = if start > 0.0 && start < 1.0 {
        start
    } else {
        0.5
    };
    for _ in 0..200 {
        let residual = incomplete_beta(alpha, beta, x) - p;
        if residual == 0.0 {
            return x;
        }
        if residual > 0.0 {
            hi = x;
        } else {
            lo = x;
        }
        // d I_x / d ln x = x * density(x).
        let slope = (alpha * x.ln() + (beta - 1.0) * (-x).ln_1p() - ln_b).exp();
        let mut next = x * (-residual / slope).exp();
        if !(next > lo && next < hi && next.is_finite()) {
            next = if lo > 0.0 {
                (lo * hi).sqrt()
            } else {
                hi * 1e-3
            };
        }
        if (next - x).abs() <= 4.0 * f64::EPSILON * x {
            return next;
        }
        x = next;
    }
    x
}
