//! The vector of sampled coordinates and its map to physical parameters.
//!
//! The sampler moves in well-conditioned coordinates; priors are stated on
//! the physical quantities. Each sampled coordinate, its map to physics and
//! the Jacobian that turns the physical prior density into a density in the
//! sampled coordinates are listed here (docs/DESIGN.md "Parameters").
//!
//! # The coordinates
//!
//! | name | physical quantity | map | ln Jacobian, ln abs(d phys / d sampled) |
//! |---|---|---|---|
//! | `ln_period_days` | P (d) | P = exp(s) | + s |
//! | `sqrt_e_cos_omega`, `sqrt_e_sin_omega` | e, omega | x = sqrt(e) cos w, y = sqrt(e) sin w | ln 2 (see below) |
//! | `phase_u`, `phase_v` | lambda, the mean longitude M + omega at the reference epoch | lambda = atan2(v, u) | see "angles" |
//! | `cos_inclination` | i | i = acos(c) | - ln sin i |
//! | `node_u`, `node_v` | Omega | Omega = atan2(v, u) (or half of it) | see "angles" |
//! | `ln_total_mass_msun` | M1 + M2 | M = exp(s) | + s |
//! | `parallax_mas` | parallax | identity | 0 |
//! | `mass_ratio` | q = M2/M1 | identity | 0 |
//! | `ln_k1_kms`, `ln_k2_kms` | K1, K2 (velocities only) | K = exp(s) | + s |
//! | `offset_kms[NAME]` | systemic velocity seen by instrument NAME | identity | 0 |
//! | `ln_jitter_kms[NAME]` | jitter of instrument NAME | s_k = exp(t) | + t |
//!
//! Eccentricity pair: in polar form r = sqrt(e), the area element is
//! dx dy = r dr dw and dr = de / (2 sqrt e), so dx dy = de dw / 2 and
//! p(x, y) = 2 p(e) p(w). Uniform e and uniform w make (x, y) uniform on the
//! unit disk (density 1/pi), which has no wall at e = 0 and none in omega.
//! If e is fixed the pair is replaced by an angle 2-vector for omega; if
//! omega is fixed, e itself is sampled.
//!
//! # Angles without walls
//!
//! An angle sampled directly on [0, 2 pi) has walls at both ends that the
//! sampler cannot cross, although the two ends are the same orbit. We
//! therefore sample an unconstrained 2-vector (u, v) with
//! angle = atan2(v, u): the map has no boundary at all. The radius
//! r = hypot(u, v) is a nuisance: r^2 gets a Gamma(k = 4, scale 1/4) prior
//! (mean 1), which keeps walkers off the origin. With du dv = r dr dtheta
//! and p_r(r) = 2 r g(r^2), the density in (u, v) is
//! p(u, v) = p_theta(theta) p_r(r) / r = 2 p_theta(theta) g(r^2).
//! (k = 1 would be the Rayleigh radius, i.e. a bivariate normal; k = 4
//! makes a thick ring, so a well-measured angle is a short arc rather than
//! a long cone, which the ensemble sampler crosses faster: on the demo
//! system the largest autocorrelation time fell from about 290 to about
//! 170 steps.) Unlike an unbounded angle reduced modulo 2 pi, this keeps
//! the prior proper, which parallel tempering and the evidence need (the
//! hottest chain samples the prior).
//! A non-uniform prior on a periodic angle is wrapped onto the circle,
//! p(theta) = sum_k p(theta + 2 pi k), which is properly normalised.
//!
//! With astrometry alone the orbit (omega, Omega) cannot be told from
//! (omega + pi, Omega + pi), so Omega is restricted to [0, pi): there
//! Omega = atan2(v, u) / 2, the Jacobian carries a further factor 1/2, and
//! the prior on Omega is folded onto [0, pi) (p(W) + p(W + pi)).
//!
//! # Reference epoch and phase
//!
//! The phase is the mean longitude lambda = M(t_ref) + omega at the reference
//! epoch t_ref, by default the mid-point of the data. Unlike the time of
//! periastron it is well defined at e = 0 and barely correlated with the
//! period when t_ref is central. Its prior is uniform, equivalent to a
//! uniform time of periastron over one period. Then
//! T_peri = t_ref - (lambda - omega) P / (2 pi).
//!
//! Parameters whose prior is `fixed` are removed from the vector.
//!
//! A prior whose support reaches outside the physical range (a normal prior
//! on a parallax or a period) is cut by that range: its density is used as
//! given, without renormalising the part that remains. This shifts every
//! evidence computed with the same priors by the same constant.

use std::f64::consts::{LN_2, PI, TAU};

use rand::Rng;
use rand_distr::Distribution;

use crate::astrometry_errors::{astrometry_sources, AstrometryErrorPriors, ErrorBlock};
use crate::data::{Dataset, Star};
use crate::error::ModelError;
use crate::prior::{Prior, PriorShape};
use dyad_orbit::constants::JULIAN_YEAR_DAYS;
use dyad_orbit::{laws, CampbellElements};

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
/// M_sun, mas, km/s). Which of them are used depends on the [`FitMode`].
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
fn checked(prior: Result<Prior, ModelError>) -> Prior {
    prior.expect("the default prior constants are valid")
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

/// Which data the model explains, and hence which parameters exist.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum FitMode {
    /// Relative astrometry and radial velocities.
    Joint,
    /// Relative astrometry alone (no q, no offsets; Omega in [0, pi)).
    AstrometryOnly,
    /// Radial velocities alone (no i, Omega, total mass or parallax; the
    /// semi-amplitudes are sampled instead).
    VelocitiesOnly,
}

