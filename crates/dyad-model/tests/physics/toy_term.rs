//! A toy data term added from outside the crate: repeated measurements
//! y_k +- sigma_k of one constant offset c (an instrument zero point, say),
//! with one parameter and a Gaussian likelihood. It shows what adding a kind
//! of measurement takes: this file (the term and its checks) and one line of
//! registration (`Model::with_terms`), nothing in the crate itself.

use std::f64::consts::PI;

use dyad_model::data::Dataset;
use dyad_model::error::ModelError;
use dyad_model::likelihood::Model;
use dyad_model::params::{
    Coord, LayoutBuilder, ModelPriors, OrbitalParameters, PhysicalParameters, ScaledPrior,
};
use dyad_model::prior::Prior;
use dyad_model::terms::{DataTerm, OrbitCoverage};
use dyad_orbit::Orbit;
use rand::{RngCore, SeedableRng};

use crate::common::{invented_physical, small_joint_dataset};

/// Measurements (value, error) of one constant, in mas.
#[derive(Debug, Clone)]
struct ConstantOffset {
    measurements: Vec<(f64, f64)>,
    prior: ScaledPrior,
    offset: Coord,
}

impl ConstantOffset {
    fn new(measurements: Vec<(f64, f64)>, prior: ScaledPrior) -> Self {
        Self {
            measurements,
            prior,
            offset: Coord::Fixed(f64::NAN),
        }
    }
}

impl DataTerm for ConstantOffset {
    fn name(&self) -> &'static str {
        "constant offset"
    }

    fn coverage(&self) -> OrbitCoverage {
        // Says nothing about the orbit.
        OrbitCoverage::default()
    }

    fn observation_count(&self) -> usize {
        self.measurements.len()
    }

    fn declare_parameters(&mut self, layout: &mut LayoutBuilder) -> Result<(), ModelError> {
        self.offset = layout.scalar(&self.prior, false, "toy_offset_mas", "mas");
        Ok(())
    }

    fn for_each_prior_term(&self, x: &[f64], term: &mut dyn FnMut(&'static str, f64)) {
        term("toy offset", self.offset.ln_prior(x, &self.prior));
    }

    fn sample_prior(&self, rng: &mut dyn RngCore, x: &mut [f64]) {
        self.offset
            .sample_prior(rng, &self.prior, (f64::NEG_INFINITY, f64::INFINITY), x);
    }

    fn set_from_physical(&self, _: &PhysicalParameters, x: &mut [f64]) -> Result<(), ModelError> {
        self.offset.set(x, self.prior.mean(), "the toy offset")
    }

    fn log_likelihood(&self, _: &Orbit, _: &OrbitalParameters, x: &[f64]) -> f64 {
        let c = self.offset.value(x);
        self.measurements
            .iter()
            .map(|&(y, s)| -0.5 * ((y - c) / s).powi(2) - 0.5 * (2.0 * PI * s * s).ln())
            .sum()
    }

    fn derived_names_units(&self) -> Vec<(String, String)> {
        vec![("toy_offset_mas".into(), "mas".into())]
    }

    fn derived(&self, _: &OrbitalParameters, x: &[f64], out: &mut [f64]) {
        out[0] = self.offset.value(x);
    }
}

/// Invented measurements of the constant, mas.
const MEASUREMENTS: [(f64, f64); 4] = [(1.3, 0.5), (0.4, 0.8), (1.1, 0.3), (2.0, 1.5)];

fn models() -> (Dataset, Model, Model) {
    let data = small_joint_dataset();
    let priors = ModelPriors::defaults(&data);
    let base = Model::new(data.clone(), &priors).unwrap();
    let prior = ScaledPrior::internal(Prior::normal(0.0, 10.0).unwrap());
    let toy = ConstantOffset::new(MEASUREMENTS.to_vec(), prior);
    let with_toy = Model::with_terms(data.clone(), &priors, vec![Box::new(toy)]).unwrap();
    (data, base, with_toy)
}

