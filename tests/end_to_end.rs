//! End-to-end tests of the `dyad` binary on an invented, seeded system
//! ("Quill and Ember", tests/data/): simulate, fit, report, resume, refuse,
//! and fail cleanly on bad input.

use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use serde_json::Value;

fn dyad() -> Command {
    Command::new(env!("CARGO_BIN_EXE_dyad"))
}

fn run_ok(cmd: &mut Command) -> Output {
    let out = cmd.output().expect("the dyad binary runs");
    assert!(
        out.status.success(),
        "dyad failed:\nstdout:\n{}\nstderr:\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// A fresh folder holding the test system's scenario, simulated data and
/// configuration.
fn simulated_system() -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().expect("temp dir");
    let data = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data");
    for name in ["quill-and-ember.scenario.toml", "quill-and-ember.toml"] {
        fs::copy(data.join(name), dir.path().join(name)).expect("copy test data");
    }
    run_ok(
        dyad()
            .arg("simulate")
            .arg(dir.path().join("quill-and-ember.scenario.toml")),
    );
    let config = dir.path().join("quill-and-ember.toml");
    (dir, config)
}

fn read_json(path: &Path) -> Value {
    let text = fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn parameter<'a>(summary: &'a Value, name: &str) -> &'a Value {
    summary["parameters"]
        .as_array()
        .expect("parameters array")
        .iter()
        .find(|p| p["name"] == name)
        .unwrap_or_else(|| panic!("summary lacks {name}"))
}

/// The true elements of tests/data/quill-and-ember.scenario.toml (invented).
const TRUTH: [(&str, f64); 8] = [
    ("mass_primary_msun", 1.10),
    ("mass_secondary_msun", 0.70),
    ("parallax_mas", 35.0),
    ("period_years", 16.0),
    ("eccentricity", 0.55),
    ("inclination_deg", 121.0),
    ("node_deg", 205.0),
    ("omega_secondary_deg", 40.0),
];

