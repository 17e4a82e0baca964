//! Simulation-based calibration of the whole pipeline in CI (Talts,
//! Betancourt, Simpson, Vehtari & Gelman 2018, arXiv:1804.06788): the built
//! `dyad calibrate` on configs/calibration/small.toml (32 seeded systems,
//! short fits). A sign or unit error anywhere between the prior, the
//! simulator, the likelihood and the sampler makes the ranks of the truth
//! non-uniform and the intervals miss; an honest pipeline passes. Seeded and
//! deterministic: the same settings give the same ranks on any machine and
//! thread count. Takes about 15 s in --release on 2 cores. The unit tests
//! in crates/dyad-fit/src/calibrate/statistics.rs show that the rank, chi-square and coverage code does
//! reject corrupted posteriors.

use std::fs;
use std::path::Path;
use std::process::Command;

use serde_json::Value;

#[test]
fn small_calibration_is_not_rejected() {
    let dir = tempfile::tempdir().expect("temp dir");
    let out = dir.path().join("calibration");
    let settings = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/calibration/small.toml");
    let run = Command::new(env!("CARGO_BIN_EXE_dyad"))
        .arg("calibrate")
        .arg(&settings)
        .arg("--output")
        .arg(&out)
        .output()
        .expect("the dyad binary runs");
    assert!(
        run.status.success(),
        "dyad calibrate failed:\n{}\n{}",
        String::from_utf8_lossy(&run.stdout),
        String::from_utf8_lossy(&run.stderr)
    );
    let json: Value = serde_json::from_str(
        &fs::read_to_string(out.join("calibration.json")).expect("calibration.json written"),
    )
    .expect("valid JSON");
    let summary = &json["summary"];
    let systems = summary["systems"].as_u64().expect("systems");
    assert_eq!(systems, 32);
    assert_eq!(summary["failed"].as_u64(), Some(0), "{summary:#}");
    let params = summary["parameters"].as_array().expect("parameters");
    let names: Vec<&str> = params
        .iter()
        .filter_map(|p| p["parameter"].as_str())
        .collect();
    assert_eq!(names, ["M1", "M2", "P", "e", "parallax", "q"]);
    for p in params {
        let name = p["parameter"].as_str().unwrap_or("?");
        // Uniform ranks: the chi-square test must not reject at p < 0.001
        // (Talts et al. 2018, sec. 4; threshold chosen so that the 6 tests
        // together reject an honest pipeline by chance less than 1 % of
        // the time; the run is seeded, so it cannot flake).
        let pv = p["p_value"].as_f64().expect("p_value");
        assert!(pv >= 0.001, "{name}: ranks not uniform, p = {pv}: {p:#}");
        let counts: u64 = p["counts"]
            .as_array()
            .expect("counts")
            .iter()
            .filter_map(Value::as_u64)
            .sum();
        assert_eq!(counts, systems);
    }
    // 95 per cent intervals of the two masses cover the truth 95 per cent of
    // the time, within 3 binomial standard errors (common practice).
    for p in params.iter().take(2) {
        let c = &p["coverage_95"];
        let (f, se) = (
            c["fraction"].as_f64().expect("fraction"),
            c["standard_error"].as_f64().expect("se"),
        );
        assert!(
            (f - 0.95).abs() <= 3.0 * se,
            "{}: 95 % coverage {f} +- {se}",
            p["parameter"]
        );
    }
    // One rank per system and parameter, each in 0..=L.
    let csv = fs::read_to_string(out.join("ranks.csv")).expect("ranks.csv written");
    let rows: Vec<&str> = csv.lines().skip(1).collect();
    assert_eq!(rows.len(), 32 * 6);
    for row in rows {
        let fields: Vec<&str> = row.split(',').collect();
        let rank: u64 = fields[2].parse().expect("rank");
        let draws: u64 = fields[3].parse().expect("draws");
        assert!(rank <= draws, "{row}");
    }
    assert!(out.join("ranks.png").is_file() && out.join("ranks.svg").is_file());
    assert!(out.join("calibration.txt").is_file());
    // Every system's data and run configuration are kept for refitting.
    assert!(out.join("systems/0031/run.toml").is_file());
}

#[test]
fn refuses_a_folder_with_files_unless_asked() {
    let dir = tempfile::tempdir().expect("temp dir");
    fs::write(dir.path().join("something"), "x").expect("write");
    let settings = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/calibration/small.toml");
    let run = Command::new(env!("CARGO_BIN_EXE_dyad"))
        .arg("calibrate")
        .arg(&settings)
        .arg("--output")
        .arg(dir.path())
        .arg("--systems")
        .arg("2")
        .output()
        .expect("the dyad binary runs");
    assert!(!run.status.success());
    assert!(!dir.path().join("calibration.json").exists());
}
