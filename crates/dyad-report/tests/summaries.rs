//! Summaries, samples CSV, atomic writes and run folders.

use dyad_report::stats::{circular_mean, quantile_sorted};
use dyad_report::*;
use std::fs;

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol
}

/// 1..10 shuffled, with the highest log-posterior at the value 7.
fn linear_draws() -> PosteriorDraws {
    let values = vec![3.0, 9.0, 1.0, 10.0, 7.0, 2.0, 5.0, 8.0, 4.0, 6.0];
    let mut lp = vec![-5.0; 10];
    lp[4] = -1.0;
    lp[2] = f64::NAN; // NaN log-posteriors are never the MAP
    PosteriorDraws::new(vec![ParameterInfo::linear("x", "mas", "x")], values, lp).unwrap()
}

#[test]
fn quantiles_match_hyndman_fan_definition_7_by_hand() {
    // Hyndman & Fan (1996) def. 7, h = (n-1)p, by hand for x = 1..10:
    // p=0.16: h=1.44 -> 2.44; p=0.84: h=7.56 -> 8.56;
    // p=0.025: h=0.225 -> 1.225; p=0.975: h=8.775 -> 9.775; median 5.5.
    // (Same as numpy.percentile's default "linear" method, from memory.)
    let s = summarise(&linear_draws()).unwrap();
    let p = &s.parameters[0];
    assert!(close(p.median, 5.5, 1e-12));
    assert!(close(p.q68[0], 2.44, 1e-12), "{:?}", p.q68);
    assert!(close(p.q68[1], 8.56, 1e-12), "{:?}", p.q68);
    assert!(close(p.q95[0], 1.225, 1e-12), "{:?}", p.q95);
    assert!(close(p.q95[1], 9.775, 1e-12), "{:?}", p.q95);
    // Mean 5.5; sample variance of 1..n is n(n+1)/12 = 110/12.
    assert!(close(p.mean, 5.5, 1e-12));
    assert!(close(p.sd, (110.0f64 / 12.0).sqrt(), 1e-12));
    assert_eq!(p.map, 7.0);
    assert_eq!(s.map_draw, 4);
    assert_eq!(p.n_finite, 10);
}

#[test]
fn quantile_edge_cases() {
    assert!(quantile_sorted(&[], 0.5).is_nan());
    assert_eq!(quantile_sorted(&[4.0], 0.16), 4.0);
    assert_eq!(quantile_sorted(&[1.0, 3.0], 0.0), 1.0);
    assert_eq!(quantile_sorted(&[1.0, 3.0], 1.0), 3.0);
    assert_eq!(quantile_sorted(&[1.0, 3.0], 0.25), 1.5);
}

#[test]
fn angle_straddling_zero_is_summarised_on_the_circle() {
    // Draws 340, 350, 355, 10, 20 deg: on the circle they are -20..20
    // around ~0; median -5 deg = 355 deg. The window keeps them
    // contiguous: [340, 350, 355, 370, 380]; by hand (HF7, n=5):
    // q16: h=0.64 -> 346.4; q84: h=3.36 -> 373.6.
    let info = ParameterInfo::angle("omega", "deg", "ω", 360.0);
    let values = vec![10.0, 340.0, 355.0, 20.0, 350.0];
    let lp = vec![0.0, -1.0, -1.0, -1.0, -1.0];
    let d = PosteriorDraws::new(vec![info], values, lp).unwrap();
    let s = summarise(&d).unwrap();
    let p = &s.parameters[0];
    assert!(close(p.median, 355.0, 1e-9), "{}", p.median);
    assert!(close(p.q68[0], 346.4, 1e-9), "{:?}", p.q68);
    assert!(close(p.q68[1], 373.6, 1e-9), "{:?}", p.q68);
    // MAP draw is 10 deg, reported in the same window.
    assert!(close(p.map, 370.0, 1e-9), "{}", p.map);
    // Mean of wrapped values: (340+350+355+370+380)/5 = 359.
    assert!(close(p.mean, 359.0, 1e-9), "{}", p.mean);
    // A naive linear summary would put the median at 340 and sd ~ 170.
    assert!(p.sd < 20.0);
}

