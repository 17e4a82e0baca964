//! Angles sampled as unconstrained 2-vectors, and priors on periodic angles
//! wrapped onto the circle (module docs of [`crate::params`], "Angles
//! without walls").

use std::f64::consts::{LN_2, TAU};

use rand::Rng;

use super::ScaledPrior;
use crate::prior::PriorShape;

/// An angle represented by an unconstrained 2-vector at indices (u, v).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct AnglePair {
    pub(crate) u: usize,
    pub(crate) v: usize,
    /// 1: angle = atan2(v, u) on [0, 2 pi); 2: angle = atan2(v, u) / 2 on [0, pi).
    pub(crate) divisor: f64,
}

impl AnglePair {
    #[inline]
    pub(crate) fn angle(self, x: &[f64]) -> f64 {
        let theta = x[self.v].atan2(x[self.u]);
        reduce_angle(theta / self.divisor, TAU / self.divisor)
    }

    #[inline]
    fn radius_sq(self, x: &[f64]) -> f64 {
        x[self.u] * x[self.u] + x[self.v] * x[self.v]
    }

    /// ln p(u, v) = ln p_angle(angle) - ln(divisor) + ln(2 g(r^2)) (module docs).
    #[inline]
    pub(crate) fn ln_prior(self, x: &[f64], prior: &WrappedAngle) -> f64 {
        let ln_angle = match prior.constant {
            Some(c) => c,
            None => prior.ln_pdf(self.angle(x)),
        };
        ln_angle - self.divisor.ln() + ln_radial_sq_density(self.radius_sq(x))
    }

    /// Writes (u, v) for an angle at radius r.
    pub(crate) fn set(self, out: &mut [f64], angle: f64, radius: f64) {
        let theta = angle * self.divisor;
        out[self.u] = radius * theta.cos();
        out[self.v] = radius * theta.sin();
    }
}

/// Shape k of the Gamma law of r^2 (mean 1): k = 1 is the Rayleigh radius.
pub(crate) const RADIAL_SHAPE: f64 = 4.0;

/// ln of 2 * Gamma(k, 1/k) density of rho = r^2; the density in (u, v) is
/// p_theta(theta) * p_r(r) / r = p_theta(theta) * 2 g(r^2) with g the Gamma pdf.
#[inline]
fn ln_radial_sq_density(rho: f64) -> f64 {
    let k = RADIAL_SHAPE;
    // ln g(rho) = k ln k - ln Gamma(k) + (k - 1) ln rho - k rho.
    // Gamma(4) = 3! = 6.
    let ln_gamma_k = 6f64.ln();
    LN_2 + k * k.ln() - ln_gamma_k + (k - 1.0) * rho.ln() - k * rho
}

/// `a` reduced to [0, period).
#[inline]
pub(crate) fn reduce_angle(a: f64, period: f64) -> f64 {
    let r = a.rem_euclid(period);
    if r >= period {
        0.0
    } else {
        r
    }
}

/// A prior on a periodic angle, wrapped onto [0, period):
/// p(theta) = sum_k p(theta + k period).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct WrappedAngle {
    prior: ScaledPrior,
    period: f64,
    /// Range of k in the sum: every k for which theta + k period can be in
    /// the support (bounded supports), or +-6 periods about the mean.
    k_min: i32,
    k_max: i32,
    /// `Some(ln(1/period))` when the wrapped density is constant: a uniform
    /// prior over a whole number of periods (the usual case).
    pub(crate) constant: Option<f64>,
}

impl WrappedAngle {
    pub(crate) fn new(prior: ScaledPrior, period: f64) -> Self {
        let (lo, hi) = prior.support();
        let centre = prior.mean();
        let k_min = if lo.is_finite() {
            (lo / period).floor() as i32 - 1
        } else {
            (centre / period).floor() as i32 - 6
        };
        let k_max = if hi.is_finite() {
            (hi / period).ceil() as i32
        } else {
            (centre / period).ceil() as i32 + 6
        };
        // Guard against absurd supports (e.g. +-1e9 degrees).
        let k_min = k_min.max(-64);
        let k_max = k_max.min(64).max(k_min);
        let constant = match prior.prior().shape() {
            PriorShape::Uniform { min, max } => {
                let turns = (max - min) * prior.scale() / period;
                ((turns - turns.round()).abs() < 1e-9 && turns.round() >= 1.0).then(|| -period.ln())
            }
            _ => None,
        };
        Self {
            prior,
            period,
            k_min,
            k_max,
            constant,
        }
    }

    /// ln of the wrapped density at `theta` in [0, period).
    #[inline]
    pub(crate) fn ln_pdf(&self, theta: f64) -> f64 {
        if let Some(c) = self.constant {
            return c;
        }
        // log-sum-exp without allocation: two passes over the few k.
        let mut best = f64::NEG_INFINITY;
        for k in self.k_min..=self.k_max {
            let l = self.prior.ln_pdf(theta + f64::from(k) * self.period);
            if l > best {
                best = l;
            }
        }
        if best == f64::NEG_INFINITY {
            return best;
        }
        let mut sum = 0.0;
        for k in self.k_min..=self.k_max {
            let l = self.prior.ln_pdf(theta + f64::from(k) * self.period);
            if l > f64::NEG_INFINITY {
                sum += (l - best).exp();
            }
        }
        best + sum.ln()
    }

    /// A draw reduced to [0, period).
    pub(crate) fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> f64 {
        reduce_angle(self.prior.sample(rng), self.period)
    }
}
