//! Sample quantiles of sorted values: definition 7 of Hyndman & Fan (1996),
//! "Sample quantiles in statistical packages", The American Statistician
//! 50, 361 (linear interpolation between order statistics, h = (n - 1) p;
//! the default of R and NumPy).

/// Quantile `p` in [0, 1] (clamped) of already sorted values; NaN for an
/// empty slice.
pub fn quantile_sorted(sorted: &[f64], p: f64) -> f64 {
    let n = sorted.len();
    if n == 0 {
        return f64::NAN;
    }
    let h = (n - 1) as f64 * p.clamp(0.0, 1.0);
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(n - 1);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// Median of finite values (non-finite ones are dropped; NaN if none is
/// left). Sorts `values` in place.
pub fn median_of_finite(mut values: Vec<f64>) -> f64 {
    values.retain(|x| x.is_finite());
    values.sort_by(f64::total_cmp);
    quantile_sorted(&values, 0.5)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn type_7_quantiles_by_hand() {
        // Hyndman & Fan 1996, definition 7, worked by hand: of 1..=5 the
        // median is 3, the 0.25 quantile 2 and the 0.1 quantile 1.4; R's
        // quantile(1:10, c(0.05, 0.95)) is 1.45 and 9.55 (from memory).
        let v = [1.0, 2.0, 3.0, 4.0, 5.0];
        assert_eq!(quantile_sorted(&v, 0.5), 3.0);
        assert_eq!(quantile_sorted(&v, 0.25), 2.0);
        assert!((quantile_sorted(&v, 0.1) - 1.4).abs() < 1e-12);
        let ten: Vec<f64> = (1..=10).map(f64::from).collect();
        assert!((quantile_sorted(&ten, 0.05) - 1.45).abs() < 1e-12);
        assert!((quantile_sorted(&ten, 0.95) - 9.55).abs() < 1e-12);
        assert_eq!(quantile_sorted(&ten, 0.0), 1.0);
        assert_eq!(quantile_sorted(&ten, 1.0), 10.0);
        assert!(quantile_sorted(&[], 0.5).is_nan());
        assert_eq!(quantile_sorted(&[7.0], 0.9), 7.0);
    }

    #[test]
    fn median_skips_non_finite_values() {
        assert_eq!(median_of_finite(vec![3.0, f64::NAN, 1.0, 2.0]), 2.0);
        assert!(median_of_finite(vec![f64::INFINITY]).is_nan());
    }
}
