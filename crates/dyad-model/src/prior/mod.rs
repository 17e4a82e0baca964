//! Prior distributions of single parameters, as immutable values with checked
//! constructors (in the style of `rand_distr`: `Prior::normal(mean, sd)?`).
//!
//! A [`Prior`] knows its normalised log-density, support, cumulative
//! distribution and quantile function, mean, how to draw from itself, and a
//! short human-readable description for reports. Normalising constants are
//! computed once, at construction, so [`Prior::ln_pdf`] is a handful of
//! floating-point operations and allocates nothing.
//!
//! Conventions chosen here:
//! - `ln_pdf` is `-inf` outside the support and never `NaN` or `+inf`: the
//!   beta and log-normal priors are treated as densities on the *open*
//!   intervals (0, 1) and (0, inf), so the end points, where the beta density
//!   may diverge, are outside.
//! - A `Fixed` prior is a point mass: `ln_pdf` is 0 at the value and `-inf`
//!   elsewhere; a sampler should drop the parameter rather than sample it.
//! - A truncated normal may have one infinite bound (e.g. a parallax that must
//!   be positive); truncations keeping less than [`MIN_TRUNCATED_MASS`] of the
//!   normal's probability are refused as almost certainly a mistake.
//! - `quantile(p)` returns `NaN` for `p` outside [0, 1].
//!
//! The TOML form (our own) is a bare number (fixed) or an inline table with a
//! `shape` key: `{ shape = "log_uniform", min = 1.0, max = 1e6 }`. See
//! [`Prior::from_toml`]. The serialised (JSON) form is the same table.

mod beta_function;
mod toml_form;

// The standard normal distribution, accurate in both tails.
use dyad_common::normal::{
    cdf as std_normal_cdf, isf as std_normal_isf, pdf as std_normal_pdf,
    quantile as std_normal_quantile, sf as std_normal_sf, HALF_LN_2PI,
};
use rand::Rng;
use rand_distr::{Distribution, StandardNormal};
use statrs::function::beta::ln_beta;

use crate::error::ModelError;

use beta_function::{beta_quantile, incomplete_beta};

/// Smallest probability a truncated normal may keep of its parent normal.
///
/// A window holding less than this lies more than about six standard
/// deviations from the mean: almost surely a typing mistake in the file.
pub const MIN_TRUNCATED_MASS: f64 = 1e-9;

/// The kind of a prior and its parameters.
///
/// Obtain one from [`Prior::shape`] to inspect a prior (e.g. to choose a
/// sampling transform); build priors only through the checked constructors.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(tag = "shape", rename_all = "snake_case")]
pub enum PriorShape {
    /// Constant density on [min, max].
    Uniform {
        /// Lower bound.
        min: f64,
        /// Upper bound (> min).
        max: f64,
    },
    /// Density proportional to 1/x on [min, max], 0 < min < max.
    LogUniform {
        /// Lower bound (> 0).
        min: f64,
        /// Upper bound (> min).
        max: f64,
    },
    /// Gaussian.
    Normal {
        /// Mean.
        mean: f64,
        /// Standard deviation (> 0).
        sd: f64,
    },
    /// Gaussian restricted to [min, max]; either bound may be infinite.
    TruncatedNormal {
        /// Mean of the parent normal.
        mean: f64,
        /// Standard deviation of the parent normal (> 0).
        sd: f64,
        /// Lower bound (may be -inf).
        min: f64,
        /// Upper bound (may be +inf, > min).
        max: f64,
    },
    /// ln x is normal with mean `mu` and standard deviation `sigma`.
    LogNormal {
        /// Mean of ln x.
        mu: f64,
        /// Standard deviation of ln x (> 0).
        sigma: f64,
    },
    /// Beta distribution on (0, 1).
    Beta {
        /// First shape parameter (> 0).
        alpha: f64,
        /// Second shape parameter (> 0).
        beta: f64,
    },
    /// A point mass: the parameter is held at `value`.
    Fixed {
        /// The value.
        value: f64,
    },
}

