//! Several period modes end to end: mode labels in samples.csv, a summary
//! block per mode, per-mode plots, and `dyad predict` per mode, on the
//! invented sparse demo system "Pebble Wren" (demo-data/, six yearly
//! positions: true period 3.1 yr with yearly aliases near 1.48 and 0.76 yr),
//! fitted with a short, seeded tempered run. Also the argument checks of
//! `dyad predict` and its refusal to overwrite an earlier prediction.

use std::fs;
use std::path::Path;
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

fn read_json(path: &Path) -> Value {
    let text = fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

#[test]
fn modes_are_labelled_summarised_plotted_and_predicted_separately() {
    let dir = tempfile::tempdir().unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    // The demo configuration with absolute data paths and a short cap (the
    // modes are found long before the stopping rule is met).
    let text = fs::read_to_string(root.join("configs/sparse.toml"))
        .unwrap()
        .replace("../demo-data/", &format!("{}/demo-data/", root.display()))
        .replace("max_steps = 30000", "max_steps = 2000");
    let config = dir.path().join("sparse.toml");
    fs::write(&config, text).unwrap();
    let run = dir.path().join("run");
    run_ok(
        dyad()
            .arg("fit")
            .arg(&config)
            .args(["--quiet", "--output"])
            .arg(&run),
    );

    // samples.csv: a last column `mode` with more than one mode.
    let csv = fs::read_to_string(run.join("samples.csv")).unwrap();
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    assert_eq!(header.last(), Some(&"mode"));
    let rows: Vec<Vec<f64>> = lines
        .map(|l| l.split(',').map(|c| c.parse::<f64>().unwrap()).collect())
        .collect();
    let mode_of = |r: &Vec<f64>| *r.last().unwrap() as usize;
    let summary = read_json(&run.join("summary.json"));
    let modes = summary["modes"].as_array().expect("per-mode blocks");
    assert!(modes.len() >= 2, "{} modes", modes.len());
    let mut weight_sum = 0.0;
    for (k, m) in modes.iter().enumerate() {
        let number = k + 1;
        assert_eq!(m["mode"].as_u64(), Some(number as u64));
        let weight = m["weight"].as_f64().unwrap();
        weight_sum += weight;
        let in_mode = rows.iter().filter(|r| mode_of(r) == number).count();
        assert!((weight - in_mode as f64 / rows.len() as f64).abs() < 1e-12);
        assert!(m["weight_error"].as_f64().unwrap() > 0.0);
        // Every draw labelled with this mode has a period inside the mode's
        // 95 % interval's neighbourhood and no other mode's: the modes do
        // not overlap.
        let period = m["parameters"]
            .as_array()
            .unwrap()
            .iter()
            .find(|p| p["name"] == "period_years")
            .unwrap();
        let (lo, hi) = (
            period["q95"][0].as_f64().unwrap(),
            period["q95"][1].as_f64().unwrap(),
        );
        for other in modes.iter().filter(|o| o["mode"] != m["mode"]) {
            let p = other["period_days"].as_f64().unwrap() / 365.25;
            assert!(p < lo || p > hi, "mode {number} [{lo}, {hi}] holds {p}");
        }
        for key in ["median", "q68", "q95"] {
            assert!(!period[key].is_null());
        }
        assert!(run.join(format!("plots/mode-{number}/sky.png")).is_file());
    }
    assert!((weight_sum - 1.0).abs() < 1e-9);
    // The true period (3.1 yr) is the heaviest mode's.
    let heaviest = modes
        .iter()
        .max_by(|a, b| {
            a["weight"]
                .as_f64()
                .unwrap()
                .total_cmp(&b["weight"].as_f64().unwrap())
        })
        .unwrap();
    assert!((heaviest["period_days"].as_f64().unwrap() / 365.25 - 3.1).abs() < 0.1);
    let text = fs::read_to_string(run.join("summary.txt")).unwrap();
    assert!(text.contains("span all of them"), "{text}");
    assert!(text.contains("Period mode 2 of"), "{text}");
    // A tempered run with several modes points to the evidence comparison
    // for weights to publish (the weights can still be relaxing).
    assert!(text.contains("compare the periods by evidence"), "{text}");
    assert!(text.contains("each mode's weight known to 0.01"), "{text}");

    // Predict per mode: each mode's median offsets lie close to the
    // position of one of that mode's own draws, and far from a mixture
    // average when the modes disagree.
    run_ok(dyad().arg("predict").arg(&run).arg("2026.5"));
    let prediction = read_json(&run.join("prediction-1/predictions.json"));
    let predicted: Vec<(f64, f64)> = prediction["modes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| {
            let e = &m["epochs"][0];
            (
                e["dra_mas"]["median"].as_f64().unwrap(),
                e["ddec_mas"]["median"].as_f64().unwrap(),
            )
        })
        .collect();
    assert_eq!(predicted.len(), modes.len());
    // The modes put the companion in clearly different places in 2026.5
    // (more than 40 mas apart), each inside its own 95 % band.
    let spread = predicted
        .iter()
        .flat_map(|a| predicted.iter().map(move |b| (a.0 - b.0).hypot(a.1 - b.1)))
        .fold(0.0, f64::max);
    assert!(spread > 40.0, "modes agree to {spread} mas");
    for (m, e) in prediction["modes"]
        .as_array()
        .unwrap()
        .iter()
        .zip(&predicted)
    {
        let sep = &m["epochs"][0]["sep_mas"];
        let s = e.0.hypot(e.1);
        assert!(
            sep["q95"][0].as_f64().unwrap() <= s && s <= sep["q95"][1].as_f64().unwrap(),
            "mode {}: median offsets give {s} mas outside the separation band {sep}",
            m["mode"]
        );
    }
    // For the two modes furthest apart, the average of their predictions
    // (what an average across modes would give) lies outside both modes'
    // 95 % bands in separation or position angle: it is on neither orbit.
    let modes_out = prediction["modes"].as_array().unwrap();
    let (mut a, mut b, mut far) = (0, 0, 0.0);
    for i in 0..predicted.len() {
        for j in 0..predicted.len() {
            let d = (predicted[i].0 - predicted[j].0).hypot(predicted[i].1 - predicted[j].1);
            if d > far {
                (a, b, far) = (i, j, d);
            }
        }
    }
    let (mx, my) = (
        0.5 * (predicted[a].0 + predicted[b].0),
        0.5 * (predicted[a].1 + predicted[b].1),
    );
    let average_sep = mx.hypot(my);
    let average_pa = mx.atan2(my).to_degrees().rem_euclid(360.0);
    for k in [a, b] {
        let e = &modes_out[k]["epochs"][0];
        let inside_sep = e["sep_mas"]["q95"][0].as_f64().unwrap() <= average_sep
            && average_sep <= e["sep_mas"]["q95"][1].as_f64().unwrap();
        let (pa_lo, pa_hi) = (
            e["pa_deg"]["q95"][0].as_f64().unwrap(),
            e["pa_deg"]["q95"][1].as_f64().unwrap(),
        );
        let inside_pa = [average_pa - 360.0, average_pa, average_pa + 360.0]
            .iter()
            .any(|p| pa_lo <= *p && *p <= pa_hi);
        assert!(
            !(inside_sep && inside_pa),
            "the average ({average_sep} mas, {average_pa} deg) lies in mode {}'s band",
            k + 1
        );
    }
}

#[test]
fn predict_refuses_bad_ranges_with_clear_messages() {
    let dir = tempfile::tempdir().unwrap();
    let cases: [(&[&str], &str); 4] = [
        (
            &["--from", "2027", "--to", "2030", "--step", "0"],
            "--step must be positive",
        ),
        (
            &["--from", "2027", "--to", "2030", "--step", "-0.5"],
            "--step must be positive",
        ),
        (
            &["--from", "2030", "--to", "2027", "--step", "0.5"],
            "is after --to",
        ),
        (
            &["--from", "2027", "--step", "0.5"],
            "needs all of --from, --to and --step",
        ),
    ];
    for (args, expected) in cases {
        let out = dyad()
            .arg("predict")
            .arg(dir.path())
            .args(args)
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(!out.status.success(), "{args:?} accepted");
        assert!(err.contains(expected), "{args:?}: {err}");
        assert!(!err.contains("panicked"), "{err}");
    }
    let out = dyad().arg("predict").arg(dir.path()).output().unwrap();
    assert!(String::from_utf8_lossy(&out.stderr).contains("no epochs"));
}
