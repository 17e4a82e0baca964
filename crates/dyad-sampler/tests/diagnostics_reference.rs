//! R-hat and ESS against ArviZ.
//!
//! Source: ArviZ 0.23.4 (general-purpose Bayesian diagnostics library, PyPI;
//! with NumPy 2.4.6 and SciPy 1.17.1), `arviz.rhat(method="rank")`,
//! `arviz.ess(method="bulk" | "tail")`, which implement Vehtari, Gelman,
//! Simpson, Carpenter & Buerkner (2021), Bayesian Analysis 16, 667. The
//! fixture chains (CSV, rows = steps, one column per walker) and the reference
//! values (`diagnostics_reference.json`, which also records the versions) were
//! written by `tests/fixtures/make_reference.py`; CI only reads them.
//!
//! Conventions are the same on both sides (each walker is one chain, split in
//! halves, middle draw of an odd chain dropped; average ranks for ties; Blom
//! offset 3/8; type-7 quantiles), so agreement is to rounding: 1e-9 relative.

use std::path::PathBuf;

use dyad_sampler::diagnostics::{diagnose, ess_bulk, ess_tail, split_rhat, DiagnosticsWorkspace};

const TOLERANCE: f64 = 1e-9;

fn fixtures() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures")
}

/// Reads a fixture CSV (header, then one row per step, one column per
/// walker) into step-major draws.
fn read_chain(name: &str) -> (Vec<f64>, usize, usize) {
    let text = std::fs::read_to_string(fixtures().join(name)).expect("fixture readable");
    let mut lines = text.lines();
    let n_walkers = lines.next().expect("header").split(',').count();
    let mut draws = Vec::new();
    let mut n_steps = 0;
    for line in lines.filter(|l| !l.trim().is_empty()) {
        let row: Vec<f64> = line
            .split(',')
            .map(|v| v.trim().parse::<f64>().expect("number"))
            .collect();
        assert_eq!(row.len(), n_walkers, "ragged row in {name}");
        draws.extend(row);
        n_steps += 1;
    }
    (draws, n_steps, n_walkers)
}

fn reference() -> serde_json::Value {
    let text = std::fs::read_to_string(fixtures().join("diagnostics_reference.json"))
        .expect("reference readable");
    serde_json::from_str(&text).expect("reference is JSON")
}

fn assert_rel(got: f64, want: f64, what: &str) {
    let rel = ((got - want) / want).abs();
    assert!(
        rel < TOLERANCE,
        "{what}: dyad {got:.15}, ArviZ {want:.15}, relative difference {rel:.2e}"
    );
}

#[test]
fn reference_was_made_with_arviz_0_23_4() {
    assert_eq!(reference()["arviz_version"], "0.23.4");
}

#[test]
fn rhat_and_ess_match_arviz_on_every_fixture() {
    let reference = reference();
    let cases = reference["cases"].as_array().expect("cases");
    assert_eq!(cases.len(), 5);
    let mut workspace = DiagnosticsWorkspace::new();
    for case in cases {
        let file = case["file"].as_str().expect("file");
        let (draws, n_steps, n_walkers) = read_chain(file);
        assert_eq!(n_steps as u64, case["n_steps"].as_u64().expect("n_steps"));
        assert_eq!(
            n_walkers as u64,
            case["n_walkers"].as_u64().expect("n_walkers")
        );
        let want = |key: &str| case[key].as_f64().expect(key);

        // Free functions.
        assert_rel(
            split_rhat(&draws, n_steps, n_walkers),
            want("rhat_rank"),
            &format!("{file} rhat"),
        );
        assert_rel(
            ess_bulk(&draws, n_steps, n_walkers),
            want("ess_bulk"),
            &format!("{file} ess_bulk"),
        );
        assert_rel(
            ess_tail(&draws, n_steps, n_walkers),
            want("ess_tail"),
            &format!("{file} ess_tail"),
        );

        // A reused workspace gives the same numbers.
        let rhat = workspace
            .split_rhat(&draws, n_steps, n_walkers)
            .expect("valid");
        assert_rel(rhat, want("rhat_rank"), &format!("{file} workspace rhat"));
        let ess = workspace
            .ess_bulk(&draws, n_steps, n_walkers)
            .expect("valid");
        assert_rel(ess, want("ess_bulk"), &format!("{file} workspace ess_bulk"));

        // R-hat is the larger of the bulk and folded values.
        let larger = want("rhat_bulk").max(want("rhat_folded"));
        assert_rel(want("rhat_rank"), larger, "reference self-consistency");
    }
}

#[test]
fn diagnose_handles_interleaved_parameters() {
    // Interleave two fixtures of equal shape as parameters 0 and 1 of a
    // [step][walker][dim] array: each must match its own ArviZ values.
    let reference = reference();
    let cases = reference["cases"].as_array().expect("cases");
    let case_of = |file: &str| {
        cases
            .iter()
            .find(|c| c["file"] == file)
            .expect("case present")
            .clone()
    };
    let (a, n_steps, n_walkers) = read_chain("ar1_mixed.csv");
    let (b, n_steps_b, n_walkers_b) = read_chain("ar1_drifting.csv");
    assert_eq!(n_walkers, n_walkers_b);
    // Use the common number of steps (drifting has 700): take the first 700
    // steps of the mixed chain, whose reference is not the full-chain one, so
    // only parameter 1 is checked against ArviZ and parameter 0 against the
    // single-parameter function on the same truncated draws.
    let n = n_steps.min(n_steps_b);
    let a = &a[..n * n_walkers];
    let mut samples = Vec::with_capacity(2 * n * n_walkers);
    for (x, y) in a.iter().zip(&b) {
        samples.push(*x);
        samples.push(*y);
    }
    let d = diagnose(&samples, n, n_walkers, 2).expect("valid");
    assert_eq!(d.parameters.len(), 2);
    let drift = case_of("ar1_drifting.csv");
    assert_rel(
        d.parameters[1].rhat,
        drift["rhat_rank"].as_f64().unwrap(),
        "diagnose rhat",
    );
    assert_rel(
        d.parameters[1].ess_bulk,
        drift["ess_bulk"].as_f64().unwrap(),
        "diagnose ess_bulk",
    );
    assert_rel(
        d.parameters[1].ess_tail,
        drift["ess_tail"].as_f64().unwrap(),
        "diagnose ess_tail",
    );
    assert_rel(
        d.parameters[0].rhat,
        split_rhat(a, n, n_walkers),
        "diagnose vs split_rhat",
    );
    assert_rel(
        d.parameters[0].ess_tail,
        ess_tail(a, n, n_walkers),
        "diagnose vs ess_tail",
    );
    assert_eq!(d.max_rhat(), d.parameters[1].rhat);
    // Serialises with the field names the report reads.
    let json = serde_json::to_value(&d).expect("serialise");
    assert!(json["parameters"][1]["effective_draws_bulk"].is_number());
}

#[test]
fn shifted_walker_and_drift_are_flagged() {
    // The Vehtari et al. (2021) threshold R-hat < 1.01 separates the mixed
    // fixture from the ones built not to mix.
    let mixed = read_chain("ar1_mixed.csv");
    let shifted = read_chain("ar1_shifted_walker.csv");
    let drift = read_chain("ar1_drifting.csv");
    assert!(split_rhat(&mixed.0, mixed.1, mixed.2) < 1.01);
    assert!(split_rhat(&shifted.0, shifted.1, shifted.2) > 1.05);
    assert!(split_rhat(&drift.0, drift.1, drift.2) > 1.1);
}
