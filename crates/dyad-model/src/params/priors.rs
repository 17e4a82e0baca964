//! Priors on the physical quantities: a prior in the user's unit
//! ([`ScaledPrior`]), the inclination prior and the priors of a whole model
//! ([`ModelPriors`]) with their defaults.

use std::f64::consts::TAU;

use rand::Rng;

use crate::astrometry_errors::{astrometry_sources, AstrometryErrorPriors};
use crate::data::Dataset;
use crate::error::ModelError;
use crate::prior::{Prior, PriorShape};

/// A prior stated in a unit of the user's choosing, evaluated in dyad's
/// internal unit: internal value = `scale` * value in the prior's unit.
///
/// Example: a period prior in years has scale 365.25 (internal unit days);
/// an angle prior in degrees has scale pi/180. The density transforms as
/// p_internal(x) = p_user(x / scale) / scale.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ScaledPrior {
    prior: Prior,
    scale: f64,
    inv_scale: f64,
    ln_scale: f64,
    /// For a log-uniform prior: (ln lo, ln hi, density) of ln x, which is
    /// uniform, so the log coordinate needs neither exp nor ln.
    log_uniform: Option<(f64, f64, f64)>,
}

impl ScaledPrior {
    /// A prior whose variable times `scale` is the internal value (`scale` > 0).
    pub fn new(prior: Prior, scale: f64) -> Self {
        let log_uniform = match prior.shape() {
            PriorShape::LogUniform { min, max } => {
                let (lo, hi) = ((min * scale).ln(), (max * scale).ln());
                Some((lo, hi, -(hi - lo).ln()))
            }
            _ => None,
        };
        Self {
            prior,
            scale,
            inv_scale: 1.0 / scale,
            ln_scale: scale.ln(),
            log_uniform,
        }
    }

    /// Log density of s = ln(internal value) per unit of s (the Jacobian
    /// + s included): ln p(e^s) + s.
    #[inline]
    pub fn ln_pdf_of_log(&self, s: f64) -> f64 {
        match self.log_uniform {
            // p(x) = 1 / (x ln(hi/lo)) makes ln x uniform on [ln lo, ln hi].
            Some((lo, hi, value)) => {
                if s >= lo && s <= hi {
                    value
                } else {
                    f64::NEG_INFINITY
                }
            }
            None => self.ln_pdf(s.exp()) + s,
        }
    }

    /// A prior already in the internal unit.
    pub fn internal(prior: Prior) -> Self {
        Self::new(prior, 1.0)
    }

    /// The prior in the user's unit.
    pub fn prior(&self) -> &Prior {
        &self.prior
    }

    /// Internal value per unit of the user's prior.
    pub fn scale(&self) -> f64 {
        self.scale
    }

    /// Log density per internal unit.
    #[inline]
    pub fn ln_pdf(&self, internal: f64) -> f64 {
        self.prior.ln_pdf(internal * self.inv_scale) - self.ln_scale
    }

    /// The fixed value in internal units, if this is a point mass.
    pub fn fixed_value(&self) -> Option<f64> {
        match self.prior.shape() {
            PriorShape::Fixed { value } => Some(value * self.scale),
            _ => None,
        }
    }

    /// Support (lower, upper) in internal units.
    pub fn support(&self) -> (f64, f64) {
        let (lo, hi) = self.prior.support();
        (lo * self.scale, hi * self.scale)
    }

    /// Whether the internal value has positive density.
    pub fn contains(&self, internal: f64) -> bool {
        self.prior.contains(internal / self.scale)
    }

    /// One draw, internal units.
    pub fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> f64 {
        self.scale * self.prior.sample(rng)
    }

    /// Cumulative probability at an internal value.
    pub fn cdf(&self, internal: f64) -> f64 {
        self.prior.cdf(internal / self.scale)
    }

    /// Mean, internal units.
    pub fn mean(&self) -> f64 {
        self.scale * self.prior.mean()
    }
}

/// The prior on the inclination.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum InclinationPrior {
    /// Isotropic orientation: cos i uniform on [-1, 1], p(i) = sin(i) / 2.
    Isotropic,
    /// Any prior on i (internal unit radians, support within [0, pi]).
    Angle(ScaledPrior),
}

