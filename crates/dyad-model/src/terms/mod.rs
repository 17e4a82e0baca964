//! Data terms: each kind of measurement contributes its own parameters, its
//! block of the log-likelihood and its derived quantities through one trait,
//! [`DataTerm`]; a model is the shared orbital block plus a list of terms.
//!
//! The standard terms are [`RelativeAstrometry`] (positions of the
//! secondary relative to the primary) and [`RadialVelocities`] (line-of-sight
//! velocities of either star). [`standard_terms`] builds them from the
//! measurements present in a data set; further terms are handed to
//! [`crate::likelihood::Model::with_terms`].
//!
//! # Which orbital parameters exist: the rule
//!
//! Every term shares the orbit shape: the period, e and omega, and the phase
//! are always sampled. The geometry and mass parameters depend on what the
//! terms can tell together. Each term declares what it constrains
//! ([`OrbitCoverage`]); the layout takes the union over the terms and then
//!
//! 1. with the sky projection (relative astrometry): cos i, Omega, the total
//!    mass and the parallax are sampled (a_mas = a_au parallax with a_au
//!    from Kepler's third law); Omega lies on [0, pi) unless some term also
//!    tells the ascending node from the descending one (velocities do), in
//!    which case it lies on [0, 2 pi);
//! 2. with the sky projection and velocities of either star: also the mass
//!    ratio q; the semi-amplitudes then follow from the geometry;
//! 3. with velocities but no sky projection: ln K1 (if there are primary
//!    velocities) and ln K2 (secondary) are sampled instead of the total mass
//!    and parallax; cos i only when its prior is informative (an
//!    inclination known from elsewhere);
//! 4. with neither, there is no orbit to fit: the model is refused.
//!
//! A term that constrains nothing of the orbit (a calibration constant, say)
//! declares an empty coverage and only adds its own parameters.
//!
//! # Order
//!
//! Terms declare their parameters in registration order, after the orbital
//! block: velocities, relative astrometry, then further terms. The same order
//! is used for the prior terms, the prior draws and the derived quantities,
//! so the sampled vector and every draw stay as they were before terms
//! existed (the chain files and checkpoints depend on it): append new kinds
//! at the end.
//!
//! # Adding a kind of measurement
//!
//! A new file implementing [`DataTerm`] (its data, parameters, likelihood
//! block and derived quantities), then either one line in
//! [`standard_terms`] (a kind the data files carry) or a term handed to
//! [`crate::likelihood::Model::with_terms`]. The test
//! `tests/physics/toy_term.rs` adds a constant-offset term in one file.

pub mod astrometry;
mod lanes;
pub mod velocities;

use rand::RngCore;

use crate::data::Dataset;
use crate::error::ModelError;
use crate::params::{LayoutBuilder, ModelPriors, OrbitalParameters, PhysicalParameters};
use dyad_orbit::Orbit;

pub use astrometry::RelativeAstrometry;
pub use velocities::RadialVelocities;

/// What a term's measurements can tell about the orbit; the union over the
/// terms decides which orbital parameters are sampled (module docs, "the
/// rule").
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct OrbitCoverage {
    /// The relative orbit's projection on the sky (i, Omega up to a half
    /// turn, the angular semi-major axis).
    pub sky_projection: bool,
    /// Which node is the ascending one (the sense of the line-of-sight
    /// motion).
    pub ascending_node: bool,
    /// Line-of-sight velocities of the primary.
    pub primary_velocity: bool,
    /// Line-of-sight velocities of the secondary.
    pub secondary_velocity: bool,
}

impl OrbitCoverage {
    /// What two sets of terms constrain together.
    pub fn union(self, other: Self) -> Self {
        Self {
            sky_projection: self.sky_projection || other.sky_projection,
            ascending_node: self.ascending_node || other.ascending_node,
            primary_velocity: self.primary_velocity || other.primary_velocity,
            secondary_velocity: self.secondary_velocity || other.secondary_velocity,
        }
    }

    /// Velocities of either star.
    pub fn line_of_sight(self) -> bool {
        self.primary_velocity || self.secondary_velocity
    }

    /// Whether Omega is folded onto [0, pi): the sky projection is known
    /// but not which node is ascending.
    pub fn node_folded(self) -> bool {
        self.sky_projection && !self.ascending_node
    }
}

/// One kind of measurement: its data, its own parameters, its block of the
/// log-likelihood and its derived quantities.
///
/// A term is built with its data and the priors of its own parameters, then
/// [`DataTerm::declare_parameters`] is called once, after the orbital block
/// and the terms registered before it; the indices it gets there are where
/// its parameters sit in every vector `x` it is later handed.
pub trait DataTerm: std::fmt::Debug + Send + Sync {
    /// A short name for messages ("relative astrometry").
    fn name(&self) -> &'static str;

    /// What the measurements constrain of the orbit.
    fn coverage(&self) -> OrbitCoverage;

    /// Number of scalar observations (2 per astrometric epoch, 1 per velocity).
    fn observation_count(&self) -> usize;

    /// Adds the term's own sampled coordinates (names, units, and how each
    /// is sampled given its prior) to the layout.
    fn declare_parameters(&mut self, layout: &mut LayoutBuilder) -> Result<(), ModelError>;

    /// Calls `term` with each ln prior term of the term's own parameters,
    /// Jacobians included, in a fixed order. Allocates nothing.
    fn for_each_prior_term(&self, x: &[f64], term: &mut dyn FnMut(&'static str, f64));

    /// Draws the term's own parameters from their prior into `x`.
    fn sample_prior(&self, rng: &mut dyn RngCore, x: &mut [f64]);

    /// Writes the term's own coordinates of a physical parameter set into
    /// `x` (a typical value of the prior for parameters the set does not
    /// carry).
    fn set_from_physical(&self, p: &PhysicalParameters, x: &mut [f64]) -> Result<(), ModelError>;

    /// The term's block of the ln likelihood at `x`, with the orbit
    /// `orbit` built from `o`; `-inf` where its parameters are outside
    /// their domain. Called for every proposal: must allocate nothing.
    fn log_likelihood(&self, orbit: &Orbit, o: &OrbitalParameters, x: &[f64]) -> f64;

    /// Names and units of the term's derived quantities (columns of the
    /// samples table), in the order of [`DataTerm::derived`].
    fn derived_names_units(&self) -> Vec<(String, String)>;

    /// The derived quantities of `x` into `out` (as long as
    /// [`DataTerm::derived_names_units`]).
    fn derived(&self, o: &OrbitalParameters, x: &[f64], out: &mut [f64]);
}

/// The standard terms of the measurements in a data set: velocities (if
/// any) and relative astrometry (if any). Their parameters' priors come from
/// `priors`.
pub(crate) fn standard_terms(
    dataset: &Dataset,
    priors: &ModelPriors,
) -> Result<(Option<RadialVelocities>, Option<RelativeAstrometry>), ModelError> {
    let velocities = (!dataset.velocities.is_empty())
        .then(|| RadialVelocities::new(dataset, priors))
        .transpose()?;
    let astrometry = (!dataset.astrometry.is_empty())
        .then(|| RelativeAstrometry::new(dataset, priors))
        .transpose()?;
    Ok((velocities, astrometry))
}