impl FitMode {
    /// The mode implied by which data are present.
    pub fn for_dataset(dataset: &Dataset) -> Result<Self, ModelError> {
        match (dataset.astrometry.is_empty(), dataset.velocities.is_empty()) {
            (false, false) => Ok(FitMode::Joint),
            (false, true) => Ok(FitMode::AstrometryOnly),
            (true, false) => Ok(FitMode::VelocitiesOnly),
            (true, true) => Err(ModelError::InvalidModel(
                "no measurements: give an astrometry file, a velocity file, or both".into(),
            )),
        }
    }
}

/// A scalar quantity held fixed or sampled directly or through its logarithm.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Coord {
    Fixed(f64),
    Linear(usize),
    Log(usize),
}

impl Coord {
    /// The index of a coordinate sampled through its logarithm.
    pub(crate) fn log_index(self) -> Option<usize> {
        match self {
            Coord::Log(i) => Some(i),
            _ => None,
        }
    }

    #[inline]
    pub(crate) fn value(self, x: &[f64]) -> f64 {
        match self {
            Coord::Fixed(v) => v,
            Coord::Linear(i) => x[i],
            Coord::Log(i) => x[i].exp(),
        }
    }

    /// ln prior density in the sampled coordinate, including the Jacobian.
    #[inline]
    pub(crate) fn ln_prior(self, x: &[f64], prior: &ScaledPrior) -> f64 {
        match self {
            Coord::Fixed(_) => 0.0,
            Coord::Linear(i) => prior.ln_pdf(x[i]),
            // s = ln q: p(s) = p(q) dq/ds = p(q) q, ln p(s) = ln p(q) + s.
            Coord::Log(i) => prior.ln_pdf_of_log(x[i]),
        }
    }
}

/// An angle represented by an unconstrained 2-vector at indices (u, v).
#[derive(Debug, Clone, Copy, PartialEq)]
struct AnglePair {
    u: usize,
    v: usize,
    /// 1: angle = atan2(v, u) on [0, 2 pi); 2: angle = atan2(v, u) / 2 on [0, pi).
    divisor: f64,
}

impl AnglePair {
    #[inline]
    fn angle(self, x: &[f64]) -> f64 {
        let theta = x[self.v].atan2(x[self.u]);
        reduce_angle(theta / self.divisor, TAU / self.divisor)
    }

    #[inline]
    fn radius_sq(self, x: &[f64]) -> f64 {
        x[self.u] * x[self.u] + x[self.v] * x[self.v]
    }

    /// ln p(u, v) = ln p_angle(angle) - ln(divisor) + ln(2 g(r^2)) (module docs).
    #[inline]
    fn ln_prior(self, x: &[f64], prior: &WrappedAngle) -> f64 {
        let ln_angle = match prior.constant {
            Some(c) => c,
            None => prior.ln_pdf(self.angle(x)),
        };
        ln_angle - self.divisor.ln() + ln_radial_sq_density(self.radius_sq(x))
    }

    /// Writes (u, v) for an angle at radius r.
    fn set(self, out: &mut [f64], angle: f64, radius: f64) {
        let theta = angle * self.divisor;
        out[self.u] = radius * theta.cos();
        out[self.v] = radius * theta.sin();
    }
}

