//! The library fits a simulated binary given as in-memory arrays: no
//! process, no configuration file, no data file, no run folder.
//!
//! The measurements are simulated by `dyad-model`'s simulator (a scenario
//! given as text, its CSV output parsed back in memory) for an invented
//! system; the check values are that system's true masses, which the
//! simulation put into the data.

use std::path::{Path, PathBuf};

use dyad_fit::{CancelFlag, Dataset, FitRequest, Observer, Progress, RunConfig};
use dyad_model::config::{DataSettings, OutputSettings, PriorSettings, SamplerSettings, Tempering};
use dyad_model::load::{load_astrometry_from_reader, load_velocities_from_reader};
use dyad_model::simulate::Scenario;

/// An invented visual and double-lined binary, "Marrow Finch": not a real
/// star. M1 = 1.10 and M2 = 0.80 M_sun.
const SCENARIO: &str = r#"
seed = 21
noise = true

[system]
name = "Marrow Finch (invented)"
period_years = 11.0
periastron_time_jyear = 2012.3
eccentricity = 0.35
inclination_deg = 64.0
periastron_argument_deg = 40.0
node_deg = 110.0
mass_primary_msun = 1.10
mass_secondary_msun = 0.80
parallax_mas = 31.0
systemic_velocity_kms = 5.0

[astrometry]
file = "positions.csv"
time_column = "jyear"
form = "polar"
first = 2006.1
last = 2019.8
count = 20
separation_error_mas = 2.0
position_angle_error_deg = 0.3
corr = 0.0

[velocities]
file = "velocities.csv"
time_column = "jd"

[[velocities.instruments]]
name = "bench-spectrograph"
stars = ["primary", "secondary"]
first = 2454000.0
last = 2458500.0
count = 14
error_kms = 0.4
jitter_kms = 0.2
offset_kms = 0.0
"#;

const TRUE_M1: f64 = 1.10;
const TRUE_M2: f64 = 0.80;

/// The simulated measurements as arrays: the simulator's CSV text is
/// parsed in memory (the paths only label messages; nothing is read or
/// written).
fn simulated_dataset() -> Dataset {
    let label = Path::new("marrow-finch.scenario.toml");
    let scenario = Scenario::from_toml_str(SCENARIO, label).expect("a valid scenario");
    let mut dataset = Dataset::default();
    for (path, text) in scenario.render().expect("the simulator runs") {
        if path.ends_with("positions.csv") {
            dataset.astrometry =
                load_astrometry_from_reader(text.as_bytes(), &path).expect("simulated positions");
        } else {
            let mut instruments = Vec::new();
            dataset.velocities =
                load_velocities_from_reader(text.as_bytes(), &path, &mut instruments)
                    .expect("simulated velocities");
            dataset.instruments = instruments;
        }
    }
    assert_eq!(dataset.astrometry.len(), 20);
    assert_eq!(dataset.velocities.len(), 28);
    dataset
}

/// Default priors, an invented catalogue parallax near the truth, and a
/// stopping rule of 400 effective draws (enough for 95 % intervals:
/// Vehtari et al. 2021 recommend at least 400).
fn settings() -> RunConfig {
    RunConfig {
        file: PathBuf::from("in memory"),
        data: DataSettings {
            astrometry: None,
            velocities: Vec::new(),
            catalogue_parallax: Some((30.6, 0.8)),
            reference_epoch_jd: None,
        },
        priors: PriorSettings::default(),
        astrometry_errors: Default::default(),
        start: Default::default(),
        sampler: SamplerSettings {
            walkers: 32,
            max_steps: 30_000,
            thinning: 1,
            burn_in_fraction: 0.5,
            seed: 3,
            effective_draws: 400.0,
            max_split_rhat: 1.03,
            mode_weight_error: 0.01,
            tempering: Tempering::Off,
            period_windows_days: Vec::new(),
        },
        output: OutputSettings {
            folder: PathBuf::from("unused"),
            orbits_on_sky_plot: 40,
        },
    }
}

/// Counts what the workflow reports.
#[derive(Default)]
struct Counter {
    progress_reports: usize,
    started: bool,
    finished: bool,
}

impl Observer for Counter {
    fn sampling_started(&mut self, _max_steps: u64) {
        self.started = true;
    }
    fn sampling_progress(&mut self, _progress: &Progress) {
        self.progress_reports += 1;
    }
    fn sampling_finished(&mut self) {
        self.finished = true;
    }
}

#[test]
fn a_simulated_system_from_arrays_gives_the_true_masses_in_its_95_per_cent_intervals() {
    let run = FitRequest::from_arrays(settings(), simulated_dataset())
        .prepare()
        .expect("a valid request");
    assert_eq!(run.folder(), None, "an in-memory fit has no run folder");
    let mut counter = Counter::default();
    let result = run
        .run(&mut counter, &CancelFlag::new())
        .expect("the fit runs");
    assert!(counter.started && counter.finished && counter.progress_reports > 0);
    assert!(!result.was_cancelled());
    assert_eq!(result.outcome.status, "converged", "{:?}", result.outcome);
    assert!(
        result.evidence.is_none(),
        "an untempered run has no evidence"
    );
    let posterior = result.posterior.expect("a finished run has a posterior");
    assert_eq!(posterior.modes.modes.len(), 1, "one period mode");
    for (name, truth) in [
        ("mass_primary_msun", TRUE_M1),
        ("mass_secondary_msun", TRUE_M2),
        ("total_mass_msun", TRUE_M1 + TRUE_M2),
    ] {
        let p = posterior.summary.get(name).expect("a joint fit has masses");
        assert!(
            p.q95[0] <= truth && truth <= p.q95[1],
            "{name}: truth {truth} outside the 95 % interval [{}, {}]",
            p.q95[0],
            p.q95[1]
        );
        // The intervals are informative, not the whole prior.
        assert!(p.q95[1] - p.q95[0] < 0.5 * truth, "{name}: {p:?}");
    }
    // The draws are there to use directly: every one has a finite M1.
    let m1 = posterior.draws.table.index_of("mass_primary_msun").unwrap();
    assert!(posterior
        .draws
        .table
        .column(m1)
        .iter()
        .all(|v| v.is_finite()));
}

#[test]
fn a_run_cancelled_before_it_starts_stops_at_once_without_a_posterior() {
    let cancel = CancelFlag::new();
    cancel.cancel();
    let run = FitRequest::from_arrays(settings(), simulated_dataset())
        .prepare()
        .expect("a valid request");
    let result = run
        .run(&mut dyad_fit::Silent, &cancel)
        .expect("the run returns");
    assert!(result.was_cancelled());
    assert!(result.posterior.is_none());
    assert!(result.sampler.steps < 30_000);
}

#[test]
fn in_memory_data_cannot_go_to_a_run_folder() {
    let err = FitRequest::from_arrays(settings(), simulated_dataset())
        .into_folder(std::env::temp_dir().join("dyad-never-made"), false)
        .prepare()
        .err()
        .expect("refused");
    assert!(err.to_string().contains("run folder"), "{err}");
}
