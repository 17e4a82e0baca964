//! The no-set-up solver [`super::solve_kepler`]: Markley's (1995) start
//! and fifth-order correction, with sine and cosine from fdlibm's kernels.

use super::EccentricAnomaly;
use std::f64::consts::{FRAC_2_PI, PI};

// pi/2 split the same way, for the quadrant reduction in `sin_cos_0_pi`.
const PIO2_1: f64 = 1.570_796_326_734_125_614_17;
const PIO2_2: f64 = 6.077_100_506_303_965_976_60e-11;
const PIO2_2T: f64 = 2.022_266_248_795_950_631_54e-21;

/// Cube root of x > 0: exponent-halving bit estimate (rel. error < 4%)
/// refined by two Halley steps y <- y (y^3 + 2x) / (2 y^3 + x), cubically
/// convergent (relative error ~1e-15).
#[inline]
fn cbrt_positive(x: f64) -> f64 {
    let mut y = f64::from_bits(x.to_bits() / 3 + 0x2a9f_7893_782d_a1ce);
    for _ in 0..2 {
        let y3 = y * y * y;
        y *= (y3 + 2.0 * x) / (2.0 * y3 + x);
    }
    y
}

/// Core solver for m in [-pi, pi] (slightly beyond is harmless).
#[inline]
pub(super) fn solve_reduced(m: f64, e: f64) -> EccentricAnomaly {
    // E(-M) = -E(M): solve for |M| in [0, pi], restore the sign at the end.
    let neg = m < 0.0;
    let ma = m.abs();
    let e1 = markley_start(ma, e);
    let (s1, c1) = sin_cos_0_pi(e1);
    // Markley (1995) eqs. 20-22: a fifth-order correction from the function
    // and its first four derivatives at the starting value.
    let es = e * s1;
    let ec = e * c1;
    let f0 = e1 - es - ma;
    let f1 = 1.0 - ec;
    let f2 = es;
    let f3 = ec; // = 1 - f1
    let d3 = -f0 / (f1 - 0.5 * f0 * f2 / f1);
    let d4 = -f0 / (f1 + 0.5 * d3 * f2 + d3 * d3 * f3 * (1.0 / 6.0));
    let d5 =
        -f0 / (f1 + 0.5 * d4 * f2 + d4 * d4 * f3 * (1.0 / 6.0) - d4 * d4 * d4 * f2 * (1.0 / 24.0));
    // sin and cos of E = e1 + d5 by the addition theorem; |d5| < 4e-4, so
    // the neglected Taylor terms (d^5/120, d^6/720) are below 1e-19.
    let d2 = d5 * d5;
    let sin_d = d5 * (1.0 - d2 * (1.0 / 6.0));
    let cos_d_m1 = -d2 * (0.5 - d2 * (1.0 / 24.0));
    let sin_e = s1 + (s1 * cos_d_m1 + c1 * sin_d);
    let cos_e = c1 + (c1 * cos_d_m1 - s1 * sin_d);
    let e_anom = e1 + d5;
    if neg {
        EccentricAnomaly {
            e_anom: -e_anom,
            sin_e: -sin_e,
            cos_e,
        }
    } else {
        EccentricAnomaly {
            e_anom,
            sin_e,
            cos_e,
        }
    }
}

/// Markley (1995) starting value (his eqs. 5-10) for 0 <= m <= pi.
#[inline]
fn markley_start(m: f64, e: f64) -> f64 {
    const PI2: f64 = PI * PI;
    let alpha = (3.0 * PI2 + 1.6 * PI * (PI - m) / (1.0 + e)) / (PI2 - 6.0);
    let d = 3.0 * (1.0 - e) + alpha * e;
    let q = 2.0 * alpha * d * (1.0 - e) - m * m;
    let r = 3.0 * alpha * d * (d - 1.0 + e) * m + m * m * m;
    let w = cbrt_positive(r.abs() + (q * q * q + r * r).sqrt());
    let w = w * w;
    (2.0 * r * w / (w * w + w * q + q * q) + m) / d
}