/// Shape k of the Gamma law of r^2 (mean 1): k = 1 is the Rayleigh radius.
const RADIAL_SHAPE: f64 = 4.0;

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
fn reduce_angle(a: f64, period: f64) -> f64 {
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
struct WrappedAngle {
    prior: ScaledPrior,
    period: f64,
    /// Range of k in the sum: every k for which theta + k period can be in
    /// the support (bounded supports), or +-6 periods about the mean.
    k_min: i32,
    k_max: i32,
    /// `Some(ln(1/period))` when the wrapped density is constant: a uniform
    /// prior over a whole number of periods (the usual case).
    constant: Option<f64>,
}

impl WrappedAngle {
    fn new(prior: ScaledPrior, period: f64) -> Self {
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
    fn ln_pdf(&self, theta: f64) -> f64 {
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
    fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> f64 {
        reduce_angle(self.prior.sample(rng), self.period)
    }
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum EccentricityBlock {
    /// (sqrt e cos w, sqrt e sin w) at (i, i + 1).
    Pair(usize),
    /// e sampled, omega fixed.
    EccentricityOnly(usize, f64),
    /// e fixed, omega sampled as an angle pair.
    OmegaOnly(f64, AnglePair),
    /// Both fixed.
    Fixed(f64, f64),
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum NodeBlock {
    Fixed(f64),
    Pair(AnglePair),
}

/// Orbital and mass parameters of one sample, without the per-instrument
/// terms (so it is `Copy` and costs no allocation).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OrbitalParameters {
    /// Period, days.
    pub period_days: f64,
    /// Eccentricity.
    pub eccentricity: f64,
    /// The secondary's argument of periastron, radians in [0, 2 pi).
    pub omega_rad: f64,
    /// Mean longitude M + omega at the reference epoch, radians in [0, 2 pi).
    pub mean_longitude_rad: f64,
    /// A time of periastron, JD, within half a period of the reference epoch.
    pub t_peri_jd: f64,
    /// Inclination, radians in [0, pi] (astrometric modes).
    pub inclination_rad: Option<f64>,
    /// Position angle of the ascending node, radians (astrometric modes).
    pub node_rad: Option<f64>,
    /// Total mass M1 + M2, M_sun (astrometric modes).
    pub total_mass_msun: Option<f64>,
    /// Parallax, mas (astrometric modes).
    pub parallax_mas: Option<f64>,
    /// Relative semi-major axis, au (astrometric modes).
    pub semi_major_axis_au: Option<f64>,
    /// Relative semi-major axis, mas (astrometric modes).
    pub semi_major_axis_mas: Option<f64>,
    /// Mass ratio M2/M1 (joint mode; velocities-only with both stars: K1/K2).
    pub mass_ratio: Option<f64>,
    /// Semi-amplitude of the primary, km/s, when it can be computed.
    pub k1_kms: Option<f64>,
    /// Semi-amplitude of the secondary, km/s, when it can be computed.
    pub k2_kms: Option<f64>,
}

impl OrbitalParameters {
    /// The Campbell elements for `dyad_orbit::Orbit`, with `a` in mas.
    ///
    /// In velocities-only mode the geometric elements a, i and Omega are not
    /// defined; placeholders a = 1, i = 90 deg, Omega = 0 are used, which do
    /// not affect the velocity shape.
    pub fn campbell_elements(&self) -> CampbellElements {
        CampbellElements {
            period_days: self.period_days,
            t_peri_jd: self.t_peri_jd,
            e: self.eccentricity,
            a: self.semi_major_axis_mas.unwrap_or(1.0),
            inc_rad: self.inclination_rad.unwrap_or(PI / 2.0),
            omega_rad: self.omega_rad,
            node_rad: self.node_rad.unwrap_or(0.0),
        }
    }
}

/// All physical parameters of one sample.
#[derive(Debug, Clone, PartialEq)]
pub struct PhysicalParameters {
    /// The orbit and masses.
    pub orbit: OrbitalParameters,
    /// Per instrument: systemic velocity as that instrument measures it, km/s.
    pub offsets_kms: Vec<f64>,
    /// Per instrument: jitter, km/s.
    pub jitters_kms: Vec<f64>,
}

/// The layout of the sampled vector for one data set and set of priors.
#[derive(Debug, Clone)]
pub struct ParameterLayout {
    mode: FitMode,
    names: Vec<String>,
    units: Vec<String>,
    reference_epoch_jd: f64,
    has_primary_velocities: bool,
    has_secondary_velocities: bool,
    priors: ModelPriors,
    omega_wrapped: WrappedAngle,
    node_wrapped: WrappedAngle,
    phase_wrapped: WrappedAngle,
    period: Coord,
    eccentricity: EccentricityBlock,
    phase: AnglePair,
    cos_inclination: Option<Coord>,
    node: Option<NodeBlock>,
    total_mass: Option<Coord>,
    parallax: Option<Coord>,
    mass_ratio: Option<Coord>,
    k1: Option<Coord>,
    k2: Option<Coord>,
    offsets: Vec<Coord>,
    jitters: Vec<Coord>,
    /// The astrometric error model (a block of its own, after the jitters).
    errors: ErrorBlock,
    /// The astrometric sources, in order of first appearance.
    sources: Vec<String>,
}

/// Collects the names and units of the sampled coordinates while a layout
/// is built.
pub(crate) struct Builder {
    names: Vec<String>,
    units: Vec<String>,
}

impl Builder {
    fn push(&mut self, name: &str, unit: &str) -> usize {
        self.names.push(name.to_owned());
        self.units.push(unit.to_owned());
        self.names.len() - 1
    }
    pub(crate) fn scalar(
        &mut self,
        prior: &ScaledPrior,
        log: bool,
        name: &str,
        unit: &str,
    ) -> Coord {
        match prior.fixed_value() {
            Some(v) => Coord::Fixed(v),
            None if log => Coord::Log(self.push(name, unit)),
            None => Coord::Linear(self.push(name, unit)),
        }
    }
    fn angle(&mut self, stem: &str, divisor: f64) -> AnglePair {
        let u = self.push(&format!("{stem}_u"), "1");
        let v = self.push(&format!("{stem}_v"), "1");
        AnglePair { u, v, divisor }
    }
}

/// Checks that a prior has support inside a physical domain [lo, hi] (or
/// [lo, hi) when `open_hi`), and that a fixed value lies in it.
fn check_domain(
    prior: &ScaledPrior,
    what: &str,
    lo: f64,
    hi: f64,
    open_hi: bool,
) -> Result<(), ModelError> {
    let (a, b) = prior.support();
    let close = if open_hi { ")" } else { "]" };
    let overlaps = b >= lo && if open_hi { a < hi } else { a <= hi };
    if !overlaps {
        return Err(ModelError::InvalidPrior(format!(
            "the prior on {what} ({}) has no support in the allowed range [{lo}, {hi}{close}",
            prior.prior().describe()
        )));
    }
    if let Some(v) = prior.fixed_value() {
        let inside = v >= lo && if open_hi { v < hi } else { v <= hi };
        if !inside {
            return Err(ModelError::InvalidPrior(format!(
                "{what} is fixed at {v}, outside the allowed range [{lo}, {hi}{close}"
            )));
        }
    }
    Ok(())
}

impl ParameterLayout {
    /// Builds the layout for a data set and priors. Parameters with a fixed
    /// prior are left out of the vector.
    pub fn new(dataset: &Dataset, priors: &ModelPriors) -> Result<Self, ModelError> {
        let mode = FitMode::for_dataset(dataset)?;
        let n_inst = dataset.instruments.len();
        if priors.offset_kms.len() != n_inst || priors.jitter_kms.len() != n_inst {
            return Err(ModelError::InvalidModel(format!(
                "{} instruments in the data but {} offset and {} jitter priors",
                n_inst,
                priors.offset_kms.len(),
                priors.jitter_kms.len()
            )));
        }
        check_domain(&priors.period_days, "the period", 0.0, f64::INFINITY, false)?;
        check_domain(&priors.eccentricity, "the eccentricity", 0.0, 1.0, true)?;
        if let InclinationPrior::Angle(p) = &priors.inclination {
            check_domain(p, "the inclination", 0.0, PI, false)?;
        }
        if mode != FitMode::VelocitiesOnly {
            check_domain(
                &priors.total_mass_msun,
                "the total mass",
                0.0,
                f64::INFINITY,
                false,
            )?;
            check_domain(
                &priors.parallax_mas,
                "the parallax",
                0.0,
                f64::INFINITY,
                false,
            )?;
        }
        if mode == FitMode::Joint {
            check_domain(
                &priors.mass_ratio,
                "the mass ratio",
                0.0,
                f64::INFINITY,
                false,
            )?;
        }
        for p in &priors.jitter_kms {
            check_domain(p, "a jitter", 0.0, f64::INFINITY, false)?;
        }

        let has_primary_velocities = dataset.velocities.iter().any(|v| v.star == Star::Primary);
        let has_secondary_velocities = dataset.velocities.iter().any(|v| v.star == Star::Secondary);
        let reference_epoch_jd = match priors.reference_epoch_jd {
            Some(t) => t,
            None => data_mid_point(dataset),
        };

        let mut b = Builder {
            names: Vec::new(),
            units: Vec::new(),
        };
        let period = b.scalar(&priors.period_days, true, "ln_period_days", "ln(d)");
        let e_fixed = priors.eccentricity.fixed_value();
        // With e fixed at exactly 0 omega has no meaning: hold it at 0.
        let omega_fixed = match (e_fixed, priors.omega_rad.fixed_value()) {
            (_, Some(w)) => Some(w),
            (Some(0.0), None) => Some(0.0),
            _ => None,
        };
        let eccentricity = match (e_fixed, omega_fixed) {
            (None, None) => {
                let i = b.push("sqrt_e_cos_omega", "1");
                b.push("sqrt_e_sin_omega", "1");
                EccentricityBlock::Pair(i)
            }
            (None, Some(w)) => EccentricityBlock::EccentricityOnly(b.push("eccentricity", "1"), w),
            (Some(e), None) => EccentricityBlock::OmegaOnly(e, b.angle("omega", 1.0)),
            (Some(e), Some(w)) => EccentricityBlock::Fixed(e, w),
        };
        let phase = b.angle("phase", 1.0);
        let astrometric = mode != FitMode::VelocitiesOnly;
        // With velocities alone the data say nothing about i, but an
        // inclination known from elsewhere (eclipses, interferometry) turns
        // M sin^3 i into masses: then i is sampled from its prior.
        let known_inclination = matches!(priors.inclination, InclinationPrior::Angle(_));
        let cos_inclination = if astrometric || known_inclination {
            Some(match &priors.inclination {
                InclinationPrior::Isotropic => Coord::Linear(b.push("cos_inclination", "1")),
                InclinationPrior::Angle(p) => match p.fixed_value() {
                    Some(v) => Coord::Fixed(v.cos()),
                    None => Coord::Linear(b.push("cos_inclination", "1")),
                },
            })
        } else {
            None
        };
        let node_divisor = if mode == FitMode::AstrometryOnly {
            2.0
        } else {
            1.0
        };
        let node = if astrometric {
            Some(match priors.node_rad.fixed_value() {
                Some(v) => NodeBlock::Fixed(reduce_angle(v, TAU / node_divisor)),
                None => NodeBlock::Pair(b.angle("node", node_divisor)),
            })
        } else {
            None
        };
        let total_mass = astrometric.then(|| {
            b.scalar(
                &priors.total_mass_msun,
                true,
                "ln_total_mass_msun",
                "ln(M_sun)",
            )
        });
        let parallax =
            astrometric.then(|| b.scalar(&priors.parallax_mas, false, "parallax_mas", "mas"));
        let mass_ratio = (mode == FitMode::Joint)
            .then(|| b.scalar(&priors.mass_ratio, false, "mass_ratio", "1"));
        let velocities_only = mode == FitMode::VelocitiesOnly;
        let k1 = (velocities_only && has_primary_velocities)
            .then(|| b.scalar(&priors.k1_kms, true, "ln_k1_kms", "ln(km/s)"));
        let k2 = (velocities_only && has_secondary_velocities)
            .then(|| b.scalar(&priors.k2_kms, true, "ln_k2_kms", "ln(km/s)"));
        if velocities_only {
            check_domain(&priors.k1_kms, "K1", 0.0, f64::INFINITY, false)?;
            check_domain(&priors.k2_kms, "K2", 0.0, f64::INFINITY, false)?;
        }
        let mut offsets = Vec::with_capacity(n_inst);
        let mut jitters = Vec::with_capacity(n_inst);
        if mode != FitMode::AstrometryOnly {
            for (k, name) in dataset.instruments.iter().enumerate() {
                offsets.push(b.scalar(
                    &priors.offset_kms[k],
                    false,
                    &format!("offset_kms[{name}]"),
                    "km/s",
                ));
                jitters.push(b.scalar(
                    &priors.jitter_kms[k],
                    true,
                    &format!("ln_jitter_kms[{name}]"),
                    "ln(km/s)",
                ));
            }
        }
        let sources = astrometry_sources(dataset).0;
        let errors = if astrometric {
            ErrorBlock::new(&mut b, &sources, &priors.astrometry_errors)?
        } else {
            ErrorBlock::new(&mut b, &[], &AstrometryErrorPriors::as_given(0))?
        };
        let uniform_circle = ScaledPrior::internal(checked(Prior::uniform(0.0, TAU)));
        Ok(Self {
            mode,
            names: b.names,
            units: b.units,
            reference_epoch_jd,
            has_primary_velocities,
            has_secondary_velocities,
            omega_wrapped: WrappedAngle::new(priors.omega_rad, TAU),
            node_wrapped: WrappedAngle::new(priors.node_rad, TAU / node_divisor),
            phase_wrapped: WrappedAngle::new(uniform_circle, TAU),
            priors: priors.clone(),
            period,
            eccentricity,
            phase,
            cos_inclination,
            node,
            total_mass,
            parallax,
            mass_ratio,
            k1,
            k2,
            offsets,
            jitters,
            errors,
            sources,
        })
    }

    /// The astrometric sources, in order of first appearance (empty with
    /// velocities alone).
    pub fn astrometry_sources(&self) -> &[String] {
        &self.sources
    }

    /// The astrometric error model's priors.
    pub fn astrometry_error_priors(&self) -> &AstrometryErrorPriors {
        self.errors.priors()
    }

    /// Error-scale factor of astrometric source `k`.
    #[inline]
    pub fn error_scale(&self, x: &[f64], k: usize) -> f64 {
        self.errors.scale(x, k)
    }

    /// Added astrometric jitter of source `k`, mas.
    #[inline]
    pub fn astrometric_jitter_mas(&self, x: &[f64], k: usize) -> f64 {
        self.errors.jitter_mas(x, k)
    }

    /// Degrees of freedom of the Student t residuals (`None`: normal).
    #[inline]
    pub fn degrees_of_freedom(&self, x: &[f64]) -> Option<f64> {
        self.errors.degrees_of_freedom(x)
    }

    /// Which data the model explains.
    pub fn mode(&self) -> FitMode {
        self.mode
    }

    /// Number of sampled coordinates.
    pub fn dim(&self) -> usize {
        self.names.len()
    }

    /// Names of the sampled coordinates, in vector order.
    pub fn names(&self) -> &[String] {
        &self.names
    }

    /// Units of the sampled coordinates (`1` for dimensionless, `ln(d)` for
    /// the log of a quantity in days, ...).
    pub fn units(&self) -> &[String] {
        &self.units
    }

    /// The epoch at which the phase is defined, JD.
    pub fn reference_epoch_jd(&self) -> f64 {
        self.reference_epoch_jd
    }

    /// The priors this layout was built with.
    pub fn priors(&self) -> &ModelPriors {
        &self.priors
    }

    /// Whether any primary (secondary) velocities are modelled.
    pub fn has_velocities_of(&self, star: Star) -> bool {
        match star {
            Star::Primary => self.has_primary_velocities,
            Star::Secondary => self.has_secondary_velocities,
        }
    }

    /// Number of instruments with an offset and jitter (0 with astrometry alone).
    pub fn instrument_count(&self) -> usize {
        self.offsets.len()
    }

    /// Offset of instrument `k`, km/s.
    #[inline]
    pub fn offset_kms(&self, x: &[f64], k: usize) -> f64 {
        self.offsets[k].value(x)
    }

    /// Jitter of instrument `k`, km/s.
    #[inline]
    pub fn jitter_kms(&self, x: &[f64], k: usize) -> f64 {
        self.jitters[k].value(x)
    }

    /// The orbit and masses of `x`, or `None` if `x` is outside the domain
    /// of the map (e >= 1, |cos i| > 1, a non-positive mass or parallax, a
    /// non-finite coordinate). Allocates nothing.
    #[inline]
    pub fn orbital(&self, x: &[f64]) -> Option<OrbitalParameters> {
        if x.len() != self.names.len() || x.iter().any(|v| !v.is_finite()) {
            return None;
        }
        let period_days = self.period.value(x);
        let (eccentricity, omega_rad) = match self.eccentricity {
            EccentricityBlock::Pair(i) => {
                let (c, s) = (x[i], x[i + 1]);
                let e = c * c + s * s;
                // omega is undefined at e = 0; atan2(0, 0) = 0 is a fine choice.
                (e, reduce_angle(s.atan2(c), TAU))
            }
            EccentricityBlock::EccentricityOnly(i, w) => (x[i], reduce_angle(w, TAU)),
            EccentricityBlock::OmegaOnly(e, pair) => (e, pair.angle(x)),
            EccentricityBlock::Fixed(e, w) => (e, reduce_angle(w, TAU)),
        };
        if period_days <= 0.0 || !period_days.is_finite() || !(0.0..1.0).contains(&eccentricity) {
            return None;
        }
        let mean_longitude_rad = self.phase.angle(x);
        // T_peri = t_ref - (lambda - omega) P / (2 pi), taken within half a
        // period of t_ref.
        let mut m_ref = (mean_longitude_rad - omega_rad).rem_euclid(TAU);
        if m_ref > PI {
            m_ref -= TAU;
        }
        let t_peri_jd = self.reference_epoch_jd - m_ref / TAU * period_days;

        let mut out = OrbitalParameters {
            period_days,
            eccentricity,
            omega_rad,
            mean_longitude_rad,
            t_peri_jd,
            inclination_rad: None,
            node_rad: None,
            total_mass_msun: None,
            parallax_mas: None,
            semi_major_axis_au: None,
            semi_major_axis_mas: None,
            mass_ratio: None,
            k1_kms: None,
            k2_kms: None,
        };
        if let (Some(ci), Some(node), Some(m), Some(plx)) = (
            self.cos_inclination,
            self.node,
            self.total_mass,
            self.parallax,
        ) {
            let cos_i = ci.value(x);
            if !(-1.0..=1.0).contains(&cos_i) {
                return None;
            }
            let inc = cos_i.acos();
            let node_rad = match node {
                NodeBlock::Fixed(v) => v,
                NodeBlock::Pair(p) => p.angle(x),
            };
            let total_mass = m.value(x);
            let parallax = plx.value(x);
            if !(total_mass > 0.0 && parallax > 0.0 && total_mass.is_finite()) {
                return None;
            }
            let a_au = laws::semi_major_axis_au(total_mass, period_days);
            out.inclination_rad = Some(inc);
            out.node_rad = Some(node_rad);
            out.total_mass_msun = Some(total_mass);
            out.parallax_mas = Some(parallax);
            out.semi_major_axis_au = Some(a_au);
            out.semi_major_axis_mas = Some(a_au * parallax);
            if let Some(q) = self.mass_ratio {
                let q = q.value(x);
                if !(q >= 0.0 && q.is_finite()) {
                    return None;
                }
                let (k1, k2) = laws::semi_amplitudes_kms(a_au, period_days, eccentricity, inc, q);
                out.mass_ratio = Some(q);
                out.k1_kms = Some(k1);
                out.k2_kms = Some(k2);
            }
        } else {
            if let Some(ci) = self.cos_inclination {
                let cos_i = ci.value(x);
                if !(-1.0..=1.0).contains(&cos_i) {
                    return None;
                }
                out.inclination_rad = Some(cos_i.acos());
            }
            out.k1_kms = self.k1.map(|c| c.value(x));
            out.k2_kms = self.k2.map(|c| c.value(x));
            if let (Some(k1), Some(k2)) = (out.k1_kms, out.k2_kms) {
                // K1 / K2 = M2 / M1 (the centre of mass stays put).
                out.mass_ratio = Some(k1 / k2);
            }
        }
        Some(out)
    }

    /// All physical parameters of `x` (allocates the per-instrument vectors).
    pub fn to_physical(&self, x: &[f64]) -> Option<PhysicalParameters> {
        let orbit = self.orbital(x)?;
        Some(PhysicalParameters {
            orbit,
            offsets_kms: (0..self.offsets.len())
                .map(|k| self.offset_kms(x, k))
                .collect(),
            jitters_kms: (0..self.jitters.len())
                .map(|k| self.jitter_kms(x, k))
                .collect(),
        })
    }

    /// The sampled coordinates of physical parameters (inverse of
    /// [`Self::to_physical`]). Angle 2-vectors get radius 1. The phase is
    /// taken from `t_peri_jd` (and the period and omega). Fields the mode
    /// does not use are ignored; fields it needs must be `Some`. With
    /// astrometry alone an Omega outside [0, pi) is mapped to the
    /// equivalent orbit (omega + pi, Omega - pi).
    pub fn from_physical(&self, p: &PhysicalParameters) -> Result<Vec<f64>, ModelError> {
        let need = |v: Option<f64>, what: &str| {
            v.ok_or_else(|| ModelError::InvalidModel(format!("{what} is needed but not given")))
        };
        let o = &p.orbit;
        let mut x = vec![0.0; self.dim()];
        let ln = |v: f64, what: &str| -> Result<f64, ModelError> {
            if v > 0.0 && v.is_finite() {
                Ok(v.ln())
            } else {
                Err(ModelError::InvalidModel(format!(
                    "{what} must be positive, got {v}"
                )))
            }
        };
        let set = |x: &mut Vec<f64>, c: Coord, v: f64, what: &str| -> Result<(), ModelError> {
            match c {
                Coord::Fixed(_) => {}
                Coord::Linear(i) => x[i] = v,
                Coord::Log(i) => x[i] = ln(v, what)?,
            }
            Ok(())
        };
        let mut omega = o.omega_rad;
        let mut node = o.node_rad;
        if self.mode == FitMode::AstrometryOnly {
            if let Some(n) = node {
                let n = reduce_angle(n, TAU);
                if n >= PI {
                    node = Some(n - PI);
                    omega += PI;
                }
            }
        }
        set(&mut x, self.period, o.period_days, "the period")?;
        match self.eccentricity {
            EccentricityBlock::Pair(i) => {
                let r = o.eccentricity.sqrt();
                x[i] = r * omega.cos();
                x[i + 1] = r * omega.sin();
            }
            EccentricityBlock::EccentricityOnly(i, _) => x[i] = o.eccentricity,
            EccentricityBlock::OmegaOnly(_, pair) => {
                pair.set(&mut x, reduce_angle(omega, TAU), 1.0)
            }
            EccentricityBlock::Fixed(..) => {}
        }
        // lambda = M(t_ref) + omega with M(t_ref) = 2 pi (t_ref - T) / P.
        let lambda = TAU * (self.reference_epoch_jd - o.t_peri_jd) / o.period_days + omega;
        self.phase.set(&mut x, reduce_angle(lambda, TAU), 1.0);
        if let Some(c) = self.cos_inclination {
            set(
                &mut x,
                c,
                need(o.inclination_rad, "the inclination")?.cos(),
                "cos i",
            )?;
        }
        if let Some(NodeBlock::Pair(pair)) = self.node {
            let n = need(node, "the node")?;
            pair.set(&mut x, reduce_angle(n, TAU / pair.divisor), 1.0);
        }
        if let Some(c) = self.total_mass {
            set(
                &mut x,
                c,
                need(o.total_mass_msun, "the total mass")?,
                "the total mass",
            )?;
        }
        if let Some(c) = self.parallax {
            set(
                &mut x,
                c,
                need(o.parallax_mas, "the parallax")?,
                "the parallax",
            )?;
        }
        if let Some(c) = self.mass_ratio {
            set(
                &mut x,
                c,
                need(o.mass_ratio, "the mass ratio")?,
                "the mass ratio",
            )?;
        }
        if let Some(c) = self.k1 {
            set(&mut x, c, need(o.k1_kms, "K1")?, "K1")?;
        }
        if let Some(c) = self.k2 {
            set(&mut x, c, need(o.k2_kms, "K2")?, "K2")?;
        }
        for (k, c) in self.offsets.iter().enumerate() {
            let v = p.offsets_kms.get(k).copied();
            set(&mut x, *c, need(v, "an instrument offset")?, "an offset")?;
        }
        for (k, c) in self.jitters.iter().enumerate() {
            let v = p.jitters_kms.get(k).copied();
            set(&mut x, *c, need(v, "an instrument jitter")?, "a jitter")?;
        }
        self.errors.set_typical(&mut x);
        Ok(x)
    }

    /// The log prior density in the sampled coordinates (Jacobians
    /// included), split into one term per block, in a fixed order; their
    /// sum is [`Self::log_prior`]. Useful for tests and diagnosis.
    pub fn log_prior_terms(&self, x: &[f64]) -> Vec<(&'static str, f64)> {
        let mut terms = Vec::with_capacity(10);
        self.for_each_prior_term(x, |name, v| terms.push((name, v)));
        terms
    }

    /// The log prior density in the sampled coordinates, Jacobians
    /// included; `-inf` outside the support. Allocates nothing.
    #[inline]
    pub fn log_prior(&self, x: &[f64]) -> f64 {
        if x.len() != self.names.len() || x.iter().any(|v| !v.is_finite()) {
            return f64::NEG_INFINITY;
        }
        let mut total = 0.0;
        self.for_each_prior_term(x, |_, v| total += v);
        if total.is_nan() {
            f64::NEG_INFINITY
        } else {
            total
        }
    }

    fn for_each_prior_term(&self, x: &[f64], mut term: impl FnMut(&'static str, f64)) {
        let pr = &self.priors;
        term("period", self.period.ln_prior(x, &pr.period_days));
        term(
            "eccentricity and omega",
            match self.eccentricity {
                EccentricityBlock::Pair(i) => {
                    let (c, s) = (x[i], x[i + 1]);
                    let e = c * c + s * s;
                    if e >= 1.0 {
                        f64::NEG_INFINITY
                    } else {
                        // p(x, y) = 2 p(e) p(omega): dx dy = de domega / 2.
                        LN_2 + pr.eccentricity.ln_pdf(e)
                            + match self.omega_wrapped.constant {
                                Some(k) => k,
                                None => self.omega_wrapped.ln_pdf(reduce_angle(s.atan2(c), TAU)),
                            }
                    }
                }
                EccentricityBlock::EccentricityOnly(i, _) => {
                    if (0.0..1.0).contains(&x[i]) {
                        pr.eccentricity.ln_pdf(x[i])
                    } else {
                        f64::NEG_INFINITY
                    }
                }
                EccentricityBlock::OmegaOnly(_, pair) => pair.ln_prior(x, &self.omega_wrapped),
                EccentricityBlock::Fixed(..) => 0.0,
            },
        );
        term("phase", self.phase.ln_prior(x, &self.phase_wrapped));
        if let Some(Coord::Linear(i)) = self.cos_inclination {
            let c = x[i];
            term(
                "inclination",
                if !(-1.0..=1.0).contains(&c) {
                    f64::NEG_INFINITY
                } else {
                    match &pr.inclination {
                        // p(c) = 1/2 on [-1, 1].
                        InclinationPrior::Isotropic => -LN_2,
                        // p(c) = p(i) |di/dc| = p(i) / sin i.
                        InclinationPrior::Angle(p) => {
                            let i = c.acos();
                            p.ln_pdf(i) - i.sin().ln()
                        }
                    }
                },
            );
        }
        if let Some(NodeBlock::Pair(pair)) = self.node {
            term("node", pair.ln_prior(x, &self.node_wrapped));
        }
        if let Some(c) = self.total_mass {
            term("total mass", c.ln_prior(x, &pr.total_mass_msun));
        }
        if let Some(c) = self.parallax {
            term("parallax", c.ln_prior(x, &pr.parallax_mas));
        }
        if let Some(c) = self.mass_ratio {
            let v = c.ln_prior(x, &pr.mass_ratio);
            term(
                "mass ratio",
                if c.value(x) < 0.0 {
                    f64::NEG_INFINITY
                } else {
                    v
                },
            );
        }
        if let Some(c) = self.k1 {
            term("K1", c.ln_prior(x, &pr.k1_kms));
        }
        if let Some(c) = self.k2 {
            term("K2", c.ln_prior(x, &pr.k2_kms));
        }
        for (k, c) in self.offsets.iter().enumerate() {
            term("offset", c.ln_prior(x, &pr.offset_kms[k]));
        }
        for (k, c) in self.jitters.iter().enumerate() {
            term("jitter", c.ln_prior(x, &pr.jitter_kms[k]));
        }
        self.errors.for_each_prior_term(x, &mut term);
    }

    /// One draw from the prior, in sampled coordinates. Angle 2-vectors get
    /// a radius with r^2 ~ Gamma(4, 1/4), so the draw follows exactly the
    /// density [`Self::log_prior`]. Draws outside the physical domain (e.g.
    /// a negative parallax under a normal prior) are redrawn.
    pub fn sample_prior<R: Rng + ?Sized>(&self, rng: &mut R) -> Vec<f64> {
        let mut x = vec![0.0; self.dim()];
        self.sample_prior_into(rng, &mut x);
        x
    }

    /// [`Self::sample_prior`] into a given slice of length [`Self::dim`].
    pub fn sample_prior_into<R: Rng + ?Sized>(&self, rng: &mut R, x: &mut [f64]) {
        let pr = &self.priors;
        let gamma =
            rand_distr::Gamma::new(RADIAL_SHAPE, 1.0 / RADIAL_SHAPE).expect("valid constants");
        let radius = |rng: &mut R| gamma.sample(rng).sqrt();
        // Redraw until inside [lo, hi) (physical domain); bounded attempts.
        let draw = |rng: &mut R, p: &ScaledPrior, lo: f64, hi: f64| {
            let mut v = p.sample(rng);
            for _ in 0..1000 {
                if v >= lo && v < hi && p.contains(v) {
                    break;
                }
                v = p.sample(rng);
            }
            v
        };
        let set = |x: &mut [f64], c: Coord, v: f64| match c {
            Coord::Fixed(_) => {}
            Coord::Linear(i) => x[i] = v,
            Coord::Log(i) => x[i] = v.ln(),
        };
        set(
            x,
            self.period,
            draw(rng, &pr.period_days, f64::MIN_POSITIVE, f64::INFINITY),
        );
        match self.eccentricity {
            EccentricityBlock::Pair(i) => {
                let e = draw(rng, &pr.eccentricity, 0.0, 1.0);
                let w = self.omega_wrapped.sample(rng);
                x[i] = e.sqrt() * w.cos();
                x[i + 1] = e.sqrt() * w.sin();
            }
            EccentricityBlock::EccentricityOnly(i, _) => {
                x[i] = draw(rng, &pr.eccentricity, 0.0, 1.0)
            }
            EccentricityBlock::OmegaOnly(_, pair) => {
                let w = self.omega_wrapped.sample(rng);
                let r = radius(rng);
                pair.set(x, w, r);
            }
            EccentricityBlock::Fixed(..) => {}
        }
        {
            let r = radius(rng);
            let t = rng.gen::<f64>() * TAU;
            x[self.phase.u] = r * t.cos();
            x[self.phase.v] = r * t.sin();
        }
        if let Some(Coord::Linear(i)) = self.cos_inclination {
            x[i] = match &pr.inclination {
                InclinationPrior::Isotropic => rng.gen_range(-1.0..=1.0),
                InclinationPrior::Angle(p) => draw(rng, p, 0.0, PI).cos(),
            };
        }
        if let Some(NodeBlock::Pair(pair)) = self.node {
            let w = self.node_wrapped.sample(rng);
            let r = radius(rng);
            pair.set(x, w, r);
        }
        if let Some(c) = self.total_mass {
            set(
                x,
                c,
                draw(rng, &pr.total_mass_msun, f64::MIN_POSITIVE, f64::INFINITY),
            );
        }
        if let Some(c) = self.parallax {
            set(
                x,
                c,
                draw(rng, &pr.parallax_mas, f64::MIN_POSITIVE, f64::INFINITY),
            );
        }
        if let Some(c) = self.mass_ratio {
            set(x, c, draw(rng, &pr.mass_ratio, 0.0, f64::INFINITY));
        }
        if let Some(c) = self.k1 {
            set(
                x,
                c,
                draw(rng, &pr.k1_kms, f64::MIN_POSITIVE, f64::INFINITY),
            );
        }
        if let Some(c) = self.k2 {
            set(
                x,
                c,
                draw(rng, &pr.k2_kms, f64::MIN_POSITIVE, f64::INFINITY),
            );
        }
        for (k, c) in self.offsets.iter().enumerate() {
            set(
                x,
                *c,
                draw(rng, &pr.offset_kms[k], f64::NEG_INFINITY, f64::INFINITY),
            );
        }
        for (k, c) in self.jitters.iter().enumerate() {
            set(
                x,
                *c,
                draw(rng, &pr.jitter_kms[k], f64::MIN_POSITIVE, f64::INFINITY),
            );
        }
        self.errors.sample_prior(rng, x, &draw);
    }

    /// Whether the inclination is a parameter (always with astrometry; with
    /// velocities alone only when its prior is not the isotropic default).
    pub fn has_inclination(&self) -> bool {
        self.cos_inclination.is_some()
    }

    /// Index of the `ln_period_days` coordinate, if the period is sampled.
    pub fn period_index(&self) -> Option<usize> {
        match self.period {
            Coord::Log(i) | Coord::Linear(i) => Some(i),
            Coord::Fixed(_) => None,
        }
    }
}

/// Mid-point of the span of all epochs in the data set, JD.
pub fn data_mid_point(dataset: &Dataset) -> f64 {
    let times = dataset
        .astrometry
        .iter()
        .map(|a| a.t_jd)
        .chain(dataset.velocities.iter().map(|v| v.t_jd));
    let (lo, hi) = times.fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), t| {
        (lo.min(t), hi.max(t))
    });
    if lo.is_finite() {
        0.5 * (lo + hi)
    } else {
        dyad_orbit::constants::J2000_JD
    }
}

/// Days per Julian year, re-exported for users of the period in years.
pub const DAYS_PER_JULIAN_YEAR: f64 = JULIAN_YEAR_DAYS;