#[test]
fn fit_recovers_the_simulated_system_and_writes_a_complete_run_folder() {
    let (dir, config) = simulated_system();
    run_ok(dyad().arg("fit").arg(&config).arg("--quiet"));
    let run = dir.path().join("run");
    let summary = read_json(&run.join("summary.json"));

    // The truth lies inside the 95 per cent interval of every main quantity
    // (a check of the whole chain: simulation, conventions, likelihood, sampler).
    for (name, truth) in TRUTH {
        let p = parameter(&summary, name);
        let (lo, hi) = (p["q95"][0].as_f64().unwrap(), p["q95"][1].as_f64().unwrap());
        assert!(
            lo <= truth && truth <= hi,
            "{name}: truth {truth} outside [{lo}, {hi}]"
        );
    }
    // Every sampled and derived quantity is in the JSON, with all statistics.
    let names: Vec<&str> = summary["parameters"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["name"].as_str().unwrap())
        .collect();
    for expected in [
        "periastron_time_jd",
        "semi_major_axis_au",
        "k1_kms",
        "k2_kms",
        "mass_function_msun",
        "m1_sin3i_msun",
        "orbital_parallax_mas",
        "sampled:ln_period_days",
        "sampled:parallax_mas",
    ] {
        assert!(names.contains(&expected), "summary lacks {expected}");
    }
    for p in summary["parameters"].as_array().unwrap() {
        for key in ["median", "mean", "sd", "map"] {
            assert!(p[key].is_number(), "{}: {key} missing", p["name"]);
        }
        assert_eq!(p["q68"].as_array().map(Vec::len), Some(2));
        assert_eq!(p["q95"].as_array().map(Vec::len), Some(2));
    }
    // Converged chains: rank-normalised split R-hat below 1.01 for every
    // sampled parameter (Vehtari et al. 2021 recommend 1.01).
    let diagnostics = read_json(&run.join("diagnostics.json"));
    for p in diagnostics["parameters"].as_array().unwrap() {
        let rhat = p["split_rhat"].as_f64().unwrap();
        assert!(rhat < 1.01, "{}: R-hat {rhat}", p["name"]);
    }
    // The samples table reads back with one column per parameter.
    let csv = fs::read_to_string(run.join("samples.csv")).unwrap();
    let header = csv.lines().next().unwrap();
    assert_eq!(header.split(',').count(), names.len() + 2, "{header}");
    assert!(csv.lines().count() > 1000);
    // The plots exist, decode, have a sensible size and are not blank.
    for plot in [
        "pairs",
        "sky",
        "separation-and-angle",
        "velocities",
        "masses",
    ] {
        let png = run.join("plots").join(format!("{plot}.png"));
        let img = image::open(&png)
            .unwrap_or_else(|e| panic!("{}: {e}", png.display()))
            .to_luma8();
        assert!(
            img.width() >= 600 && img.height() >= 400,
            "{plot}: {}x{}",
            img.width(),
            img.height()
        );
        let n = (img.width() * img.height()) as f64;
        let mean = img.pixels().map(|p| p.0[0] as f64).sum::<f64>() / n;
        let var = img
            .pixels()
            .map(|p| (p.0[0] as f64 - mean).powi(2))
            .sum::<f64>()
            / n;
        assert!(var > 100.0, "{plot} looks blank (pixel variance {var})");
        assert!(run.join("plots").join(format!("{plot}.svg")).is_file());
    }
    // The residual table has a row per astrometric epoch; the LaTeX table
    // of elements quotes the periastron time as a Besselian epoch too.
    let residuals = fs::read_to_string(run.join("astrometry-residuals.csv")).unwrap();
    let positions_file =
        fs::read_to_string(dir.path().join("quill-and-ember-positions.csv")).unwrap();
    // Data rows start with their epoch (a number); the header and comment
    // lines do not.
    let epochs = positions_file
        .lines()
        .filter(|l| l.trim_start().starts_with(|c: char| c.is_ascii_digit()))
        .count();
    assert_eq!(residuals.lines().count(), epochs + 1, "{residuals}");
    let latex = fs::read_to_string(run.join("elements.tex")).unwrap();
    assert!(
        latex.contains("Besselian yr") && latex.contains("\\end{tabular}"),
        "{latex}"
    );
    // Provenance: the configuration copy and data checksums.
    let provenance = read_json(&run.join("provenance.json"));
    assert_eq!(provenance["data"].as_array().map(Vec::len), Some(2));
    assert!(run.join("config.toml").is_file());

    // A second fit into the same folder is refused without --overwrite ...
    let out = dyad()
        .arg("fit")
        .arg(&config)
        .arg("--quiet")
        .output()
        .unwrap();
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("already exists"), "{err}");
    // ... and `dyad report` redraws the same summary from the run folder.
    let before = fs::read_to_string(run.join("summary.json")).unwrap();
    run_ok(dyad().arg("report").arg(&run));
    let after = fs::read_to_string(run.join("summary.json")).unwrap();
    assert!(before == after, "dyad report changed summary.json");

    // The samples table ends with the mode column: one mode, all draws 1.
    assert!(header.ends_with(",mode"), "{header}");
    assert!(csv.lines().skip(1).all(|l| l.ends_with(",1")));
    assert!(
        summary["modes"].is_null(),
        "a unimodal run has no mode blocks"
    );

    // `dyad predict` gives positions at future epochs, explicit and over a
    // range, into a new numbered folder ...
    let out = run_ok(
        dyad()
            .args(["predict"])
            .arg(&run)
            .args(["2027.5", "--from", "2028", "--to", "2030", "--step", "0.5"]),
    );
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("2027.5") && text.contains("2029.5"), "{text}");
    let first = run.join("prediction-1");
    for file in [
        "predictions.txt",
        "predictions.csv",
        "predictions.json",
        "sky.png",
    ] {
        assert!(first.join(file).is_file(), "{file} missing");
    }
    let table = fs::read_to_string(first.join("predictions.csv")).unwrap();
    // 2027.5 plus 2028.0, 2028.5, ..., 2030.0: six epochs of one mode.
    assert_eq!(table.lines().count(), 1 + 6, "{table}");
    assert!(table
        .lines()
        .next()
        .unwrap()
        .contains("rv_secondary_kms_hi95"));
    // ... and a second prediction never overwrites the first.
    let before = fs::read(first.join("predictions.csv")).unwrap();
    let out = run_ok(dyad().args(["predict"]).arg(&run).arg("2031"));
    assert!(String::from_utf8_lossy(&out.stdout).contains("prediction-1 is kept"));
    assert!(run.join("prediction-2/predictions.json").is_file());
    assert_eq!(fs::read(first.join("predictions.csv")).unwrap(), before);

    // A changed data file is noticed.
    let positions = dir.path().join("quill-and-ember-positions.csv");
    let mut data = fs::read_to_string(&positions).unwrap();
    data.push_str("# an edit\n");
    fs::write(&positions, data).unwrap();
    let out = dyad().arg("report").arg(&run).output().unwrap();
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("has changed"));
}