#[test]
fn angle_with_180_period_and_circular_mean() {
    let m = circular_mean(&[178.0, 179.0, 1.0, 2.0], 180.0);
    assert!(m < 1e-9 || close(m, 180.0, 1e-9), "{m}");
    let d = PosteriorDraws::new(
        vec![ParameterInfo::angle("node", "deg", "Ω", 180.0)],
        vec![178.0, 179.0, 1.0, 2.0],
        vec![0.0; 4],
    )
    .unwrap();
    let p = &summarise(&d).unwrap().parameters[0];
    // Wrapped: -2, -1, 1, 2 -> median 0.
    assert!(close(p.median, 0.0, 1e-9), "{}", p.median);
    assert!(close(p.q95[0], -1.925, 1e-9), "{:?}", p.q95);
}

#[test]
fn bad_inputs_are_typed_errors() {
    assert!(PosteriorDraws::new(vec![], vec![], vec![]).is_err());
    assert!(PosteriorDraws::new(
        vec![ParameterInfo::linear("a", "", "a")],
        vec![1.0, 2.0],
        vec![0.0]
    )
    .is_err());
    let d = PosteriorDraws::new(
        vec![ParameterInfo::linear("a", "", "a")],
        vec![f64::NAN, f64::INFINITY],
        vec![0.0, 0.0],
    )
    .unwrap();
    assert!(matches!(summarise(&d), Err(ReportError::InvalidInput(_))));
}

fn meta() -> RunMetadata {
    RunMetadata {
        title: "Invented system Tarn-7".into(),
        entries: vec![
            ("astrometry".into(), "demo-data/tarn7_positions.csv".into()),
            ("seed".into(), "42".into()),
            ("convergence".into(), "R-hat < 1.01 | all".into()),
        ],
    }
}

fn two_param_draws() -> PosteriorDraws {
    let n = 200;
    let mut values = Vec::with_capacity(2 * n);
    let mut lp = Vec::with_capacity(n);
    for i in 0..n {
        let u = (i as f64 + 0.5) / n as f64;
        values.push(1.2 + 0.05 * (u - 0.5));
        values.push((355.0 + 10.0 * u) % 360.0);
        lp.push(-(u - 0.3).powi(2));
    }
    PosteriorDraws::new(
        vec![
            ParameterInfo::linear("m1", "Msun", "M₁"),
            ParameterInfo::angle("omega", "deg", "ω", 360.0),
        ],
        values,
        lp,
    )
    .unwrap()
}

#[test]
fn json_summary_parses_back_with_every_parameter() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("summary.json");
    let d = two_param_draws();
    let s = summarise(&d).unwrap();
    let diag = serde_json::json!({ "r_hat_max": 1.004, "ess_min": 812.0 });
    write_json_summary(&path, &meta(), &s, &diag).unwrap();
    let v: serde_json::Value = serde_json::from_str(&fs::read_to_string(&path).unwrap()).unwrap();
    let params = v["parameters"].as_array().unwrap();
    assert_eq!(params.len(), 2);
    for (p, want) in params.iter().zip(&s.parameters) {
        assert_eq!(p["name"], want.info.name.as_str());
        assert_eq!(p["unit"], want.info.unit.as_str());
        for key in ["median", "mean", "sd", "map"] {
            assert!(p[key].is_f64(), "{key}");
        }
        assert_eq!(p["q68"].as_array().unwrap().len(), 2);
        assert_eq!(p["q95"][1].as_f64().unwrap(), want.q95[1]);
    }
    assert_eq!(params[1]["kind"], "angle");
    assert_eq!(params[1]["period_deg"], 360.0);
    assert_eq!(v["diagnostics"]["ess_min"], 812.0);
    assert_eq!(v["metadata"][1]["key"], "seed");
    assert_eq!(v["n_draws"], 200);
    // The omega posterior spans 355..5 deg: its median sits near 0/360 and
    // the 95 % interval is about 10 deg wide, not 350.
    let w = params[1]["q95"][1].as_f64().unwrap() - params[1]["q95"][0].as_f64().unwrap();
    assert!(w < 10.0 && w > 9.0, "{w}");
}

