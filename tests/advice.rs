//! `dyad advise` end to end: on invented, seeded systems whose truth is
//! known, adding a measurement at the recommended date and refitting must
//! shrink the mass intervals more than adding one at a random candidate
//! date, on average over the cases.

use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

use rand::{Rng, SeedableRng};
use rand_distr::StandardNormal;
use rand_xoshiro::Xoshiro256PlusPlus;
use serde_json::Value;

mod support;
use support::run_ok;

use dyad_model::simulate::Scenario;
use dyad_orbit::time::TimeScale;
use dyad_orbit::Orbit;

fn run_err(args: &[&std::ffi::OsStr]) -> String {
    let out = Command::new(env!("CARGO_BIN_EXE_dyad"))
        .args(args)
        .output()
        .expect("the dyad binary runs");
    assert!(!out.status.success(), "dyad {args:?} should have failed");
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    assert!(!stderr.contains("panicked"), "{stderr}");
    stderr
}

/// An invented 12-year pair observed on a third of its orbit, before
/// periastron (2027.4): eight positions and a few velocities of both stars.
fn scenario(seed: u64) -> String {
    format!(
        r#"seed = {seed}
noise = true
[system]
name = "Tally Marsh (invented, tests only)"
period_years = 12.0
periastron_time_jyear = 2027.4
eccentricity = 0.6
inclination_deg = 58.0
periastron_argument_deg = 110.0
node_deg = 75.0
mass_primary_msun = 1.2
mass_secondary_msun = 0.8
parallax_mas = 30.0
systemic_velocity_kms = -4.0
[astrometry]
file = "positions.csv"
time_column = "jyear"
form = "cartesian"
first = 2019.0
last = 2024.5
count = 8
dra_error_mas = 3.0
ddec_error_mas = 3.0
corr = 0.0
[velocities]
file = "velocities.csv"
time_column = "jyear"
[[velocities.instruments]]
name = "fen-echelle"
stars = ["primary", "secondary"]
first = 2019.5
last = 2024.5
count = 5
error_kms = 0.5
jitter_kms = 0.0
offset_kms = 0.0
"#
    )
}

const CONFIG: &str = r#"[data]
astrometry = "positions.csv"
velocities = ["velocities.csv"]
catalogue_parallax_mas = 30.0
catalogue_parallax_err_mas = 0.3
[priors]
period_years = { shape = "log_uniform", min = 2.0, max = 100.0 }
total_mass_msun = { shape = "log_uniform", min = 0.1, max = 20.0 }
jitter_kms = 0
[sampler]
walkers = 40
max_steps = 30000
seed = 5
[output]
folder = "run"
"#;

