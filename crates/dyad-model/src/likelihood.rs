//! The log-posterior the sampler explores: the shared orbital block's prior
//! and the sum of the data terms' log-likelihood blocks ([`crate::terms`]).
//!
//! Every term's density is fully normalised, so that evidences computed
//! from these densities are meaningful (the normalisation depends on the
//! data only through the error bars, and, for velocities, on the jitter).
//! The orbit (`dyad_orbit::Orbit`, with its Kepler solver) is built once per
//! call from the orbital parameters and handed to each term; nothing is
//! allocated per call.

use crate::config::RunConfig;
use crate::data::Dataset;
use crate::error::ModelError;
use crate::params::{ModelPriors, OrbitalParameters, ParameterLayout};
use crate::terms::{DataTerm, OrbitCoverage};
use dyad_orbit::Orbit;

pub use crate::terms::astrometry::wrap_angle;

/// The posterior of one binary: data, priors and the parameter layout
/// (the orbital block and the data terms).
#[derive(Debug, Clone)]
pub struct Model {
    layout: ParameterLayout,
    dataset: Dataset,
    /// Number of derived quantities of each term, in registration order.
    derived_per_term: Vec<usize>,
}

impl Model {
    /// Builds the model of a data set under the given priors, with the
    /// standard terms of its measurements.
    pub fn new(dataset: Dataset, priors: &ModelPriors) -> Result<Self, ModelError> {
        Self::with_terms(dataset, priors, Vec::new())
    }

    /// [`Self::new`] with further data terms after the standard ones (their
    /// parameters come last in the vector).
    pub fn with_terms(
        dataset: Dataset,
        priors: &ModelPriors,
        extra: Vec<Box<dyn DataTerm>>,
    ) -> Result<Self, ModelError> {
        let layout = ParameterLayout::new(&dataset, priors, extra)?;
        let derived_per_term = layout
            .terms()
            .iter()
            .map(|t| t.derived_names_units().len())
            .collect();
        Ok(Self {
            layout,
            dataset,
            derived_per_term,
        })
    }

    /// Number of derived quantities of each term, in registration order.
    pub(crate) fn derived_per_term(&self) -> &[usize] {
        &self.derived_per_term
    }

    /// Loads the data named by a run configuration and builds the model
    /// with its priors.
    pub fn from_config(config: &RunConfig) -> Result<Self, ModelError> {
        let dataset = config.load_dataset()?;
        let priors = config.model_priors(&dataset)?;
        Self::new(dataset, &priors)
    }

    /// Number of sampled coordinates.
    pub fn dim(&self) -> usize {
        self.layout.dim()
    }

    /// Names of the sampled coordinates.
    pub fn parameter_names(&self) -> &[String] {
        self.layout.names()
    }

    /// Units of the sampled coordinates.
    pub fn parameter_units(&self) -> &[String] {
        self.layout.units()
    }

    /// The parameter layout (maps to and from physical parameters).
    pub fn layout(&self) -> &ParameterLayout {
        &self.layout
    }

    /// The data.
    pub fn dataset(&self) -> &Dataset {
        &self.dataset
    }

    /// What the data terms constrain together (which orbital parameters
    /// the model has; [`crate::terms`]).
    pub fn coverage(&self) -> OrbitCoverage {
        self.layout.coverage()
    }

    /// Whether the model explains relative astrometry (and so has i,
    /// Omega, the total mass and the parallax).
    pub fn has_astrometry(&self) -> bool {
        self.layout.astrometry_term().is_some()
    }

    /// Whether the model explains radial velocities.
    pub fn has_velocities(&self) -> bool {
        self.layout.velocity_term().is_some()
    }

    /// Whether Omega is folded onto [0, pi) (astrometry without velocities:
    /// the ascending node is not known).
    pub fn node_folded(&self) -> bool {
        self.coverage().node_folded()
    }

    /// Number of scalar observations (2 per astrometric epoch, 1 per
    /// velocity, and those of further terms).
    pub fn observation_count(&self) -> usize {
        self.layout
            .terms()
            .iter()
            .map(|t| t.observation_count())
            .sum()
    }

    /// ln prior density of the sampled coordinates (Jacobians included).
    #[inline]
    pub fn log_prior(&self, x: &[f64]) -> f64 {
        self.layout.log_prior(x)
    }

    /// ln likelihood; `-inf` where the parameters do not describe a bound
    /// orbit. Allocates nothing.
    pub fn log_likelihood(&self, x: &[f64]) -> f64 {
        match self.layout.orbital(x) {
            Some(o) => self.log_likelihood_of(&o, x),
            None => f64::NEG_INFINITY,
        }
    }

    /// ln prior + ln likelihood (the likelihood is not evaluated where the
    /// prior is zero).
    pub fn log_posterior(&self, x: &[f64]) -> f64 {
        let lp = self.log_prior(x);
        if lp == f64::NEG_INFINITY {
            return lp;
        }
        let ll = self.log_likelihood(x);
        let total = lp + ll;
        if total.is_nan() {
            f64::NEG_INFINITY
        } else {
            total
        }
    }

    fn log_likelihood_of(&self, o: &OrbitalParameters, x: &[f64]) -> f64 {
        // Borrowed in place: moving the orbit (its solver holds about 6 KB
        // of tables) out of the Result would copy it.
        let built = Orbit::new(&o.campbell_elements());
        let Ok(orbit) = &built else {
            return f64::NEG_INFINITY;
        };
        let mut ll = 0.0;
        for term in self.layout.terms() {
            ll += term.log_likelihood(orbit, o, x);
        }
        if ll.is_nan() {
            f64::NEG_INFINITY
        } else {
            ll
        }
    }
}