#[test]
fn text_and_markdown_summaries_hold_metadata_and_table() {
    let dir = tempfile::tempdir().unwrap();
    let d = two_param_draws();
    let s = summarise(&d).unwrap();
    let txt = dir.path().join("summary.txt");
    let md = dir.path().join("summary.md");
    write_text_summary(&txt, &meta(), &s).unwrap();
    write_markdown_summary(&md, &meta(), &s).unwrap();
    let t = fs::read_to_string(&txt).unwrap();
    let m = fs::read_to_string(&md).unwrap();
    assert!(t.contains("Invented system Tarn-7"));
    assert!(t.contains("demo-data/tarn7_positions.csv"));
    assert!(t.contains("m1") && t.contains("omega") && t.contains("Msun"));
    assert!(m.starts_with("# Invented system Tarn-7"));
    assert!(m.contains("- **seed**: 42"));
    assert!(m.contains("R-hat < 1.01 \\| all"), "pipes escaped");
    assert!(m.contains("| Parameter | Unit | Median |"));
    // m1 median 1.2, 68 % half-width 0.05*0.34 = 0.017 -> 3 decimals.
    assert!(m.contains("| m1 | Msun | 1.200 |"), "{m}");
    assert_eq!(m.lines().filter(|l| l.starts_with("| ")).count(), 3);
    // Keep copies for reading by eye.
    let preview = std::path::Path::new(env!("CARGO_TARGET_TMPDIR")).join("summary-previews");
    fs::create_dir_all(&preview).unwrap();
    fs::write(preview.join("summary.txt"), &t).unwrap();
    fs::write(preview.join("summary.md"), &m).unwrap();
}

#[test]
fn samples_csv_round_trips_full_precision() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("samples.csv");
    let awkward = [
        0.1 + 0.2,
        1e-300,
        -123_456_789.123_456_78,
        f64::NAN,
        2.5e20,
        -0.0,
    ];
    let values: Vec<f64> = awkward.iter().flat_map(|&v| [v, v * 3.0]).collect();
    let lp: Vec<f64> = (0..awkward.len()).map(|i| -(i as f64) / 3.0).collect();
    let d = PosteriorDraws::new(
        vec![
            ParameterInfo::linear("k1", "km/s", "K₁"),
            ParameterInfo::linear("q", "", "q"),
        ],
        values.clone(),
        lp.clone(),
    )
    .unwrap();
    write_samples_csv(&path, &d, None).unwrap();
    let text = fs::read_to_string(&path).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next().unwrap(), "k1_km_s,q,log_posterior");
    let rows: Vec<Vec<f64>> = lines
        .map(|l| l.split(',').map(|c| c.parse::<f64>().unwrap()).collect())
        .collect();
    assert_eq!(rows.len(), awkward.len());
    for (i, row) in rows.iter().enumerate() {
        for (j, got) in row.iter().take(2).enumerate() {
            let want = values[i * 2 + j];
            assert!(
                got.to_bits() == want.to_bits() || (got.is_nan() && want.is_nan()),
                "{got} vs {want}"
            );
        }
        assert_eq!(row[2].to_bits(), lp[i].to_bits());
    }
}

#[test]
fn duplicate_column_names_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let d = PosteriorDraws::new(
        vec![
            ParameterInfo::linear("a", "km/s", "a"),
            ParameterInfo::linear("a", "km s", "a"),
        ],
        vec![1.0, 2.0],
        vec![0.0],
    )
    .unwrap();
    assert!(write_samples_csv(&dir.path().join("s.csv"), &d, None).is_err());
    assert!(fs::read_dir(dir.path()).unwrap().next().is_none());
}

