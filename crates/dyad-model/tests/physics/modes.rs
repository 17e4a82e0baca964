//! Astrometry-only and velocities-only models, and derived quantities.

use dyad_model::data::{Dataset, Star};
use dyad_model::likelihood::Model;
use dyad_model::params::{FitMode, ModelPriors};
use dyad_orbit::laws;

use crate::common::{invented_physical, small_joint_dataset};

fn derived_map(model: &Model, x: &[f64]) -> impl Fn(&str) -> f64 {
    let names: Vec<String> = model
        .derived_names_units()
        .into_iter()
        .map(|(n, _)| n)
        .collect();
    let values = model.derived(x);
    move |name: &str| {
        let i = names
            .iter()
            .position(|n| n == name)
            .unwrap_or_else(|| panic!("no derived {name}"));
        values[i]
    }
}

#[test]
fn derived_quantities_at_known_parameters() {
    let data = small_joint_dataset();
    let model = Model::new(data.clone(), &ModelPriors::defaults(&data)).unwrap();
    let truth = invented_physical();
    let x = model.layout().from_physical(&truth).unwrap();
    let d = derived_map(&model, &x);
    let (m, q, inc) = (2.5, 0.7, 0.9f64);
    // M1 = M/(1+q), M2 = qM/(1+q) (definition of q = M2/M1).
    assert!((d("mass_primary_msun") - m / (1.0 + q)).abs() < 1e-12);
    assert!((d("mass_secondary_msun") - m * q / (1.0 + q)).abs() < 1e-12);
    // Spectroscopic relation (Hilditch 2001): M_{1,2} sin^3 i from K1, K2,
    // P and e must equal the masses times sin^3 i.
    let (k1, k2) = (d("k1_kms"), d("k2_kms"));
    let (a, b) = laws::msini3_msun(k1, k2, 3000.0, 0.4);
    assert!((a - d("mass_primary_msun") * inc.sin().powi(3)).abs() < 1e-6 * a);
    assert!((b - d("mass_secondary_msun") * inc.sin().powi(3)).abs() < 1e-6 * b);
    assert!((d("m1_sin3i_msun") - a).abs() < 1e-6 * a);
    // K1/K2 = q. (The orbital parallax comes from the velocities alone, which
    // here are placeholders: errors::orbital_parallax_from_exact_velocities_*
    // checks it on consistent data.)
    assert!((k1 / k2 - q).abs() < 1e-12);
    // Kepler's third law: a_au^3 / P_yr^2 * k = M (docs/REFERENCE-VALUES.md: k = 1.0000377738).
    let p_yr = 3000.0 / 365.25;
    assert!((1.0000377738 * d("semi_major_axis_au").powi(3) / (p_yr * p_yr) - m).abs() < 1e-8);
    assert!((d("semi_major_axis_mas") - 40.0 * d("semi_major_axis_au")).abs() < 1e-9);
    // Angles and labels: omega of the primary is omega + 180 deg.
    assert!((d("omega_secondary_deg") - 1.1f64.to_degrees()).abs() < 1e-9);
    assert!((d("omega_primary_deg") - (1.1f64.to_degrees() + 180.0)).abs() < 1e-9);
    assert!((d("inclination_deg") - inc.to_degrees()).abs() < 1e-9);
    assert!((d("period_years") - p_yr).abs() < 1e-12);
    // The time of periastron is reported within half a period of the reference epoch.
    let t_ref = model.layout().reference_epoch_jd();
    assert!((d("periastron_time_jd") - t_ref).abs() <= 1500.0 + 1e-6);
    let cycles = (d("periastron_time_jd") - 2_451_200.0) / 3000.0;
    assert!((cycles - cycles.round()).abs() < 1e-9);
    // Per-instrument terms.
    assert!((d("offset_kms[south]") - 12.8).abs() < 1e-12);
    assert!((d("jitter_kms[north]") - 0.2).abs() < 1e-12);
}

#[test]
fn astrometry_alone_folds_the_node() {
    let mut data = small_joint_dataset();
    data.velocities.clear();
    data.instruments.clear();
    let model = Model::new(data.clone(), &ModelPriors::defaults(&data)).unwrap();
    assert_eq!(model.mode(), FitMode::AstrometryOnly);
    assert!(model
        .parameter_names()
        .iter()
        .all(|n| !n.contains("offset") && n != "mass_ratio"));
    let mut truth = invented_physical();
    truth.offsets_kms.clear();
    truth.jitters_kms.clear();
    truth.orbit.node_rad = Some(4.0); // > pi: folded to (omega + pi, Omega - pi)
    let x = model.layout().from_physical(&truth).unwrap();
    let o = model.layout().orbital(&x).unwrap();
    assert!((o.node_rad.unwrap() - (4.0 - std::f64::consts::PI)).abs() < 1e-12);
    assert!((o.omega_rad - (1.1 + std::f64::consts::PI)).abs() < 1e-12);
    // Both members of the pair give the same positions (docs/DESIGN.md Thiele-Innes).
    let joint_data = small_joint_dataset();
    let joint = Model::new(joint_data.clone(), &ModelPriors::defaults(&joint_data)).unwrap();
    let mut unfolded = invented_physical();
    unfolded.orbit.node_rad = Some(4.0);
    let xj = joint.layout().from_physical(&unfolded).unwrap();
    for t in [2_450_000.0, 2_451_234.5, 2_452_900.0] {
        let a = model.predict_position(&x, t).unwrap();
        let b = joint.predict_position(&xj, t).unwrap();
        assert!((a.dra - b.dra).abs() < 1e-9 && (a.ddec - b.ddec).abs() < 1e-9);
    }
    assert_eq!(
        model.velocity_model(&x, 2_450_000.0, Star::Primary, 0),
        None
    );
}

#[test]
fn velocities_alone_sample_semi_amplitudes() {
    let mut data: Dataset = small_joint_dataset();
    data.astrometry.clear();
    let model = Model::new(data.clone(), &ModelPriors::defaults(&data)).unwrap();
    assert_eq!(model.mode(), FitMode::VelocitiesOnly);
    let names = model.parameter_names();
    assert!(names.contains(&"ln_k1_kms".to_owned()) && names.contains(&"ln_k2_kms".to_owned()));
    assert!(names
        .iter()
        .all(|n| n != "cos_inclination" && n != "parallax_mas"));
    // The velocity curves equal those of the joint model with the same K1, K2.
    let joint_data = small_joint_dataset();
    let joint = Model::new(joint_data.clone(), &ModelPriors::defaults(&joint_data)).unwrap();
    let xj = joint.layout().from_physical(&invented_physical()).unwrap();
    let pj = joint.layout().to_physical(&xj).unwrap();
    let x = model.layout().from_physical(&pj).unwrap();
    for t in [2_450_100.0, 2_451_000.0, 2_452_222.0] {
        for star in [Star::Primary, Star::Secondary] {
            let a = model.velocity_model(&x, t, star, 1).unwrap();
            let b = joint.velocity_model(&xj, t, star, 1).unwrap();
            assert!((a - b).abs() < 1e-9, "{star:?} at {t}: {a} vs {b}");
        }
    }
    let d = derived_map(&model, &x);
    assert!((d("mass_ratio") - 0.7).abs() < 1e-12);
    assert!(model.predict_position(&x, 2_450_000.0).is_none());
    // M sin^3 i from K1 and K2 equals that of the joint model.
    let dj = derived_map(&joint, &xj);
    assert!((d("m2_sin3i_msun") - dj("m2_sin3i_msun")).abs() < 1e-9);
}
