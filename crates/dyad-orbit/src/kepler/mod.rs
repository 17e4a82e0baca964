//! Kepler's equation `M = E - e sin E` for elliptic orbits (0 <= e < 1).
//!
//! Two solvers, both with |E - e sin E - M| <= 4e-15 rad for every real M
//! and 0 <= e <= 1 - 1e-12 (crate tests: dense grids and random cases,
//! including e = 0.999999 near periastron; typically 1 ulp of M), and
//! returning sin E and cos E that agree with `f64::sin`/`f64::cos` of the
//! returned E to 1e-15:
//!
//! - [`KeplerSolver`]: built once per eccentricity (tables, ~0.2 us), then
//!   fast: a polynomial start and one correction, no trigonometric call; use
//!   [`KeplerSolver::solve_many`] (or [`crate::Orbit::states_into`]) for many
//!   mean anomalies, which runs groups in vector registers.
//!   See its docs for the method and PERFORMANCE.md for measured speed.
//! - [`solve_kepler`]: no set-up, for one-off solves: the starting value of
//!   F. L. Markley, "Kepler equation solver", Celestial Mechanics and
//!   Dynamical Astronomy 63, 101 (1995), a cubic built on a Pade
//!   approximant of sin E (error below 4e-4 rad everywhere), then Markley's
//!   single fifth-order correction (his eqs. 20-22); sin E and cos E come
//!   from one evaluation at the start, carried through the correction by
//!   the addition theorem.
//!
//! The mean anomaly is first reduced to [-pi, pi] ([`reduce_mean_anomaly`])
//! and then to [0, pi] by E(-M) = -E(M).

// The constants below keep the digits exactly as published in fdlibm.
#![allow(clippy::excessive_precision)]

mod scalar;
#[cfg(target_arch = "x86_64")]
mod simd;
mod table;

#[cfg(target_arch = "x86_64")]
pub(crate) use simd::has_avx2_fma;
pub use table::KeplerSolver;

use std::f64::consts::PI;

/// A solution of Kepler's equation, with the sine and cosine of E so callers
/// need no more trigonometry.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EccentricAnomaly {
    /// Eccentric anomaly E in radians, in [-pi, pi] (it matches the mean
    /// anomaly reduced to [-pi, pi], see [`reduce_mean_anomaly`]).
    pub e_anom: f64,
    /// sin E.
    pub sin_e: f64,
    /// cos E.
    pub cos_e: f64,
}

// 2 pi split in three parts for Cody-Waite reduction: the first two have 33
// significant bits, so k * part is exact for |k| < 2^20 (|M| < 6.5e6 rad).
// These are 4x the pi/2 splits of fdlibm's e_rem_pio2.c (Sun Microsystems
// 1993), pio2_1, pio2_2, pio2_2t; multiplying by 4 is exact.
const TWO_PI_1: f64 = 4.0 * 1.570_796_326_734_125_614_17;
const TWO_PI_2: f64 = 4.0 * 6.077_100_506_303_965_976_60e-11;
const TWO_PI_3: f64 = 4.0 * 2.022_266_248_795_950_631_54e-21;
/// 1.5 * 2^52: adding and subtracting it rounds to the nearest integer.
const ROUND_MAGIC: f64 = 6_755_399_441_055_744.0;

/// Reduces any real angle to [-pi, pi] by subtracting the nearest multiple of
/// 2 pi, with a three-part 2 pi (Cody & Waite 1980, Software Manual for the
/// Elementary Functions) so no precision is lost for |M| up to ~6e6 rad.
#[inline(always)]
pub fn reduce_mean_anomaly(m: f64) -> f64 {
    let k = (m * (0.5 / PI) + ROUND_MAGIC) - ROUND_MAGIC;
    ((m - k * TWO_PI_1) - k * TWO_PI_2) - k * TWO_PI_3
}

/// Solves Kepler's equation for any real mean anomaly (radians) and
/// eccentricity 0 <= e < 1. The mean anomaly is reduced to [-pi, pi] first
/// ([`reduce_mean_anomaly`]); the returned E belongs to that reduced value.
///
/// Behaviour for e outside [0, 1) is unspecified (no panic); use
/// [`KeplerSolver::new`] to have it checked.
#[inline]
pub fn solve_kepler(mean_anomaly: f64, e: f64) -> EccentricAnomaly {
    scalar::solve_reduced(reduce_mean_anomaly(mean_anomaly), e)
}

/// Number of mean anomalies [`KeplerSolver::solve_many`] and
/// [`crate::Orbit::states_into`] process together.
pub const LANES: usize = 2 * GROUP;
/// Lanes of the AVX2 kernel (one 256-bit register of f64).
pub(crate) const GROUP: usize = 4;

/// Solutions of L mean anomalies, one array per quantity (how the lanes
/// compute them, and how a caller that goes on computing lane by lane
/// wants them).
pub(crate) struct Solved<const L: usize> {
    pub e_anom: [f64; L],
    pub sin_e: [f64; L],
    pub cos_e: [f64; L],
}

impl<const L: usize> Solved<L> {
    #[inline(always)]
    fn get(&self, i: usize) -> EccentricAnomaly {
        EccentricAnomaly {
            e_anom: self.e_anom[i],
            sin_e: self.sin_e[i],
            cos_e: self.cos_e[i],
        }
    }

    #[inline(always)]
    fn to_array(&self) -> [EccentricAnomaly; L] {
        std::array::from_fn(|i| self.get(i))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worst residual |E - e sin E - M| (libm sin) of both solvers on a grid
    /// dense near periastron, for e up to 1 - 1e-12.
    #[test]
    fn residuals_at_machine_precision() {
        let es = [
            0.0,
            0.1,
            0.3,
            0.5,
            0.7,
            0.79,
            0.8,
            0.81,
            0.9,
            0.93,
            0.95,
            0.951,
            0.955,
            0.96,
            0.961,
            0.97,
            0.98,
            0.985,
            0.986,
            0.99,
            0.999,
            0.9999,
            0.999_999,
            1.0 - 1e-9,
            1.0 - 1e-12,
        ];
        for e in es {
            let solver = KeplerSolver::new(e).unwrap();
            let n = 20_000;
            for k in 0..=n {
                let u = k as f64 / n as f64;
                let m = PI * u * u * u;
                for sol in [solver.solve_reduced(m), solve_kepler(m, e)] {
                    let r = (sol.e_anom - e * sol.e_anom.sin() - m).abs();
                    assert!(r <= 4e-15, "e={e} M={m} residual {r:e}");
                    assert!((sol.sin_e - sol.e_anom.sin()).abs() <= 1e-15, "e={e} M={m}");
                    assert!((sol.cos_e - sol.e_anom.cos()).abs() <= 1e-15, "e={e} M={m}");
                }
            }
        }
    }
}