/// Priors on every physical quantity, in internal units (days, radians,
/// M_sun, mas, km/s). Which of them are used depends on the data terms
/// ([`crate::terms`]).
#[derive(Debug, Clone, PartialEq)]
pub struct ModelPriors {
    /// Orbital period, days.
    pub period_days: ScaledPrior,
    /// Eccentricity (support within [0, 1)).
    pub eccentricity: ScaledPrior,
    /// The secondary's argument of periastron, radians (wrapped onto the circle).
    pub omega_rad: ScaledPrior,
    /// Inclination.
    pub inclination: InclinationPrior,
    /// Position angle of the ascending node, radians (wrapped; folded to
    /// [0, pi) with astrometry alone).
    pub node_rad: ScaledPrior,
    /// Total mass M1 + M2, M_sun.
    pub total_mass_msun: ScaledPrior,
    /// Parallax, mas.
    pub parallax_mas: ScaledPrior,
    /// Mass ratio q = M2/M1.
    pub mass_ratio: ScaledPrior,
    /// Semi-amplitude of the primary, km/s (velocities only).
    pub k1_kms: ScaledPrior,
    /// Semi-amplitude of the secondary, km/s (velocities only).
    pub k2_kms: ScaledPrior,
    /// Per instrument (index of `Dataset::instruments`): systemic velocity
    /// as that instrument measures it, km/s.
    pub offset_kms: Vec<ScaledPrior>,
    /// Per instrument: jitter added in quadrature to the errors, km/s.
    pub jitter_kms: Vec<ScaledPrior>,
    /// Epoch at which the phase (mean longitude) is defined, JD. `None`: the
    /// mid-point of the data.
    pub reference_epoch_jd: Option<f64>,
    /// The astrometric error model, per source
    /// ([`crate::astrometry_errors::astrometry_sources`]).
    pub astrometry_errors: AstrometryErrorPriors,
}

/// Default priors (documented in configs/README.md).
pub mod defaults {
    /// Period range, days: 0.1 d to 10^6 d (about 2700 yr), log-uniform.
    pub const PERIOD_DAYS: (f64, f64) = (0.1, 1.0e6);
    /// Total mass range, M_sun, log-uniform.
    pub const TOTAL_MASS_MSUN: (f64, f64) = (0.01, 1000.0);
    /// Parallax range when no catalogue value is given, mas, log-uniform.
    pub const PARALLAX_MAS: (f64, f64) = (0.01, 1000.0);
    /// Mass-ratio range, uniform (primary the more massive star).
    pub const MASS_RATIO: (f64, f64) = (0.0, 1.0);
    /// Semi-amplitude range (velocities only), km/s, log-uniform.
    pub const SEMI_AMPLITUDE_KMS: (f64, f64) = (0.001, 1000.0);
    /// Offset range, km/s, uniform.
    pub const OFFSET_KMS: (f64, f64) = (-1000.0, 1000.0);
    /// Jitter range, km/s, log-uniform.
    pub const JITTER_KMS: (f64, f64) = (0.001, 10.0);
}

/// Unwraps a prior built from the literal constants of [`defaults`], which
/// are valid by construction (not an input-dependent path).
pub(crate) fn checked(prior: Result<Prior, ModelError>) -> Prior {
    prior.expect("the default prior constants are valid")
}

/// The uniform prior on [0, 2 pi) (of the phase).
pub(crate) fn checked_uniform_circle() -> ScaledPrior {
    ScaledPrior::internal(checked(Prior::uniform(0.0, TAU)))
}

impl ModelPriors {
    /// The default priors for a data set: log-uniform period and total
    /// mass, uniform e in [0, 1) and omega, isotropic orientation, uniform
    /// Omega, log-uniform parallax, uniform q on [0, 1], uniform offsets,
    /// log-uniform jitters (ranges in [`defaults`]).
    pub fn defaults(dataset: &Dataset) -> Self {
        let n = dataset.instruments.len();
        let (p0, p1) = defaults::PERIOD_DAYS;
        let (m0, m1) = defaults::TOTAL_MASS_MSUN;
        let (x0, x1) = defaults::PARALLAX_MAS;
        let (q0, q1) = defaults::MASS_RATIO;
        let (k0, k1) = defaults::SEMI_AMPLITUDE_KMS;
        let (o0, o1) = defaults::OFFSET_KMS;
        let (j0, j1) = defaults::JITTER_KMS;
        let semi_amplitude = ScaledPrior::internal(checked(Prior::log_uniform(k0, k1)));
        Self {
            period_days: ScaledPrior::internal(checked(Prior::log_uniform(p0, p1))),
            // Uniform on [0, 1]: e = 1 itself has zero probability and is
            // refused by the orbit, so this is uniform on [0, 1).
            eccentricity: ScaledPrior::internal(checked(Prior::uniform(0.0, 1.0))),
            omega_rad: ScaledPrior::internal(checked(Prior::uniform(0.0, TAU))),
            inclination: InclinationPrior::Isotropic,
            node_rad: ScaledPrior::internal(checked(Prior::uniform(0.0, TAU))),
            total_mass_msun: ScaledPrior::internal(checked(Prior::log_uniform(m0, m1))),
            parallax_mas: ScaledPrior::internal(checked(Prior::log_uniform(x0, x1))),
            mass_ratio: ScaledPrior::internal(checked(Prior::uniform(q0, q1))),
            k1_kms: semi_amplitude,
            k2_kms: semi_amplitude,
            offset_kms: vec![ScaledPrior::internal(checked(Prior::uniform(o0, o1))); n],
            jitter_kms: vec![ScaledPrior::internal(checked(Prior::log_uniform(j0, j1))); n],
            reference_epoch_jd: None,
            astrometry_errors: AstrometryErrorPriors::as_given(astrometry_sources(dataset).0.len()),
        }
    }
}
