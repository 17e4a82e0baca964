//! The vector of sampled coordinates and its map to physical parameters:
//! the priors ([`priors`]), angles without walls ([`angles`]), the shared
//! orbital block ([`orbit`]) and the layout of the whole vector
//! ([`ParameterLayout`]), which puts the data terms' own parameters after
//! the orbital block.
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
//! # Order of the vector
//!
//! The orbital block ([`orbit`]: the rows above down to K1, K2, each only
//! when the data terms call for it, see [`crate::terms`]) comes first, then
//! each data term's own parameters in registration order: the velocities'
//! offsets and jitters, then the astrometric error model
//! ([`crate::astrometry_errors`]), then any further terms. This order is
//! part of the output format (chain files, checkpoints): it must not change.
//!
//! A prior whose support reaches outside the physical range (a normal prior
//! on a parallax or a period) is cut by that range: its density is used as
//! given, without renormalising the part that remains. This shifts every
//! evidence computed with the same priors by the same constant.

mod angles;
mod orbit;
mod priors;

use std::sync::Arc;

use rand::{Rng, RngCore};

pub use orbit::{OrbitalParameters, PhysicalParameters};
pub use priors::{defaults, InclinationPrior, ModelPriors, ScaledPrior};

use crate::astrometry_errors::{AstrometryErrorPriors, ResidualDistribution};
use crate::data::{Dataset, Star};
use crate::error::ModelError;
use crate::terms::{DataTerm, OrbitCoverage, RadialVelocities, RelativeAstrometry};
use dyad_orbit::constants::JULIAN_YEAR_DAYS;
use orbit::OrbitBlock;

/// A scalar quantity held fixed or sampled directly or through its logarithm.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Coord {
    /// Held at this value (internal unit); not in the vector.
    Fixed(f64),
    /// Sampled as itself, at this index.
    Linear(usize),
    /// Sampled as its natural logarithm, at this index.
    Log(usize),
}

impl Coord {
    /// The index of a coordinate sampled through its logarithm.
    pub fn log_index(self) -> Option<usize> {
        match self {
            Coord::Log(i) => Some(i),
            _ => None,
        }
    }

    /// The quantity's value (internal unit) at `x`.
    #[inline]
    pub fn value(self, x: &[f64]) -> f64 {
        match self {
            Coord::Fixed(v) => v,
            Coord::Linear(i) => x[i],
            Coord::Log(i) => x[i].exp(),
        }
    }

    /// ln prior density in the sampled coordinate, including the Jacobian.
    #[inline]
    pub fn ln_prior(self, x: &[f64], prior: &ScaledPrior) -> f64 {
        match self {
            Coord::Fixed(_) => 0.0,
            Coord::Linear(i) => prior.ln_pdf(x[i]),
            // s = ln q: p(s) = p(q) dq/ds = p(q) q, ln p(s) = ln p(q) + s.
            Coord::Log(i) => prior.ln_pdf_of_log(x[i]),
        }
    }

    /// Writes the sampled coordinate of a physical value (`what` names it
    /// in the error for a non-positive value of a log coordinate).
    pub fn set(self, x: &mut [f64], v: f64, what: &str) -> Result<(), ModelError> {
        match self {
            Coord::Fixed(_) => {}
            Coord::Linear(i) => x[i] = v,
            Coord::Log(i) => {
                if !(v > 0.0 && v.is_finite()) {
                    return Err(ModelError::InvalidModel(format!(
                        "{what} must be positive, got {v}"
                    )));
                }
                x[i] = v.ln();
            }
        }
        Ok(())
    }

    /// Draws the quantity from its prior, redrawn until inside [lo, hi)
    /// (the physical domain), and writes its coordinate. A fixed quantity
    /// draws too (its point mass), so that the generator's stream does not
    /// depend on which priors are fixed.
    pub fn sample_prior(
        self,
        rng: &mut dyn RngCore,
        prior: &ScaledPrior,
        (lo, hi): (f64, f64),
        x: &mut [f64],
    ) {
        let v = draw_within(rng, prior, lo, hi);
        match self {
            Coord::Fixed(_) => {}
            Coord::Linear(i) => x[i] = v,
            Coord::Log(i) => x[i] = v.ln(),
        }
    }
}