/// sin and cos of x for x in [-pi/4, 7pi/4): quadrant reduction by a two-part
/// pi/2 and the minimax kernels of fdlibm's k_sin.c / k_cos.c (Sun
/// Microsystems 1993) on [-pi/4, pi/4], error below 1 ulp there.
#[inline]
fn sin_cos_0_pi(x: f64) -> (f64, f64) {
    // x >= -pi/4, so the truncation below is a floor and quadrant >= 0.
    let quadrant = (x * FRAC_2_PI + 0.5) as i32;
    let qf = quadrant as f64;
    let y = (x - qf * PIO2_1) - qf * (PIO2_2 + PIO2_2T);
    let (s, c) = sin_cos_kernel(y);
    match quadrant & 3 {
        0 => (s, c),
        1 => (c, -s),
        2 => (-s, -c),
        _ => (-c, s),
    }
}

/// sin and cos on [-pi/4, pi/4] (fdlibm k_sin.c and k_cos.c coefficients).
#[inline]
fn sin_cos_kernel(x: f64) -> (f64, f64) {
    const S1: f64 = -1.666_666_666_666_663_243_48e-01;
    const S2: f64 = 8.333_333_333_322_489_461_24e-03;
    const S3: f64 = -1.984_126_982_985_794_931_34e-04;
    const S4: f64 = 2.755_731_370_707_006_767_89e-06;
    const S5: f64 = -2.505_076_025_340_686_341_95e-08;
    const S6: f64 = 1.589_690_995_211_550_102_21e-10;
    const C1: f64 = 4.166_666_666_666_660_190_37e-02;
    const C2: f64 = -1.388_888_888_887_410_957_49e-03;
    const C3: f64 = 2.480_158_728_947_672_941_78e-05;
    const C4: f64 = -2.755_731_435_139_066_330_35e-07;
    const C5: f64 = 2.087_572_321_298_174_827_90e-09;
    const C6: f64 = -1.135_964_755_778_819_482_65e-11;
    let z = x * x;
    let z2 = z * z;
    // Estrin-style grouping shortens the dependency chain.
    let sp = (S1 + z * S2) + z2 * ((S3 + z * S4) + z2 * (S5 + z * S6));
    let cp = (C1 + z * C2) + z2 * ((C3 + z * C4) + z2 * (C5 + z * C6));
    let s = x + x * z * sp;
    // cos = 1 - z/2 + z^2 cp, with fdlibm's split of 1 - z/2 for accuracy.
    let hz = 0.5 * z;
    let w = 1.0 - hz;
    let c = w + (((1.0 - w) - hz) + z2 * cp);
    (s, c)
}

#[cfg(test)]
mod tests {
    use super::super::solve_kepler;
    use super::*;

    #[test]
    fn kernel_matches_std_sin_cos() {
        // Reference: the platform libm (f64::sin, f64::cos).
        let n = 20_000;
        let mut worst: f64 = 0.0;
        for k in 0..=n {
            let x = -PI / 4.0 + (2.0 * PI) * k as f64 / n as f64;
            let (s, c) = sin_cos_0_pi(x);
            worst = worst.max((s - x.sin()).abs()).max((c - x.cos()).abs());
        }
        assert!(worst < 4e-16, "worst {worst:e}");
    }

    #[test]
    fn residual_on_dense_grid() {
        let mut worst: f64 = 0.0;
        for &e in &[0.0, 0.1, 0.5, 0.9, 0.99, 0.999, 0.999_999, 1.0 - 1e-12] {
            for k in 0..=4000 {
                let m = PI * k as f64 / 4000.0;
                let sol = solve_kepler(m, e);
                let r = sol.e_anom - e * sol.e_anom.sin() - m;
                worst = worst.max(r.abs());
            }
        }
        assert!(worst < 1e-15, "worst residual {worst:e}");
    }

    #[test]
    fn fast_cube_root() {
        // Reference: f64::cbrt (platform libm).
        for k in -300..300 {
            let x = 1.7f64.powi(k) * 1.234;
            let y = cbrt_positive(x);
            let rel = (y / x.cbrt() - 1.0).abs();
            assert!(rel < 1e-14, "x={x} rel {rel:e}");
        }
    }
}
