//! Velocities alone with an inclination known from elsewhere (an eclipse, an
//! interferometric orbit): the masses and the semi-major axis follow from
//! M sin^3 i and a sin i.

use dyad_model::data::Dataset;
use dyad_model::likelihood::Model;
use dyad_model::params::{InclinationPrior, ModelPriors, ScaledPrior};
use dyad_model::prior::Prior;

use crate::common::{invented_physical, small_joint_dataset};

fn velocities_only() -> Dataset {
    let mut data = small_joint_dataset();
    data.astrometry.clear();
    data
}

fn model_with(inclination: InclinationPrior) -> Model {
    let data = velocities_only();
    let mut priors = ModelPriors::defaults(&data);
    priors.inclination = inclination;
    Model::new(data, &priors).expect("valid model")
}

fn derived(model: &Model, x: &[f64], name: &str) -> f64 {
    let names = model.derived_names_units();
    let k = names
        .iter()
        .position(|(n, _)| n == name)
        .unwrap_or_else(|| panic!("no derived {name}"));
    model.derived(x)[k]
}

/// K1 = 30, K2 = 45 km/s, P = 10 d, e = 0.2, i = 80 deg (invented values).
fn parameters_at(model: &Model) -> Vec<f64> {
    let mut p = invented_physical();
    p.orbit.period_days = 10.0;
    p.orbit.eccentricity = 0.2;
    p.orbit.t_peri_jd = 2_451_000.0;
    p.orbit.k1_kms = Some(30.0);
    p.orbit.k2_kms = Some(45.0);
    p.orbit.inclination_rad = Some(80f64.to_radians());
    p.orbit.node_rad = None;
    p.orbit.total_mass_msun = None;
    p.orbit.parallax_mas = None;
    p.orbit.mass_ratio = None;
    model.layout().from_physical(&p).expect("inside the domain")
}

#[test]
fn a_known_inclination_turns_minimum_masses_into_masses() {
    let fixed = Prior::fixed(80f64.to_radians()).unwrap();
    let model = model_with(InclinationPrior::Angle(ScaledPrior::internal(fixed)));
    // A fixed inclination adds no sampled coordinate.
    assert!(!model
        .parameter_names()
        .iter()
        .any(|n| n == "cos_inclination"));
    let x = parameters_at(&model);

    // M1,2 sin^3 i = C (1 - e^2)^(3/2) (K1 + K2)^2 K2,1 P with
    // C = 1.036149e-7 M_sun, and a sin i = 13750.9871 (1 - e^2)^(1/2) (K1 + K2) P km
    // (docs/REFERENCE-VALUES.md; textbook values in R. W. Hilditch, An
    // Introduction to Close Binary Stars, 2001).
    let (k1, k2, p, e) = (30.0f64, 45.0f64, 10.0f64, 0.2f64);
    let sin_i = 80f64.to_radians().sin();
    let c = 1.036149e-7 * (1.0 - e * e).powf(1.5) * (k1 + k2).powi(2) * p;
    let (m1, m2) = (c * k2 / sin_i.powi(3), c * k1 / sin_i.powi(3));
    let a_au = 13750.9871 * (1.0 - e * e).sqrt() * (k1 + k2) * p / sin_i / 149_597_870.7;
    let close = |got: f64, want: f64| (got / want - 1.0).abs() < 2e-6;
    let checks = [
        ("mass_primary_msun", m1),
        ("mass_secondary_msun", m2),
        ("total_mass_msun", m1 + m2),
        ("semi_major_axis_au", a_au),
        ("inclination_deg", 80.0),
        ("m1_sin3i_msun", m1 * sin_i.powi(3)),
    ];
    for (name, want) in checks {
        let got = derived(&model, &x, name);
        assert!(close(got, want), "{name}: {got} vs {want}");
    }
}

#[test]
fn a_sampled_inclination_follows_its_prior_and_the_isotropic_default_gives_no_masses() {
    let isotropic = model_with(InclinationPrior::Isotropic);
    let names = isotropic.derived_names_units();
    assert!(!names.iter().any(|(n, _)| n == "mass_primary_msun"));
    assert!(!names.iter().any(|(n, _)| n == "inclination_deg"));

    // A normal prior N(80, 2) deg: the inclination is sampled through cos i,
    // whose density is p(i) / sin i (change of variables; common practice).
    let deg = std::f64::consts::PI / 180.0;
    let normal = ScaledPrior::new(Prior::normal(80.0, 2.0).unwrap(), deg);
    let model = model_with(InclinationPrior::Angle(normal));
    let k = model
        .parameter_names()
        .iter()
        .position(|n| n == "cos_inclination")
        .expect("cos i is sampled");
    let mut x = parameters_at(&model);
    let prior_at = |x: &[f64]| model.log_prior(x);
    let base = prior_at(&x);
    for i_deg in [76.0f64, 79.0, 83.5] {
        let i = i_deg.to_radians();
        x[k] = i.cos();
        // Relative to i = 80 deg, where the normal's exponent is zero.
        let z = (i_deg - 80.0) / 2.0;
        let want = -0.5 * z * z - i.sin().ln() + 80f64.to_radians().sin().ln();
        let got = prior_at(&x) - base;
        assert!((got - want).abs() < 1e-9, "i = {i_deg}: {got} vs {want}");
        assert!(derived(&model, &x, "mass_primary_msun").is_finite());
    }
}