/// A draw of `p` inside [lo, hi) and its support; bounded attempts (the
/// last draw is kept after 1000).
pub(crate) fn draw_within<R: Rng + ?Sized>(rng: &mut R, p: &ScaledPrior, lo: f64, hi: f64) -> f64 {
    let mut v = p.sample(rng);
    for _ in 0..1000 {
        if v >= lo && v < hi && p.contains(v) {
            break;
        }
        v = p.sample(rng);
    }
    v
}

/// Collects the names and units of the sampled coordinates while a layout
/// is built: the orbital block first, then each data term's own.
#[derive(Debug, Default)]
pub struct LayoutBuilder {
    names: Vec<String>,
    units: Vec<String>,
}

impl LayoutBuilder {
    /// Appends a coordinate; returns its index.
    pub fn push(&mut self, name: &str, unit: &str) -> usize {
        self.names.push(name.to_owned());
        self.units.push(unit.to_owned());
        self.names.len() - 1
    }

    /// A scalar quantity with a prior: fixed (not in the vector) if the
    /// prior is a point mass, else sampled as itself or (`log`) as its
    /// logarithm, under `name` (the unit of the sampled coordinate).
    pub fn scalar(&mut self, prior: &ScaledPrior, log: bool, name: &str, unit: &str) -> Coord {
        match prior.fixed_value() {
            Some(v) => Coord::Fixed(v),
            None if log => Coord::Log(self.push(name, unit)),
            None => Coord::Linear(self.push(name, unit)),
        }
    }

    fn angle(&mut self, stem: &str, divisor: f64) -> angles::AnglePair {
        let u = self.push(&format!("{stem}_u"), "1");
        let v = self.push(&format!("{stem}_v"), "1");
        angles::AnglePair { u, v, divisor }
    }
}

