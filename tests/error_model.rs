//! The per-source astrometric error model's reporting, end to end on a
//! seeded invented system ("Tallow Finch", simulated here): with errors as
//! given a misquoted source earns a caution, and an unknown source in the
//! configuration is refused. (That fitted scales find misquoted sources and
//! Student t residuals down-weight an outlier, with the true masses inside
//! their intervals, is checked in tests/honest_intervals.rs.)

use std::fs;
use std::path::Path;
use std::process::Command;

use serde_json::Value;

/// The invented system, both stars' velocities, polar astrometry whose
/// epochs are taken in turn by the sources of `sources` (TOML list).
fn scenario(seed: u64, count: usize, sources: &str) -> String {
    format!(
        r#"seed = {seed}
[system]
name = "Tallow Finch (invented)"
period_years = 12.0
periastron_time_jyear = 2012.3
eccentricity = 0.35
inclination_deg = 64.0
periastron_argument_deg = 70.0
node_deg = 150.0
mass_primary_msun = 1.2
mass_secondary_msun = 0.8
parallax_mas = 40.0
systemic_velocity_kms = 5.0

[astrometry]
file = "positions.csv"
time_column = "jyear"
form = "polar"
first = 2004.0
last = 2022.0
count = {count}
separation_error_mas = 2.0
position_angle_error_deg = 0.25
sources = {sources}

[velocities]
file = "velocities.csv"
time_column = "jyear"
[[velocities.instruments]]
name = "finch-spectrograph"
stars = ["primary", "secondary"]
first = 2006.0
last = 2021.0
count = 16
error_kms = 0.4
"#
    )
}

fn config(errors: &str) -> String {
    format!(
        r#"[data]
astrometry = "positions.csv"
velocities = ["velocities.csv"]
catalogue_parallax_mas = 40.2
catalogue_parallax_err_mas = 0.8

[priors]
period_years = {{ shape = "log_uniform", min = 2.0, max = 50.0 }}
total_mass_msun = {{ shape = "log_uniform", min = 0.2, max = 10.0 }}
jitter_kms = 0

{errors}

[sampler]
walkers = 32
max_steps = 8000
seed = 5

[output]
folder = "run"
"#
    )
}

/// Simulates and fits; returns the summary and diagnostics JSON.
fn simulate_and_fit(scenario_text: &str, config_text: &str) -> (Value, Value) {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path();
    fs::write(path.join("scenario.toml"), scenario_text).unwrap();
    fs::write(path.join("run.toml"), config_text).unwrap();
    let dyad = env!("CARGO_BIN_EXE_dyad");
    for args in [
        vec!["simulate", "scenario.toml"],
        vec!["fit", "run.toml", "--quiet"],
    ] {
        let out = Command::new(dyad)
            .args(&args)
            .current_dir(path)
            .output()
            .expect("dyad runs");
        assert!(
            out.status.success(),
            "dyad {args:?} failed:\n{}\n{}",
            String::from_utf8_lossy(&out.stdout),
            String::from_utf8_lossy(&out.stderr)
        );
    }
    let read = |name: &str| -> Value {
        let text = fs::read_to_string(Path::new(path).join("run").join(name)).unwrap();
        serde_json::from_str(&text).unwrap()
    };
    (read("summary.json"), read("diagnostics.json"))
}

#[test]
fn errors_as_given_earn_a_caution_when_a_source_is_misquoted() {
    let sources =
        r#"[{ name = "speckle", error_factor = 3.0 }, { name = "imaging", error_factor = 1.0 }]"#;
    let (summary, diagnostics) = simulate_and_fit(&scenario(23, 30, sources), &config(""));
    let entries = summary["metadata"].to_string();
    assert!(
        entries.contains("source 'speckle': chi-square per degree of freedom"),
        "{entries}"
    );
    // The misquoted source's chi-square per degree of freedom is near 3^2
    // and well above the other's (which the distorted orbit also inflates).
    let per_dof = |k: usize| {
        let s = &diagnostics["error_model"]["astrometry_sources_at_map"][k];
        s["chi_square"].as_f64().unwrap() / s["degrees_of_freedom"].as_f64().unwrap()
    };
    assert!(
        per_dof(0) > 5.0 && per_dof(0) > 2.5 * per_dof(1),
        "{entries}"
    );
}

#[test]
fn an_unknown_source_in_the_configuration_is_an_error_naming_the_key() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path();
    let sources = r#"[{ name = "speckle", error_factor = 1.0 }]"#;
    fs::write(path.join("scenario.toml"), scenario(24, 10, sources)).unwrap();
    let errors = r#"[astrometry_errors.sources.micrometer]
scale = { shape = "log_uniform", min = 0.1, max = 10.0 }"#;
    fs::write(path.join("run.toml"), config(errors)).unwrap();
    let dyad = env!("CARGO_BIN_EXE_dyad");
    let sim = Command::new(dyad)
        .args(["simulate", "scenario.toml"])
        .current_dir(path)
        .output()
        .unwrap();
    assert!(sim.status.success());
    let out = Command::new(dyad)
        .args(["fit", "run.toml", "--quiet"])
        .current_dir(path)
        .output()
        .unwrap();
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("astrometry_errors.sources.micrometer") && err.contains("speckle"),
        "{err}"
    );
    assert!(!path.join("run").join("summary.json").exists());
}
