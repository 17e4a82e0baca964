//! Arithmetic shared by the terms' likelihood loops, which run [`LANES`]
//! epochs at a time on the Kepler solver's arrays.

use std::f64::consts::LN_2;

use dyad_orbit::kepler::LANES;

/// ln(2 pi).
pub(crate) const LN_2PI: f64 = 1.837_877_066_409_345_5;

/// Pads `v` with `value` to a whole number of blocks of [`LANES`].
pub(crate) fn pad_to_lanes<T: Copy>(v: &mut Vec<T>, value: T) {
    let n = v.len().div_ceil(LANES) * LANES;
    v.resize(n, value);
}

/// Sum of the logarithms of many positive normal numbers with one
/// logarithm at the end: each lane keeps a product of mantissas in [1, 2)
/// and a sum of binary exponents, which is exact.
pub(crate) struct LogSum {
    mantissa: [f64; LANES],
    exponent: [i64; LANES],
}

impl LogSum {
    #[inline(always)]
    pub(crate) fn new() -> Self {
        Self {
            mantissa: [1.0; LANES],
            exponent: [0; LANES],
        }
    }

    /// Adds ln a[i] + ln b[i] to lane i (a, b positive normal numbers).
    #[inline(always)]
    pub(crate) fn add_products(&mut self, a: &[f64; LANES], b: &[f64; LANES]) {
        for i in 0..LANES {
            let (ma, ea) = split_exponent(a[i]);
            let (mb, eb) = split_exponent(b[i]);
            // In [1, 8): no overflow, and one more split renormalises it.
            let (m, e) = split_exponent(self.mantissa[i] * ma * mb);
            self.mantissa[i] = m;
            self.exponent[i] += ea + eb + e;
        }
    }

    pub(crate) fn value(&self) -> f64 {
        // The lanes' mantissas are in [1, 2), so their product is below
        // 2^LANES: one logarithm for all of them.
        let mantissas: f64 = self.mantissa.iter().product();
        let exponents: i64 = self.exponent.iter().sum();
        mantissas.ln() + exponents as f64 * LN_2
    }
}

/// (m, e) with v = m 2^e and m in [1, 2), for a positive normal v (the
/// fields of the IEEE 754 binary64 format).
#[inline(always)]
fn split_exponent(v: f64) -> (f64, i64) {
    const MANTISSA_BITS: u64 = (1 << 52) - 1;
    const ONE_BITS: u64 = 1023 << 52;
    let bits = v.to_bits();
    let e = (bits >> 52) as i64 - 1023;
    (f64::from_bits((bits & MANTISSA_BITS) | ONE_BITS), e)
}

#[cfg(test)]
mod tests {
    use super::{LogSum, LANES};

    /// Reference: the sum of the platform's ln, over values from 1e-300 to
    /// 1e300 (and exact powers of two, whose mantissa is 1).
    #[test]
    fn log_sum_by_exponent_and_mantissa_matches_the_sum_of_logs() {
        let mut sum = LogSum::new();
        let mut reference = 0.0;
        for block in 0..200 {
            let a: [f64; LANES] = std::array::from_fn(|i| {
                let k = (block * LANES + i) as f64;
                10f64.powf(-300.0 + 600.0 * ((k * 0.618_034) % 1.0))
            });
            let b: [f64; LANES] = std::array::from_fn(|i| 2f64.powi(i as i32 - 4) * 1.75);
            sum.add_products(&a, &b);
            reference += a.iter().chain(&b).map(|v| v.ln()).sum::<f64>();
        }
        let got = sum.value();
        assert!(
            (got - reference).abs() <= 1e-13 * reference.abs(),
            "{got} vs {reference}"
        );
    }
}
