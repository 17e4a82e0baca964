//! `dyad simulate`: the handbook check of Meeus, the round trip through
//! the loader, atomic writing and refusal to overwrite.

use std::path::Path;

use dyad_model::data::RelativePosition;
use dyad_model::likelihood::Model;
use dyad_model::load::{load_astrometry, load_dataset};
use dyad_model::params::{ModelPriors, OrbitalParameters, PhysicalParameters};
use dyad_model::simulate::{run_scenario_file, Scenario};

/// J. Meeus, Astronomical Algorithms (2nd ed., 1998), Example 57.a: eta
/// Coronae Borealis, P = 41.623 yr, T = 1934.008, e = 0.2763, a = 0.907",
/// i = 59.025 deg, Omega = 23.717 deg, omega = 219.907 deg. At 1980.0 the
/// book prints theta = 318.4 deg, rho = 0.411"; docs/REFERENCE-VALUES.md gives the
/// full-precision values 318.42426 deg and 0.4110178". The book's epochs are
/// decimal years used directly, so the scenario uses jyear with P in years.
const MEEUS: &str = r#"
noise = false
[system]
name = "eta CrB, Meeus Example 57.a (test check only)"
period_years = 41.623
periastron_time_jyear = 1934.008
eccentricity = 0.2763
semi_major_axis_arcsec = 0.907
inclination_deg = 59.025
node_deg = 23.717
periastron_argument_deg = 219.907
[astrometry]
file = "meeus.csv"
time_column = "jyear"
form = "polar"
epochs = [1980.0]
separation_error_arcsec = 0.01
position_angle_error_deg = 1.0
"#;

#[test]
fn meeus_example_57a() {
    let dir = tempfile::tempdir().unwrap();
    let scenario = dir.path().join("meeus.toml");
    std::fs::write(&scenario, MEEUS).unwrap();
    let written = run_scenario_file(&scenario, false).unwrap();
    assert_eq!(written, vec![dir.path().join("meeus.csv")]);
    let epochs = load_astrometry(&written[0]).unwrap();
    assert_eq!(epochs.len(), 1);
    let RelativePosition::Polar {
        sep_mas, pa_rad, ..
    } = epochs[0].position
    else {
        panic!("expected a polar epoch");
    };
    let theta = pa_rad.to_degrees();
    let rho = sep_mas / 1000.0;
    // The book's printed precision.
    assert_eq!(format!("{theta:.1}"), "318.4");
    assert_eq!(format!("{rho:.3}"), "0.411");
    // Full precision, to the rounding of the written file (1e-5 deg, 1e-7").
    assert!((theta - 318.42426).abs() < 2e-5, "theta {theta}");
    assert!((rho - 0.4110178).abs() < 2e-7, "rho {rho}");
}

const SMALL: &str = r#"
seed = 5
noise = NOISE
[system]
name = "test pair (invented)"
period_days = 4000.0
periastron_time_jd = 2451000.0
eccentricity = 0.35
inclination_deg = 120.0
periastron_argument_deg = 40.0
node_deg = 250.0
mass_primary_msun = 1.2
mass_secondary_msun = 0.8
parallax_mas = 30.0
systemic_velocity_kms = 5.0
[astrometry]
file = "pos.csv"
time_column = "mjd"
form = "cartesian"
first = 50000.0
last = 54000.0
count = 25
dra_error_mas = 1.0
ddec_error_mas = 1.5
corr = 0.3
[velocities]
file = "rv.csv"
time_column = "jd"
[[velocities.instruments]]
name = "alpha"
stars = ["primary", "secondary"]
first = 2450500.0
last = 2454500.0
count = 20
error_kms = 0.3
offset_kms = 0.0
[[velocities.instruments]]
name = "beta"
stars = ["primary"]
epochs = [2451100.0, 2452100.0, 2453100.0]
error_kms = 0.5
offset_kms = 1.5
jitter_kms = 0.2
"#;

fn truth() -> PhysicalParameters {
    PhysicalParameters {
        orbit: OrbitalParameters {
            period_days: 4000.0,
            eccentricity: 0.35,
            omega_rad: 40f64.to_radians(),
            mean_longitude_rad: 0.0,
            t_peri_jd: 2_451_000.0,
            inclination_rad: Some(120f64.to_radians()),
            node_rad: Some(250f64.to_radians()),
            total_mass_msun: Some(2.0),
            parallax_mas: Some(30.0),
            semi_major_axis_au: None,
            semi_major_axis_mas: None,
            mass_ratio: Some(0.8 / 1.2),
            k1_kms: None,
            k2_kms: None,
        },
        offsets_kms: vec![5.0, 6.5],
        jitters_kms: vec![1e-6, 0.2],
    }
}

fn simulate(dir: &Path, noise: bool) -> Model {
    let scenario = dir.join("small.toml");
    std::fs::write(
        &scenario,
        SMALL.replace("NOISE", if noise { "true" } else { "false" }),
    )
    .unwrap();
    let written = run_scenario_file(&scenario, true).unwrap();
    assert_eq!(written.len(), 2);
    let data = load_dataset(Some(&dir.join("pos.csv")), &[&dir.join("rv.csv")]).unwrap();
    assert_eq!(data.astrometry.len(), 25);
    assert_eq!(data.velocities.len(), 43);
    assert_eq!(
        data.instruments,
        vec!["alpha".to_owned(), "beta".to_owned()]
    );
    Model::new(data.clone(), &ModelPriors::defaults(&data)).unwrap()
}