#[test]
fn a_killed_fit_resumes_bit_identically() {
    let (dir, config) = simulated_system();
    let text = fs::read_to_string(&config)
        .unwrap()
        .replace("max_steps = 100000", "max_steps = 4000");
    fs::write(&config, text).unwrap();
    let whole = dir.path().join("whole");
    run_ok(
        dyad()
            .arg("fit")
            .arg(&config)
            .arg("--quiet")
            .arg("--output")
            .arg(&whole),
    );

    let broken = dir.path().join("broken");
    let mut child = dyad()
        .arg("fit")
        .arg(&config)
        .args([
            "--quiet",
            "--checkpoint-seconds",
            "0.05",
            "--threads",
            "1",
            "--output",
        ])
        .arg(&broken)
        .spawn()
        .unwrap();
    // Wait for a first checkpoint, then kill the process without warning.
    let checkpoint = broken.join("checkpoint.bin");
    let started = std::time::Instant::now();
    while !checkpoint.exists() && started.elapsed().as_secs() < 60 {
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    std::thread::sleep(std::time::Duration::from_millis(150));
    child.kill().unwrap(); // SIGKILL on Unix
    child.wait().unwrap();
    assert!(checkpoint.exists(), "no checkpoint was written");
    assert!(
        !broken.join("outcome.json").exists(),
        "the run finished before it could be killed: make it longer"
    );
    run_ok(dyad().arg("resume").arg(&broken).arg("--quiet"));
    assert!(
        fs::read(whole.join("chain.bin")).unwrap() == fs::read(broken.join("chain.bin")).unwrap(),
        "the resumed chain differs from the uninterrupted one"
    );
    assert!(
        fs::read(whole.join("summary.json")).unwrap()
            == fs::read(broken.join("summary.json")).unwrap(),
        "the resumed run's summary differs"
    );
}

#[test]
fn bad_input_fails_with_a_located_message_and_writes_nothing() {
    let (dir, config) = simulated_system();
    let cases: [(&str, &str, &str); 4] = [
        (
            "quill-and-ember-positions.csv",
            "missing.csv",
            "data.astrometry",
        ),
        (
            "max_steps = 100000",
            "max_steps = 100000\nwalkerz = 3",
            "sampler.walkerz",
        ),
        (
            "min = 1.0, max = 300.0",
            "min = 300.0, max = 1.0",
            "priors.period_years",
        ),
        ("walkers = 40", "walkers = 7", "walkers"),
    ];
    for (from, to, expected) in cases {
        let text = fs::read_to_string(&config).unwrap().replace(from, to);
        let bad = dir.path().join("bad.toml");
        fs::write(&bad, text).unwrap();
        let out = dyad().arg("fit").arg(&bad).arg("--quiet").output().unwrap();
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(!out.status.success(), "{expected}: accepted");
        assert!(
            err.contains("bad.toml"),
            "{expected}: no file named in {err}"
        );
        assert!(err.contains(expected), "{expected}: not named in {err}");
        assert!(!err.contains("panicked"), "{err}");
        // `dyad check` says the same without sampling.
        let out = dyad().arg("check").arg(&bad).output().unwrap();
        assert!(!out.status.success());
    }
    // None of the failed fits left a run folder with outputs behind.
    assert!(!dir.path().join("run/summary.json").exists());
    assert!(!dir.path().join("run/chain.bin").exists());

    // A malformed data row names the file, line and column.
    let positions = dir.path().join("quill-and-ember-positions.csv");
    let mut lines: Vec<String> = fs::read_to_string(&positions)
        .unwrap()
        .lines()
        .map(String::from)
        .collect();
    let header_line = lines.iter().position(|l| !l.starts_with('#')).unwrap();
    let row = header_line + 3;
    let mut fields: Vec<String> = lines[row].split(',').map(String::from).collect();
    let columns: Vec<String> = lines[header_line].split(',').map(String::from).collect();
    let err_col = columns.iter().position(|c| c == "dra_err_mas").unwrap();
    fields[err_col] = "-1".into();
    lines[row] = fields.join(",");
    fs::write(&positions, lines.join("\n")).unwrap();
    let out = dyad().arg("check").arg(&config).output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!out.status.success());
    assert!(err.contains("quill-and-ember-positions.csv"), "{err}");
    assert!(err.contains(&format!("line {}", row + 1)), "{err}");
    assert!(err.contains("dra_err_mas"), "{err}");
}