fn read_json(path: &Path) -> Value {
    let text = fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

/// 68 per cent interval widths of M1 and M2 in a run's summary.
fn mass_widths(run: &Path) -> [f64; 2] {
    let summary = read_json(&run.join("summary.json"));
    let width = |name: &str| {
        let p = summary["parameters"]
            .as_array()
            .expect("parameters")
            .iter()
            .find(|p| p["name"] == name)
            .unwrap_or_else(|| panic!("no {name}"));
        p["q68"][1].as_f64().unwrap() - p["q68"][0].as_f64().unwrap()
    };
    [width("mass_primary_msun"), width("mass_secondary_msun")]
}

fn fit(dir: &Path) -> PathBuf {
    let config = dir.join("fit.toml");
    fs::write(&config, CONFIG).unwrap();
    run_ok(&["fit".as_ref(), config.as_os_str(), "--quiet".as_ref()]);
    dir.join("run")
}

/// A copy of `base` (scenario data) with one more position at `jyear`,
/// simulated from the truth with 3 mas errors.
fn with_extra_position(
    base: &Path,
    dir: &Path,
    truth: &Orbit,
    jyear: f64,
    rng: &mut Xoshiro256PlusPlus,
) {
    fs::create_dir_all(dir).unwrap();
    fs::copy(base.join("velocities.csv"), dir.join("velocities.csv")).unwrap();
    let mut text = fs::read_to_string(base.join("positions.csv")).unwrap();
    let s = truth.sky_offset(TimeScale::JulianYear.to_jd(jyear));
    let (zx, zy): (f64, f64) = (rng.sample(StandardNormal), rng.sample(StandardNormal));
    text.push_str(&format!(
        "{jyear:.6},{:.4},{:.4},3.0000,3.0000,0\n",
        s.dra + 3.0 * zx,
        s.ddec + 3.0 * zy
    ));
    fs::write(dir.join("positions.csv"), text).unwrap();
}

#[test]
fn the_recommended_date_teaches_more_than_a_random_one() {
    let mut gain_best = Vec::new();
    let mut gain_random = Vec::new();
    for seed in [21u64, 22, 23] {
        let dir = tempfile::tempdir().unwrap();
        let base = dir.path().join("base");
        fs::create_dir_all(&base).unwrap();
        let scenario_path = base.join("scenario.toml");
        fs::write(&scenario_path, scenario(seed)).unwrap();
        run_ok(&["simulate".as_ref(), scenario_path.as_os_str()]);
        let truth = Orbit::new(&Scenario::load(&scenario_path).unwrap().system.elements).unwrap();

        let run = fit(&base);
        let before = mass_widths(&run);
        run_ok(&[
            "advise".as_ref(),
            run.as_os_str(),
            "--from=2025.0".as_ref(),
            "--to=2033.0".as_ref(),
            "--step=0.25".as_ref(),
            "--position-error-mas=3".as_ref(),
            "--draws=4000".as_ref(),
            "--outcomes=32".as_ref(),
        ]);
        if seed == 21 {
            // An earlier advice is never replaced silently; bad ranges and
            // seasons are refused with a reason.
            let again = run_err(&[
                "advise".as_ref(),
                run.as_os_str(),
                "--from=2025".as_ref(),
                "--to=2026".as_ref(),
                "--step=0.5".as_ref(),
            ]);
            assert!(
                again.contains("earlier advice") && again.contains("--overwrite"),
                "{again}"
            );
            for (args, why) in [
                (
                    ["--from=2026", "--to=2025", "--step=0.5", "--overwrite"],
                    "before --from",
                ),
                (
                    ["--from=2025", "--to=2026", "--step=0", "--overwrite"],
                    "must be positive",
                ),
                (
                    ["--from=2025", "--to=2026", "--step=0.5", "--season=0-4"],
                    "month number",
                ),
            ] {
                let mut all: Vec<&std::ffi::OsStr> = vec!["advise".as_ref(), run.as_os_str()];
                all.extend(args.iter().map(std::ffi::OsStr::new));
                let e = run_err(&all);
                assert!(e.contains(why), "{args:?}: {e}");
            }
        }
        // Candidate positions and their mean expected shrinkage of M1 and M2.
        let csv = fs::read_to_string(run.join("next-epoch-advice.csv")).unwrap();
        let mut lines = csv.lines();
        let header: Vec<&str> = lines.next().unwrap().split(',').collect();
        let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
        let (c_date, c_m1, c_m2) = (
            col("date_jyear"),
            col("mass_primary_msun_shrinkage"),
            col("mass_secondary_msun_shrinkage"),
        );
        let candidates: Vec<(f64, f64)> = lines
            .map(|l| l.split(',').collect::<Vec<_>>())
            .filter(|f| f[0] == "position")
            .map(|f| {
                let num = |k: usize| f[k].parse::<f64>().unwrap();
                (num(c_date), 0.5 * (num(c_m1) + num(c_m2)))
            })
            .collect();
        assert_eq!(candidates.len(), 33);
        let best = candidates
            .iter()
            .max_by(|a, b| a.1.total_cmp(&b.1))
            .unwrap()
            .0;
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
        let random = candidates[rng.gen_range(0..candidates.len())].0;

        for (date, gains) in [(best, &mut gain_best), (random, &mut gain_random)] {
            let case = dir.path().join(format!("plus-{date}"));
            // The same noise draw for both dates of a case.
            let mut noise = Xoshiro256PlusPlus::seed_from_u64(1000 + seed);
            with_extra_position(&base, &case, &truth, date, &mut noise);
            let after = mass_widths(&fit(&case));
            let shrink = 0.5 * ((1.0 - after[0] / before[0]) + (1.0 - after[1] / before[1]));
            gains.push(shrink);
        }
    }
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let (b, r) = (mean(&gain_best), mean(&gain_random));
    eprintln!("shrinkage of the mass intervals: recommended {gain_best:?}, random {gain_random:?}");
    assert!(
        b > r,
        "recommended dates shrank the masses by {b:.3} on average, random ones by {r:.3}"
    );
}