#[test]
fn noise_free_round_trip_through_the_loader() {
    // Read back, the noise-free files agree with the true orbit to the
    // rounding of the written numbers (1e-4 mas, 1e-4 km/s).
    let dir = tempfile::tempdir().unwrap();
    let model = simulate(dir.path(), false);
    let x = model.layout().from_physical(&truth()).unwrap();
    let r = model.residuals(&x).unwrap();
    for a in &r.astrometry {
        assert!(
            a.residual[0].abs() < 2e-4 && a.residual[1].abs() < 2e-4,
            "{a:?}"
        );
    }
    for v in &r.velocities {
        assert!(v.residual_kms.abs() < 2e-4, "{v:?}");
    }
}

#[test]
fn noisy_residuals_have_the_stated_scatter() {
    // With noise, normalised residuals have chi^2 / n near 1: for n = 93
    // numbers the 5-sigma range of chi^2/n is 1 +- 5 sqrt(2/93) = [0.27, 1.73].
    let dir = tempfile::tempdir().unwrap();
    let model = simulate(dir.path(), true);
    let x = model.layout().from_physical(&truth()).unwrap();
    let r = model.residuals(&x).unwrap();
    let mut chi2 = 0.0;
    let mut n = 0usize;
    for a in &r.astrometry {
        // Correlated pair: chi^2 = r^T C^-1 r with corr 0.3.
        let (z1, z2) = (a.residual[0] / a.error[0], a.residual[1] / a.error[1]);
        chi2 += (z1 * z1 - 2.0 * 0.3 * z1 * z2 + z2 * z2) / (1.0 - 0.09);
        n += 2;
    }
    for v in &r.velocities {
        chi2 += (v.residual_kms / v.error_kms).powi(2);
        n += 1;
    }
    let reduced = chi2 / n as f64;
    assert_eq!(n, 93);
    assert!((0.27..1.73).contains(&reduced), "chi2/n = {reduced}");
}

#[test]
fn same_seed_same_files_and_no_overwrite_without_asking() {
    let dir = tempfile::tempdir().unwrap();
    let scenario = dir.path().join("small.toml");
    std::fs::write(&scenario, SMALL.replace("NOISE", "true")).unwrap();
    run_scenario_file(&scenario, false).unwrap();
    let first = std::fs::read_to_string(dir.path().join("rv.csv")).unwrap();
    // Refused, naming the file, and nothing changed.
    std::fs::write(dir.path().join("pos.csv"), "sentinel").unwrap();
    let err = run_scenario_file(&scenario, false).unwrap_err().to_string();
    assert!(
        err.contains("pos.csv") && err.contains("overwrite"),
        "{err}"
    );
    assert_eq!(
        std::fs::read_to_string(dir.path().join("pos.csv")).unwrap(),
        "sentinel"
    );
    // Asked: replaced, identical to the first run, and no temporary files left.
    run_scenario_file(&scenario, true).unwrap();
    assert_eq!(
        std::fs::read_to_string(dir.path().join("rv.csv")).unwrap(),
        first
    );
    let names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(names.iter().all(|n| !n.contains(".tmp")), "{names:?}");
}

#[test]
fn scenario_errors_name_the_key() {
    let path = Path::new("bad.toml");
    let cases = [
        (
            SMALL.replace("eccentricity = 0.35", "eccentricity = 1.5"),
            "system.eccentricity",
        ),
        (
            SMALL.replace("count = 25", "count = 25\nwobble = 1"),
            "astrometry.wobble",
        ),
        (
            SMALL.replace("form = \"cartesian\"", "form = \"sideways\""),
            "astrometry.form",
        ),
        (
            SMALL.replace("stars = [\"primary\"]", "stars = 3"),
            "velocities.instruments[1].stars",
        ),
    ];
    for (text, key) in cases {
        let text = text.replace("NOISE", "true");
        let err = Scenario::from_toml_str(&text, path)
            .unwrap_err()
            .to_string();
        assert!(
            err.contains(&format!("'{key}'")) && err.contains("bad.toml"),
            "{key}: {err}"
        );
    }
}

#[test]
fn demo_scenarios_reproduce_the_shipped_files() {
    // demo-data/ holds scenario files and the CSVs made from them; the
    // scenarios must still produce exactly those files.
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../demo-data");
    for name in ["hollins-lantern", "pebble-wren"] {
        let scenario = Scenario::load(&demo.join(format!("{name}.scenario.toml"))).unwrap();
        for (file, text) in scenario.render().unwrap() {
            let shipped = std::fs::read_to_string(&file).unwrap();
            assert_eq!(
                shipped,
                text,
                "{} differs from its scenario",
                file.display()
            );
        }
    }
}

#[test]
fn scenario_errors_name_the_line_and_column() {
    // Lines and columns counted in SMALL (its first line is empty).
    let path = Path::new("bad.toml");
    let cases = [
        (
            SMALL.replace("eccentricity = 0.35", "eccentricity = 1.5"),
            "bad.toml, line 8, column 16, key 'system.eccentricity'",
            "must be in [0, 1)",
        ),
        (
            SMALL.replace("form = \"cartesian\"", "form = \"sideways\""),
            "bad.toml, line 19, column 8, key 'astrometry.form'",
            "must be one of polar, cartesian, got \"sideways\"",
        ),
        (
            SMALL.replace(
                "stars = [\"primary\"]",
                "stars = [\"primary\", \"tertiary\"]",
            ),
            "bad.toml, line 39, column 21, key 'velocities.instruments[1].stars[1]'",
            "must be one of primary, secondary",
        ),
    ];
    for (text, place, words) in cases {
        let err = Scenario::from_toml_str(&text.replace("NOISE", "true"), path)
            .unwrap_err()
            .to_string();
        assert!(err.contains(place) && err.contains(words), "{place}: {err}");
    }
}