#[test]
fn a_toy_term_appends_its_parameter_and_leaves_the_rest_of_the_layout_alone() {
    let (_, base, model) = models();
    let n = base.dim();
    assert_eq!(model.dim(), n + 1);
    assert_eq!(&model.parameter_names()[..n], base.parameter_names());
    assert_eq!(model.parameter_names()[n], "toy_offset_mas");
    assert_eq!(model.parameter_units()[n], "mas");
    assert_eq!(model.observation_count(), base.observation_count() + 4);
    // The coverage (hence the orbital parameters) is unchanged.
    assert_eq!(model.coverage(), base.coverage());
    // The same seed gives the same draws of the other parameters: the toy
    // parameter is drawn last.
    let mut r1 = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(9);
    let mut r2 = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(9);
    let a = base.layout().sample_prior(&mut r1);
    let b = model.layout().sample_prior(&mut r2);
    assert_eq!(&b[..n], &a[..]);
    assert!(b[n].is_finite());
    // Derived: the base quantities, then the toy's.
    let names = model.derived_names_units();
    assert_eq!(&names[..names.len() - 1], &base.derived_names_units()[..]);
    assert_eq!(names.last().unwrap().0, "toy_offset_mas");
}

#[test]
fn the_toy_term_adds_its_gaussian_likelihood_and_prior() {
    let (_, base, model) = models();
    let n = base.dim();
    let x_base = base.layout().from_physical(&invented_physical()).unwrap();
    let mut x = model.layout().from_physical(&invented_physical()).unwrap();
    assert_eq!(&x[..n], &x_base[..]);
    // from_physical puts the toy offset at its prior mean.
    assert_eq!(x[n], 0.0);
    for c in [-3.0, 0.0, 0.7, 1.2, 4.0] {
        x[n] = c;
        // Reference: the normalised Gaussian density of each measurement
        // (common practice), written out here independently of the term.
        let expected: f64 = MEASUREMENTS
            .iter()
            .map(|&(y, s)| {
                let z: f64 = (y - c) / s;
                -0.5 * z * z - (s * (2.0 * PI).sqrt()).ln()
            })
            .sum();
        let added = model.log_likelihood(&x) - base.log_likelihood(&x_base);
        assert!(
            (added - expected).abs() < 1e-9,
            "c = {c}: {added} vs {expected}"
        );
        // Normal(0, 10) prior on c.
        let prior = -0.5 * (c / 10.0f64).powi(2) - (10.0 * (2.0 * PI).sqrt()).ln();
        let added_prior = model.log_prior(&x) - base.log_prior(&x_base);
        assert!(
            (added_prior - prior).abs() < 1e-9,
            "c = {c}: {added_prior} vs {prior}"
        );
        assert_eq!(*model.derived(&x).last().unwrap(), c);
    }
}

#[test]
fn the_toy_likelihood_peaks_at_the_inverse_variance_weighted_mean() {
    // Reference: the maximum-likelihood estimate of a constant from
    // Gaussian measurements is the inverse-variance weighted mean (common
    // practice); the log-likelihood is a parabola about it.
    let (_, _, model) = models();
    let n = model.dim() - 1;
    let (sum_w, sum_wy) = MEASUREMENTS.iter().fold((0.0, 0.0), |(w, wy), &(y, s)| {
        (w + s.powi(-2), wy + y * s.powi(-2))
    });
    let mean = sum_wy / sum_w;
    let mut x = model.layout().from_physical(&invented_physical()).unwrap();
    let mut ll = |c: f64| {
        x[n] = c;
        model.log_likelihood(&x)
    };
    let peak = ll(mean);
    for d in [0.01, 0.1, 1.0] {
        let (lo, hi) = (ll(mean - d), ll(mean + d));
        assert!(lo < peak && hi < peak);
        assert!((lo - hi).abs() < 1e-9 * peak.abs(), "{lo} vs {hi}");
        // Curvature: ln L(mean + d) = ln L(mean) - d^2 sum_w / 2.
        assert!((peak - hi - 0.5 * d * d * sum_w).abs() < 1e-8 * peak.abs());
    }
}

#[test]
fn a_term_that_constrains_no_orbit_alone_is_refused() {
    let prior = ScaledPrior::internal(Prior::normal(0.0, 10.0).unwrap());
    let toy = ConstantOffset::new(MEASUREMENTS.to_vec(), prior);
    let empty = Dataset::default();
    let err = Model::with_terms(
        empty.clone(),
        &ModelPriors::defaults(&empty),
        vec![Box::new(toy)],
    )
    .unwrap_err();
    assert!(err.to_string().contains("no measurements"), "{err}");
}