fn entries(dir: &std::path::Path) -> Vec<String> {
    let mut v: Vec<String> = fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

#[test]
fn atomic_write_never_leaves_a_partial_target() {
    let dir = tempfile::tempdir().unwrap();
    let target = dir.path().join("summary.txt");
    // A writer that fails half-way leaves neither target nor temp file.
    let r = write_atomically(&target, |w| {
        w.write_all(b"half of a summ").unwrap();
        Err(ReportError::InvalidInput("interrupted".into()))
    });
    assert!(r.is_err());
    assert!(entries(dir.path()).is_empty(), "{:?}", entries(dir.path()));
    // A good write, then a failing rewrite: the old content survives whole.
    write_atomically(&target, |w| {
        w.write_all(b"complete v1\n")
            .map_err(|e| ReportError::InvalidInput(e.to_string()))
    })
    .unwrap();
    let r = write_atomically(&target, |w| {
        w.write_all(b"v2 trunc").unwrap();
        Err(ReportError::InvalidInput("interrupted".into()))
    });
    assert!(r.is_err());
    assert_eq!(fs::read_to_string(&target).unwrap(), "complete v1\n");
    assert_eq!(entries(dir.path()), vec!["summary.txt".to_string()]);
}

#[test]
fn run_folder_is_not_reused_unless_asked() {
    let dir = tempfile::tempdir().unwrap();
    let run = dir.path().join("runs").join("first");
    assert_eq!(prepare_run_folder(&run, false).unwrap(), run);
    assert!(run.is_dir());
    // Empty folder: fine.
    prepare_run_folder(&run, false).unwrap();
    fs::write(run.join("summary.txt"), "old").unwrap();
    assert!(matches!(
        prepare_run_folder(&run, false),
        Err(ReportError::RunFolderExists(_))
    ));
    prepare_run_folder(&run, true).unwrap();
    assert_eq!(fs::read_to_string(run.join("summary.txt")).unwrap(), "old");
    let file = dir.path().join("plain.txt");
    fs::write(&file, "x").unwrap();
    assert!(matches!(
        prepare_run_folder(&file, true),
        Err(ReportError::NotAFolder(_))
    ));
}

#[test]
fn column_names_carry_each_unit_once() {
    // Our own naming rule (README, "Reading the results"): a name that
    // already says its unit is not given the unit again.
    let cases = [
        (
            ParameterInfo::linear("period_days", "d", "P"),
            "period_days",
        ),
        (
            ParameterInfo::linear("periastron_time_jd", "d", "T"),
            "periastron_time_jd",
        ),
        (
            ParameterInfo::linear("period_years", "yr", "P"),
            "period_years",
        ),
        (
            ParameterInfo::linear("mass_primary_msun", "M☉", "M₁"),
            "mass_primary_msun",
        ),
        (ParameterInfo::linear("k1_kms", "km/s", "K₁"), "k1_kms"),
        (
            ParameterInfo::angle("node_deg", "deg", "Ω", 180.0),
            "node_deg",
        ),
        (
            ParameterInfo::linear("sampled:ln_period_days", "ln(d)", "P"),
            "sampled_ln_period_days",
        ),
        (
            ParameterInfo::linear("sampled:offset_kms[north]", "km/s", "γ"),
            "sampled_offset_kms_north",
        ),
        (
            ParameterInfo::linear("sampled:eccentricity", "1", "e"),
            "sampled_eccentricity",
        ),
        // Names without their unit still get it.
        (ParameterInfo::linear("k1", "km/s", "K₁"), "k1_km_s"),
        (ParameterInfo::linear("m1", "Msun", "M₁"), "m1_Msun"),
        (ParameterInfo::linear("period", "d", "P"), "period_d"),
        (ParameterInfo::linear("q", "", "q"), "q"),
    ];
    for (info, want) in cases {
        assert_eq!(info.column_name(), want, "{info:?}");
    }
}
