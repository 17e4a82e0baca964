//! `outcome.json` is a typed record: the cold-chain diagnostics and the
//! evidence read back as the sampler's own structs (no JSON values), NaN
//! (written as JSON `null`, RFC 8259 sec. 6 has no NaN) reads back as NaN, and the
//! keys are those the run folder has always had.

use dyad_fit::fit::Outcome;
use dyad_sampler::evidence::{EvidenceEstimate, EvidenceEstimates, EvidenceMethod};
use dyad_sampler::{
    ConvergenceCheck, RunDiagnostics, StuckWalker, WatchedCheck, WatchedDiagnostics,
};

fn estimate(ln_z: f64, method: EvidenceMethod, discretisation: Option<f64>) -> EvidenceEstimate {
    EvidenceEstimate {
        ln_z,
        mc_error: 0.03,
        discretisation_error: discretisation,
        coarse_ladder_bound: discretisation.map(|d| 15.0 * d),
        mc_error_reliable: true,
        method,
    }
}

fn outcome() -> Outcome {
    Outcome {
        status: "converged".into(),
        steps: 4000,
        burn_in: 2000,
        warnings: vec!["walker 3 looks stuck".into()],
        diagnostics: RunDiagnostics {
            acceptance: vec![0.31, 0.0],
            mean_acceptance: 0.155,
            stuck_walkers: vec![StuckWalker {
                walker: 1,
                acceptance: 0.0,
                steps_since_move: 4000,
                reason: "never moved".into(),
            }],
            // A fixed or constant parameter has no autocorrelation time.
            tau: vec![41.5, f64::NAN],
            split_rhat: vec![1.002, f64::NAN],
            effective_draws_bulk: vec![812.0, f64::NAN],
            effective_draws_tail: vec![640.0, f64::NAN],
            history_thin: 2,
            history_len: 1000,
            last_check: Some(ConvergenceCheck {
                step: 4000,
                span: 2000,
                fewest_bulk: 812.0,
                fewest_tail: 640.0,
                largest_rhat: 1.002,
                watched: Some(WatchedCheck {
                    count: 2,
                    largest_error: f64::INFINITY,
                    long_enough: false,
                    largest_tau: f64::INFINITY,
                    largest_rhat: 1.01,
                    largest_drift_z: 0.7,
                }),
            }),
            // A mode share whose error is not known yet (series too short).
            watched: vec![WatchedDiagnostics {
                name: "period mode 2".into(),
                mean: 0.04,
                standard_error: f64::INFINITY,
                ensemble_tau: f64::INFINITY,
                long_enough: false,
                drift_z: f64::INFINITY,
                effective_draws_bulk: 950.0,
                split_rhat: 1.01,
            }],
        },
        inverse_temperatures: vec![1.0, 0.3, 0.0],
        swap_acceptance_rate: vec![0.4, 0.2],
        evidence: Some(EvidenceEstimates {
            thermodynamic_integration: estimate(
                -812.25,
                EvidenceMethod::ThermodynamicIntegration,
                Some(0.01),
            ),
            stepping_stone: estimate(-812.24, EvidenceMethod::SteppingStone, None),
        }),
    }
}

#[test]
fn outcome_reads_back_typed_with_nan_where_json_has_null() {
    let written = outcome();
    let text = serde_json::to_string_pretty(&written).expect("serialisable");
    let back: Outcome = serde_json::from_str(&text).expect("readable");
    let (d, e) = (&back.diagnostics, &written.diagnostics);
    assert_eq!(d.tau[0], e.tau[0]);
    assert!(d.tau[1].is_nan() && d.split_rhat[1].is_nan());
    assert!(d.effective_draws_bulk[1].is_nan() && d.effective_draws_tail[1].is_nan());
    assert_eq!(d.stuck_walkers, e.stuck_walkers);
    assert_eq!(d.last_check, e.last_check);
    // An unknown (infinite) error is written as null and read back as
    // infinite, so that a resumed rule still counts it as not met.
    assert_eq!(d.watched, e.watched);
    assert_eq!(d.acceptance, e.acceptance);
    assert_eq!(back.evidence, written.evidence);
    assert_eq!(back.inverse_temperatures, written.inverse_temperatures);
}

#[test]
fn outcome_keeps_the_keys_of_the_run_folder() {
    let value = serde_json::to_value(outcome()).expect("serialisable");
    let keys = |v: &serde_json::Value| -> Vec<String> {
        let mut k: Vec<String> = v.as_object().expect("an object").keys().cloned().collect();
        k.sort();
        k
    };
    assert_eq!(
        keys(&value),
        [
            "burn_in",
            "diagnostics",
            "evidence",
            "inverse_temperatures",
            "status",
            "steps",
            "swap_acceptance_rate",
            "warnings"
        ]
    );
    assert_eq!(
        keys(&value["diagnostics"]),
        [
            "acceptance",
            "effective_draws_bulk",
            "effective_draws_tail",
            "history_len",
            "history_thin",
            "last_check",
            "mean_acceptance",
            "split_rhat",
            "stuck_walkers",
            "tau",
            // Written only when something was watched (period modes).
            "watched"
        ]
    );
    assert_eq!(
        keys(&value["evidence"]["thermodynamic_integration"]),
        [
            "coarse_ladder_bound",
            "discretisation_error",
            "ln_z",
            "mc_error",
            "mc_error_reliable",
            "method"
        ]
    );
    assert!(value["diagnostics"]["tau"][1].is_null());
}

#[test]
fn an_outcome_without_its_diagnostics_is_refused() {
    let mut value = serde_json::to_value(outcome()).expect("serialisable");
    value["diagnostics"]
        .as_object_mut()
        .expect("an object")
        .remove("tau");
    let error = serde_json::from_value::<Outcome>(value).expect_err("incomplete record");
    assert!(error.to_string().contains("tau"), "{error}");
}