/// A validated prior of one parameter with its normalising constant.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Prior {
    shape: PriorShape,
    /// Additive log normalising constant, meaning depends on the shape
    /// (see `Prior::new_checked`).
    ln_norm: f64,
}

impl serde::Serialize for Prior {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        self.shape.serialize(serializer)
    }
}

fn invalid(message: String) -> ModelError {
    ModelError::InvalidPrior(message)
}

fn require_finite(name: &str, value: f64) -> Result<(), ModelError> {
    if value.is_finite() {
        Ok(())
    } else {
        Err(invalid(format!(
            "{name} must be a finite number, got {value}"
        )))
    }
}

fn require_positive(name: &str, value: f64) -> Result<(), ModelError> {
    require_finite(name, value)?;
    if value > 0.0 {
        Ok(())
    } else {
        Err(invalid(format!("{name} must be positive, got {value}")))
    }
}

fn require_ordered(min: f64, max: f64) -> Result<(), ModelError> {
    if min < max {
        Ok(())
    } else {
        Err(invalid(format!(
            "min ({min}) must be less than max ({max})"
        )))
    }
}

/// Standardised bounds of a truncated normal and its retained mass Z.
///
/// When the whole window lies above the mean the mass is computed from the
/// survival function, so that windows far in either tail keep full relative
/// precision.
fn truncated_window(mean: f64, sd: f64, min: f64, max: f64) -> (f64, f64, f64) {
    let za = (min - mean) / sd;
    let zb = (max - mean) / sd;
    let mass = if za > 0.0 {
        std_normal_sf(za) - std_normal_sf(zb)
    } else {
        std_normal_cdf(zb) - std_normal_cdf(za)
    };
    (za, zb, mass)
}

