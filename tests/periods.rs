//! The period comparison on the invented sparse demo system "Pebble Wren"
//! (demo-data/: six yearly positions and four primary velocities, true
//! period 3.1 yr, aliases near 1.5 and 0.76 yr; its scenario file is beside
//! the data). A seeded run of `dyad periods configs/sparse.toml`.

use std::fs;
use std::path::Path;
use std::process::Command;

use serde_json::Value;

#[test]
fn the_true_period_window_wins_and_both_evidence_estimates_agree() {
    let dir = tempfile::tempdir().expect("temp dir");
    let config = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/sparse.toml");
    let out = Command::new(env!("CARGO_BIN_EXE_dyad"))
        .arg("periods")
        .arg(&config)
        .arg("--quiet")
        .arg("--output")
        .arg(dir.path())
        .arg("--overwrite")
        .output()
        .expect("dyad runs");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = fs::read_to_string(dir.path().join("periods.json")).unwrap();
    let doc: Value = serde_json::from_str(&text).unwrap();
    let windows = doc["windows"].as_array().unwrap();
    assert_eq!(windows.len(), 4);
    let true_period_days = 3.1 * 365.25; // demo-data/pebble-wren.scenario.toml
    let f = |w: &Value, path: &[&str]| -> f64 {
        let mut v = w;
        for p in path {
            v = &v[*p];
        }
        v.as_f64().unwrap_or_else(|| panic!("{path:?} missing"))
    };
    for method in ["stepping_stone", "thermodynamic_integration"] {
        let best = windows
            .iter()
            .max_by(|a, b| {
                f(a, &[method, "posterior_probability"])
                    .total_cmp(&f(b, &[method, "posterior_probability"]))
            })
            .unwrap();
        let (lo, hi) = (f(best, &["period_min_days"]), f(best, &["period_max_days"]));
        assert!(
            lo <= true_period_days && true_period_days <= hi,
            "{method}: the most probable window [{lo}, {hi}] d misses the true period"
        );
    }
    // The log odds of every window against the true one agree between
    // thermodynamic integration and stepping-stone sampling within their
    // combined errors (3 sigma), and ln Z itself agrees within their
    // Monte-Carlo errors alone (the quoted thermodynamic-integration error
    // also holds |TI - SS| as its quadrature error, so it cannot serve here).
    for w in windows {
        let ss = f(w, &["stepping_stone", "ln_odds_vs_best"]);
        let ti = f(w, &["thermodynamic_integration", "ln_odds_vs_best"]);
        let err = f(w, &["stepping_stone", "ln_odds_error"])
            .hypot(f(w, &["thermodynamic_integration", "ln_odds_error"]));
        assert!(
            (ss - ti).abs() <= 3.0 * err + 1e-9,
            "odds differ: {ss} vs {ti} +- {err}"
        );
        let (z_ss, z_ti) = (
            f(w, &["stepping_stone", "ln_z"]),
            f(w, &["thermodynamic_integration", "ln_z"]),
        );
        let z_err = f(w, &["evidence", "stepping_stone", "mc_error"])
            .hypot(f(w, &["evidence", "thermodynamic_integration", "mc_error"]));
        assert!(
            (z_ss - z_ti).abs() <= 3.0 * z_err,
            "ln Z differ: {z_ss} vs {z_ti} +- {z_err}"
        );
    }
    assert!(dir.path().join("periods.png").is_file());
    assert!(dir.path().join("window-4/summary.json").is_file());
}