/// Checks that a prior has support inside a physical domain [lo, hi] (or
/// [lo, hi) when `open_hi`), and that a fixed value lies in it.
pub fn check_domain(
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

/// The error model of a layout without astrometry: nothing sampled.
static NO_ASTROMETRY_ERRORS: AstrometryErrorPriors = AstrometryErrorPriors {
    scale: Vec::new(),
    jitter_mas: Vec::new(),
    distribution: ResidualDistribution::Normal,
};

/// The layout of the sampled vector: the orbital block, then the data
/// terms' own parameters (module docs, "Order of the vector").
#[derive(Debug, Clone)]
pub struct ParameterLayout {
    names: Vec<String>,
    units: Vec<String>,
    priors: ModelPriors,
    orbit: OrbitBlock,
    /// Every data term, in registration order.
    terms: Vec<Arc<dyn DataTerm>>,
    /// The two standard terms again, typed (also in `terms`).
    velocities: Option<Arc<RadialVelocities>>,
    astrometry: Option<Arc<RelativeAstrometry>>,
}

impl ParameterLayout {
    /// Builds the layout for a data set and priors: the standard terms of
    /// the data set's measurements ([`crate::terms`]), then `extra` terms.
    /// Parameters with a fixed prior are left out of the vector.
    pub fn new(
        dataset: &Dataset,
        priors: &ModelPriors,
        extra: Vec<Box<dyn DataTerm>>,
    ) -> Result<Self, ModelError> {
        let n_inst = dataset.instruments.len();
        if priors.offset_kms.len() != n_inst || priors.jitter_kms.len() != n_inst {
            return Err(ModelError::InvalidModel(format!(
                "{} instruments in the data but {} offset and {} jitter priors",
                n_inst,
                priors.offset_kms.len(),
                priors.jitter_kms.len()
            )));
        }
        let (mut velocities, mut astrometry) = crate::terms::standard_terms(dataset, priors)?;
        let mut extra = extra;
        let mut coverage = OrbitCoverage::default();
        if let Some(t) = &velocities {
            coverage = coverage.union(t.coverage());
        }
        if let Some(t) = &astrometry {
            coverage = coverage.union(t.coverage());
        }
        for t in &extra {
            coverage = coverage.union(t.coverage());
        }
        if !(coverage.sky_projection || coverage.line_of_sight()) {
            return Err(ModelError::InvalidModel(
                "no measurements of the orbit: give an astrometry file, a velocity file, or both"
                    .into(),
            ));
        }
        let reference_epoch_jd = match priors.reference_epoch_jd {
            Some(t) => t,
            None => data_mid_point(dataset),
        };
        let mut b = LayoutBuilder::default();
        let orbit = OrbitBlock::new(&mut b, priors, coverage, reference_epoch_jd)?;
        if let Some(t) = &mut velocities {
            t.declare_parameters(&mut b)?;
        }
        if let Some(t) = &mut astrometry {
            t.declare_parameters(&mut b)?;
        }
        for t in &mut extra {
            t.declare_parameters(&mut b)?;
        }
        let velocities = velocities.map(Arc::new);
        let astrometry = astrometry.map(Arc::new);
        let mut terms: Vec<Arc<dyn DataTerm>> = Vec::new();
        if let Some(t) = &velocities {
            terms.push(t.clone());
        }
        if let Some(t) = &astrometry {
            terms.push(t.clone());
        }
        terms.extend(extra.into_iter().map(Arc::from));
        Ok(Self {
            names: b.names,
            units: b.units,
            priors: priors.clone(),
            orbit,
            terms,
            velocities,
            astrometry,
        })
    }

    /// Every data term, in registration order (the order of their
    /// parameters in the vector).
    pub fn terms(&self) -> &[Arc<dyn DataTerm>] {
        &self.terms
    }

    /// The velocity term, if the data have velocities.
    pub fn velocity_term(&self) -> Option<&RadialVelocities> {
        self.velocities.as_deref()
    }

    /// The relative-astrometry term, if the data have positions.
    pub fn astrometry_term(&self) -> Option<&RelativeAstrometry> {
        self.astrometry.as_deref()
    }

    /// What the data terms constrain together (which orbital parameters
    /// exist).
    pub fn coverage(&self) -> OrbitCoverage {
        self.orbit.coverage()
    }

    /// The astrometric sources, in order of first appearance (empty without
    /// astrometry).
    pub fn astrometry_sources(&self) -> &[String] {
        self.astrometry.as_ref().map_or(&[], |t| t.sources())
    }

    /// The astrometric error model's priors (none without astrometry).
    pub fn astrometry_error_priors(&self) -> &AstrometryErrorPriors {
        self.astrometry
            .as_ref()
            .map_or(&NO_ASTROMETRY_ERRORS, |t| t.error_priors())
    }

    /// Error-scale factor of astrometric source `k` (NaN without astrometry).
    #[inline]
    pub fn error_scale(&self, x: &[f64], k: usize) -> f64 {
        self.astrometry
            .as_ref()
            .map_or(f64::NAN, |t| t.error_scale(x, k))
    }

    /// Added astrometric jitter of source `k`, mas (NaN without astrometry).
    #[inline]
    pub fn astrometric_jitter_mas(&self, x: &[f64], k: usize) -> f64 {
        self.astrometry
            .as_ref()
            .map_or(f64::NAN, |t| t.jitter_mas(x, k))
    }

    /// Degrees of freedom of the Student t residuals (`None`: normal).
    #[inline]
    pub fn degrees_of_freedom(&self, x: &[f64]) -> Option<f64> {
        self.astrometry.as_ref()?.degrees_of_freedom(x)
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
        self.orbit.reference_epoch_jd()
    }

    /// The priors this layout was built with.
    pub fn priors(&self) -> &ModelPriors {
        &self.priors
    }

    /// Whether any primary (secondary) velocities are modelled.
    pub fn has_velocities_of(&self, star: Star) -> bool {
        let c = self.coverage();
        match star {
            Star::Primary => c.primary_velocity,
            Star::Secondary => c.secondary_velocity,
        }
    }

    /// Number of instruments with an offset and jitter (0 without velocities).
    pub fn instrument_count(&self) -> usize {
        self.velocities.as_ref().map_or(0, |t| t.instrument_count())
    }

    /// Offset of instrument `k`, km/s (NaN without velocities).
    #[inline]
    pub fn offset_kms(&self, x: &[f64], k: usize) -> f64 {
        self.velocities
            .as_ref()
            .map_or(f64::NAN, |t| t.offset_kms(x, k))
    }

    /// Jitter of instrument `k`, km/s (NaN without velocities).
    #[inline]
    pub fn jitter_kms(&self, x: &[f64], k: usize) -> f64 {
        self.velocities
            .as_ref()
            .map_or(f64::NAN, |t| t.jitter_kms(x, k))
    }

    /// The orbit and masses of `x`, or `None` if `x` is outside the domain
    /// of the map (e >= 1, |cos i| > 1, a non-positive mass or parallax, a
    /// non-finite coordinate). Allocates nothing.
    #[inline]
    pub fn orbital(&self, x: &[f64]) -> Option<OrbitalParameters> {
        if x.len() != self.names.len() || x.iter().any(|v| !v.is_finite()) {
            return None;
        }
        self.orbit.orbital(x)
    }

    /// All physical parameters of `x` (allocates the per-instrument vectors).
    pub fn to_physical(&self, x: &[f64]) -> Option<PhysicalParameters> {
        let orbit = self.orbital(x)?;
        let n = self.instrument_count();
        Some(PhysicalParameters {
            orbit,
            offsets_kms: (0..n).map(|k| self.offset_kms(x, k)).collect(),
            jitters_kms: (0..n).map(|k| self.jitter_kms(x, k)).collect(),
        })
    }

    /// The sampled coordinates of physical parameters (inverse of
    /// [`Self::to_physical`]). Angle 2-vectors get radius 1. The phase is
    /// taken from `t_peri_jd` (and the period and omega). Fields the data
    /// terms do not use are ignored; fields they need must be `Some`. With
    /// the node folded (astrometry without velocities) an Omega outside
    /// [0, pi) is mapped to the equivalent orbit (omega + pi, Omega - pi).
    /// Parameters that physical parameter sets do not carry (the error
    /// model's, further terms') get a typical value of their prior.
    pub fn from_physical(&self, p: &PhysicalParameters) -> Result<Vec<f64>, ModelError> {
        let mut x = vec![0.0; self.dim()];
        self.orbit.set_from_physical(&p.orbit, &mut x)?;
        for t in &self.terms {
            t.set_from_physical(p, &mut x)?;
        }
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

    fn for_each_prior_term<F: FnMut(&'static str, f64)>(&self, x: &[f64], mut term: F) {
        self.orbit.for_each_prior_term(x, &self.priors, &mut term);
        for t in &self.terms {
            t.for_each_prior_term(x, &mut term);
        }
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
        self.orbit.sample_prior(rng, &self.priors, x);
        // `&mut R` is a sized generator, so it can be passed on as `dyn`;
        // the draws are the same.
        let mut rng = rng;
        for t in &self.terms {
            t.sample_prior(&mut rng, x);
        }
    }

    /// Whether the inclination is a parameter (always with astrometry; with
    /// velocities alone only when its prior is not the isotropic default).
    pub fn has_inclination(&self) -> bool {
        self.orbit.has_inclination()
    }

    /// Index of the `ln_period_days` coordinate, if the period is sampled.
    pub fn period_index(&self) -> Option<usize> {
        match self.orbit.period() {
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