/// Compact number formatting for descriptions: `1e6`, `0.25`, `-inf`.
fn fmt_number(x: f64) -> String {
    let magnitude = x.abs();
    if x.is_finite() && x != 0.0 && !(1e-3..1e5).contains(&magnitude) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

impl Prior {
    /// Validates a shape and precomputes its normalising constant.
    ///
    /// `ln_norm` is: uniform -ln(max - min); log-uniform -ln ln(max/min);
    /// normal -ln sd - ln(2 pi)/2; truncated normal the same minus ln Z;
    /// log-normal -ln sigma - ln(2 pi)/2; beta -ln B(alpha, beta); fixed 0.
    fn new_checked(shape: PriorShape) -> Result<Prior, ModelError> {
        let ln_norm = match shape {
            PriorShape::Uniform { min, max } => {
                require_finite("min", min)?;
                require_finite("max", max)?;
                require_ordered(min, max)?;
                let width = max - min;
                if !width.is_finite() {
                    return Err(invalid(format!(
                        "the interval [{min}, {max}] is too wide to represent"
                    )));
                }
                -width.ln()
            }
            PriorShape::LogUniform { min, max } => {
                require_finite("min", min)?;
                require_finite("max", max)?;
                if min <= 0.0 {
                    return Err(invalid(format!(
                        "a log-uniform prior needs min > 0, got {min}"
                    )));
                }
                require_ordered(min, max)?;
                -(max.ln() - min.ln()).ln()
            }
            PriorShape::Normal { mean, sd } => {
                require_finite("mean", mean)?;
                require_positive("sd", sd)?;
                -sd.ln() - HALF_LN_2PI
            }
            PriorShape::TruncatedNormal { mean, sd, min, max } => {
                require_finite("mean", mean)?;
                require_positive("sd", sd)?;
                if min.is_nan() || max.is_nan() || min == f64::INFINITY || max == f64::NEG_INFINITY
                {
                    return Err(invalid(format!(
                        "bounds must be numbers with min < +inf and max > -inf, got [{min}, {max}]"
                    )));
                }
                require_ordered(min, max)?;
                let (_, _, mass) = truncated_window(mean, sd, min, max);
                if mass.is_nan() || mass < MIN_TRUNCATED_MASS {
                    return Err(invalid(format!(
                        "the window [{min}, {max}] keeps only {mass:.3e} of a normal with mean {mean} and sd {sd} \
                         (less than {MIN_TRUNCATED_MASS:e}); check the numbers"
                    )));
                }
                -sd.ln() - HALF_LN_2PI - mass.ln()
            }
            PriorShape::LogNormal { mu, sigma } => {
                require_finite("mu", mu)?;
                require_positive("sigma", sigma)?;
                -sigma.ln() - HALF_LN_2PI
            }
            PriorShape::Beta { alpha, beta } => {
                require_positive("alpha", alpha)?;
                require_positive("beta", beta)?;
                let ln_b = ln_beta(alpha, beta);
                if !ln_b.is_finite() {
                    return Err(invalid(format!(
                        "beta({alpha}, {beta}) cannot be normalised in floating point"
                    )));
                }
                -ln_b
            }
            PriorShape::Fixed { value } => {
                require_finite("value", value)?;
                0.0
            }
        };
        Ok(Prior { shape, ln_norm })
    }

    /// Uniform on [min, max]; both finite, min < max.
    pub fn uniform(min: f64, max: f64) -> Result<Prior, ModelError> {
        Self::new_checked(PriorShape::Uniform { min, max })
    }

    /// Log-uniform (density proportional to 1/x) on [min, max]; 0 < min < max, finite.
    pub fn log_uniform(min: f64, max: f64) -> Result<Prior, ModelError> {
        Self::new_checked(PriorShape::LogUniform { min, max })
    }

    /// Normal with finite mean and sd > 0.
    pub fn normal(mean: f64, sd: f64) -> Result<Prior, ModelError> {
        Self::new_checked(PriorShape::Normal { mean, sd })
    }

    /// Normal(mean, sd) restricted to [min, max]; one bound may be infinite;
    /// the window must keep at least [`MIN_TRUNCATED_MASS`] of the probability.
    pub fn truncated_normal(mean: f64, sd: f64, min: f64, max: f64) -> Result<Prior, ModelError> {
        Self::new_checked(PriorShape::TruncatedNormal { mean, sd, min, max })
    }

    /// Log-normal: ln x ~ Normal(mu, sigma), sigma > 0.
    pub fn log_normal(mu: f64, sigma: f64) -> Result<Prior, ModelError> {
        Self::new_checked(PriorShape::LogNormal { mu, sigma })
    }

    /// Beta(alpha, beta) on (0, 1); alpha, beta > 0 and finite.
    pub fn beta(alpha: f64, beta: f64) -> Result<Prior, ModelError> {
        Self::new_checked(PriorShape::Beta { alpha, beta })
    }

    /// A point mass at a finite value.
    pub fn fixed(value: f64) -> Result<Prior, ModelError> {
        Self::new_checked(PriorShape::Fixed { value })
    }

    /// The kind of prior and its parameters.
    pub fn shape(&self) -> PriorShape {
        self.shape
    }

    /// Normalised natural-log density at `x`; `-inf` outside the support
    /// (and for `NaN`). For `Fixed`, 0 at the value and `-inf` elsewhere.
    pub fn ln_pdf(&self, x: f64) -> f64 {
        if !self.contains(x) {
            return f64::NEG_INFINITY;
        }
        match self.shape {
            PriorShape::Uniform { .. } | PriorShape::Fixed { .. } => self.ln_norm,
            PriorShape::LogUniform { .. } => self.ln_norm - x.ln(),
            PriorShape::Normal { mean, sd } | PriorShape::TruncatedNormal { mean, sd, .. } => {
                let z = (x - mean) / sd;
                self.ln_norm - 0.5 * z * z
            }
            PriorShape::LogNormal { mu, sigma } => {
                let ln_x = x.ln();
                let z = (ln_x - mu) / sigma;
                self.ln_norm - ln_x - 0.5 * z * z
            }
            PriorShape::Beta { alpha, beta } => {
                // x is strictly inside (0, 1) here, so both logarithms are finite.
                self.ln_norm + (alpha - 1.0) * x.ln() + (beta - 1.0) * (-x).ln_1p()
            }
        }
    }

    /// The closed hull (lower, upper) of the support; (value, value) for `Fixed`.
    pub fn support(&self) -> (f64, f64) {
        match self.shape {
            PriorShape::Uniform { min, max }
            | PriorShape::LogUniform { min, max }
            | PriorShape::TruncatedNormal { min, max, .. } => (min, max),
            PriorShape::Normal { .. } => (f64::NEG_INFINITY, f64::INFINITY),
            PriorShape::LogNormal { .. } => (0.0, f64::INFINITY),
            PriorShape::Beta { .. } => (0.0, 1.0),
            PriorShape::Fixed { value } => (value, value),
        }
    }

    /// Whether `x` is a finite point where the prior has positive density
    /// (closed intervals for uniform, log-uniform and truncated normal; open
    /// (0, 1) and (0, inf) for beta and log-normal; exactly the value for fixed).
    pub fn contains(&self, x: f64) -> bool {
        if !x.is_finite() {
            return false;
        }
        match self.shape {
            PriorShape::Uniform { min, max }
            | PriorShape::LogUniform { min, max }
            | PriorShape::TruncatedNormal { min, max, .. } => min <= x && x <= max,
            PriorShape::Normal { .. } => true,
            PriorShape::LogNormal { .. } => x > 0.0,
            PriorShape::Beta { .. } => x > 0.0 && x < 1.0,
            PriorShape::Fixed { value } => x == value,
        }
    }

    /// Whether this is a point mass (the parameter is not sampled).
    pub fn is_fixed(&self) -> bool {
        matches!(self.shape, PriorShape::Fixed { .. })
    }

    /// One draw. Uniform, log-uniform and truncated normal use the inverse
    /// cumulative distribution of one uniform variate, so a truncated normal
    /// far in a tail costs no rejections.
    pub fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> f64 {
        match self.shape {
            PriorShape::Uniform { .. }
            | PriorShape::LogUniform { .. }
            | PriorShape::TruncatedNormal { .. } => self.quantile(rng.gen::<f64>()),
            PriorShape::Normal { mean, sd } => {
                let z: f64 = StandardNormal.sample(rng);
                mean + sd * z
            }
            PriorShape::LogNormal { mu, sigma } => {
                let z: f64 = StandardNormal.sample(rng);
                (mu + sigma * z).exp()
            }
            PriorShape::Beta { alpha, beta } => match rand_distr::Beta::new(alpha, beta) {
                Ok(distribution) => distribution.sample(rng),
                // Unreachable for validated parameters; fall back to the inverse cdf.
                Err(_) => self.quantile(rng.gen::<f64>()),
            },
            PriorShape::Fixed { value } => value,
        }
    }

    /// Cumulative distribution P(X <= x); a step at the value for `Fixed`.
    pub fn cdf(&self, x: f64) -> f64 {
        if x.is_nan() {
            return f64::NAN;
        }
        let (lower, upper) = self.support();
        if x < lower {
            return 0.0;
        }
        if x >= upper {
            return 1.0;
        }
        let p = match self.shape {
            PriorShape::Uniform { min, max } => (x - min) / (max - min),
            PriorShape::LogUniform { min, max } => (x / min).ln() / (max / min).ln(),
            PriorShape::Normal { mean, sd } => std_normal_cdf((x - mean) / sd),
            PriorShape::TruncatedNormal { mean, sd, min, max } => {
                let (za, _, mass) = truncated_window(mean, sd, min, max);
                let z = (x - mean) / sd;
                if za > 0.0 {
                    (std_normal_sf(za) - std_normal_sf(z)) / mass
                } else {
                    (std_normal_cdf(z) - std_normal_cdf(za)) / mass
                }
            }
            PriorShape::LogNormal { mu, sigma } => {
                if x <= 0.0 {
                    0.0
                } else {
                    std_normal_cdf((x.ln() - mu) / sigma)
                }
            }
            PriorShape::Beta { alpha, beta } => incomplete_beta(alpha, beta, x),
            // x >= value was handled by the support test above.
            PriorShape::Fixed { .. } => 0.0,
        };
        p.clamp(0.0, 1.0)
    }

    /// Quantile (inverse cdf): the x with cdf(x) = p, for p in [0, 1];
    /// `NaN` for other p. For `Fixed`, always the value.
    pub fn quantile(&self, p: f64) -> f64 {
        if !(0.0..=1.0).contains(&p) {
            return f64::NAN;
        }
        let (lower, upper) = self.support();
        // The end points exactly, free of rounding in exp/ln.
        if p == 0.0 {
            return lower;
        }
        if p == 1.0 {
            return upper;
        }
        let x = match self.shape {
            PriorShape::Uniform { min, max } => min + p * (max - min),
            PriorShape::LogUniform { min, max } => (min.ln() + p * (max.ln() - min.ln())).exp(),
            PriorShape::Normal { mean, sd } => mean + sd * std_normal_quantile(p),
            PriorShape::TruncatedNormal { mean, sd, min, max } => {
                let (za, _, mass) = truncated_window(mean, sd, min, max);
                let z = if za > 0.0 {
                    std_normal_isf(std_normal_sf(za) - p * mass)
                } else {
                    std_normal_quantile(std_normal_cdf(za) + p * mass)
                };
                mean + sd * z
            }
            PriorShape::LogNormal { mu, sigma } => (mu + sigma * std_normal_quantile(p)).exp(),
            PriorShape::Beta { alpha, beta } => beta_quantile(alpha, beta, p),
            PriorShape::Fixed { value } => value,
        };
        x.clamp(lower, upper)
    }

    /// The mean of the distribution.
    pub fn mean(&self) -> f64 {
        match self.shape {
            PriorShape::Uniform { min, max } => 0.5 * (min + max),
            PriorShape::LogUniform { min, max } => (max - min) / (max / min).ln(),
            PriorShape::Normal { mean, .. } => mean,
            // Mean of a truncated normal: mean + sd (phi(a) - phi(b)) / Z
            // (Johnson, Kotz & Balakrishnan, Continuous Univariate
            // Distributions vol. 1, 2nd ed. 1994, ch. 13 sec. 10; from memory).
            PriorShape::TruncatedNormal { mean, sd, min, max } => {
                let (za, zb, mass) = truncated_window(mean, sd, min, max);
                mean + sd * (std_normal_pdf(za) - std_normal_pdf(zb)) / mass
            }
            PriorShape::LogNormal { mu, sigma } => (mu + 0.5 * sigma * sigma).exp(),
            PriorShape::Beta { alpha, beta } => alpha / (alpha + beta),
            PriorShape::Fixed { value } => value,
        }
    }

    /// A short description for reports, e.g. `log-uniform(1, 1e6)`.
    pub fn describe(&self) -> String {
        let n = fmt_number;
        match self.shape {
            PriorShape::Uniform { min, max } => format!("uniform({}, {})", n(min), n(max)),
            PriorShape::LogUniform { min, max } => {
                format!("log-uniform({}, {})", n(min), n(max))
            }
            PriorShape::Normal { mean, sd } => format!("normal(mean {}, sd {})", n(mean), n(sd)),
            PriorShape::TruncatedNormal { mean, sd, min, max } => format!(
                "truncated normal(mean {}, sd {}, within [{}, {}])",
                n(mean),
                n(sd),
                n(min),
                n(max)
            ),
            PriorShape::LogNormal { mu, sigma } => {
                format!("log-normal(ln x: mean {}, sd {})", n(mu), n(sigma))
            }
            PriorShape::Beta { alpha, beta } => format!("beta({}, {})", n(alpha), n(beta)),
            PriorShape::Fixed { value } => format!("fixed at {}", n(value)),
        }
    }
}
