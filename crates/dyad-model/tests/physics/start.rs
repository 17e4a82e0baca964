//! The starting-point search finds the orbit of the demo data from a wide
//! period prior, deterministically.

use std::path::Path;

use dyad_model::likelihood::Model;
use dyad_model::load::load_dataset;
use dyad_model::params::ModelPriors;
use dyad_model::start::{find_starting_points, nelder_mead, StartSettings};

fn demo_model(name: &str) -> Model {
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../demo-data");
    let data = load_dataset(
        Some(&demo.join(format!("{name}-positions.csv"))),
        &[&demo.join(format!("{name}-velocities.csv"))],
    )
    .unwrap();
    Model::new(data.clone(), &ModelPriors::defaults(&data)).unwrap()
}

#[test]
fn nelder_mead_finds_the_rosenbrock_minimum() {
    // H. H. Rosenbrock, Comput. J. 3, 175 (1960): minimum 0 at (1, 1).
    let f = |x: &[f64]| (1.0 - x[0]).powi(2) + 100.0 * (x[1] - x[0] * x[0]).powi(2);
    let (x, v) = nelder_mead(&f, &[-1.2, 1.0], &[0.1, 0.1], 5000);
    assert!(v < 1e-8, "{v}");
    assert!(
        (x[0] - 1.0).abs() < 1e-3 && (x[1] - 1.0).abs() < 1e-3,
        "{x:?}"
    );
}

#[test]
fn finds_the_demo_orbit_from_a_wide_prior() {
    let model = demo_model("hollins-lantern");
    let settings = StartSettings {
        candidates: 1500,
        ..StartSettings::default()
    };
    let modes = find_starting_points(&model, &settings, None);
    assert!(!modes.is_empty());
    let best = &modes[0];
    let d = model.derived(&best.x);
    let names = model.derived_names_units();
    let get = |n: &str| d[names.iter().position(|(m, _)| m == n).unwrap()];
    // demo-data/hollins-lantern.scenario.toml: P = 28 yr, e = 0.42, i = 58 deg,
    // M1 = 1.35, M2 = 0.92 M_sun. The start is a posterior maximum, so it
    // lies within a few of the (small) posterior widths of the truth.
    assert!(
        (get("period_years") - 28.0).abs() < 1.0,
        "P = {}",
        get("period_years")
    );
    assert!(
        (get("eccentricity") - 0.42).abs() < 0.03,
        "e = {}",
        get("eccentricity")
    );
    assert!(
        (get("inclination_deg") - 58.0).abs() < 2.0,
        "i = {}",
        get("inclination_deg")
    );
    assert!(
        (get("mass_primary_msun") - 1.35).abs() < 0.15,
        "M1 = {}",
        get("mass_primary_msun")
    );
    assert!(
        (get("mass_secondary_msun") - 0.92).abs() < 0.1,
        "M2 = {}",
        get("mass_secondary_msun")
    );
    // Same seed, same answer.
    let again = find_starting_points(&model, &settings, None);
    assert_eq!(again[0].x, best.x);
}
