//! The dyad half of the side-by-side speed benchmark in `benchmarks/peer`
//! (run the whole benchmark with `benchmarks/peer/run.sh`).
//!
//! What it is for: writing the invented data sets both sides read
//! (`prepare`), the log-posterior values at seeded points that the Python
//! side must reproduce before anything is timed, and the identical starting
//! ensembles; then timing dyad (`bench`): the cost of one log-posterior
//! evaluation, and full ensemble runs whose effective samples per second are
//! measured from the integrated autocorrelation time.
//!
//! What it is not for: a test of correctness of dyad's model (the crates'
//! own tests do that) or a criterion benchmark (these are whole-run timings
//! of the kind a user sees).

use std::fs;
use std::hint::black_box;
use std::path::{Path, PathBuf};
use std::time::Instant;

use anyhow::{bail, Context, Result};
use clap::{Parser, Subcommand};
use serde_json::{json, Value};

use dyad_fit::plan::fit_moves;
use dyad_model::likelihood::Model;
use dyad_model::load::load_dataset;
use dyad_model::params::{ModelPriors, OrbitalParameters, PhysicalParameters};
use dyad_model::simulate::Scenario;
use dyad_sampler::diagnostics::autocorr_time;
use dyad_sampler::{
    run, FnDensity, MemorySink, MoveMixture, Progress, RunConfig, RunControl, Start,
};

/// Observation counts of the three data sets (2 per astrometric epoch, 1 per velocity).
const OBSERVATION_COUNTS: [usize; 3] = [20, 100, 1000];

/// Largest ensemble any run uses; `prepare` writes this many start positions.
const MAX_WALKERS: usize = 128;

/// Seeded check points per data set, near the truth (plus two outside the prior support).
const CHECK_POINTS_NEAR: usize = 20;

/// Half-width of the starting ball, in every sampled coordinate.
const START_BALL_SCALE: f64 = 1e-4;

#[derive(Parser)]
#[command(about = "dyad side of the benchmarks/peer speed comparison")]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Write the data sets, check points and starting ensembles into OUT.
    Prepare {
        /// Output folder (one sub-folder per data set).
        #[arg(long)]
        out: PathBuf,
    },
    /// Time dyad on the data sets written by `prepare`; results go to OUT/dyad_results.json.
    Bench {
        /// Folder written by `prepare`.
        #[arg(long)]
        out: PathBuf,
        /// Steps of each main sampling run.
        #[arg(long, default_value_t = 40_000)]
        steps: u64,
        /// Steps discarded as burn-in (both sides use the same number).
        #[arg(long, default_value_t = 5_000)]
        burn_in: u64,
        /// Walkers of the main runs.
        #[arg(long, default_value_t = 32)]
        walkers: usize,
        /// Seconds spent on each single-evaluation timing block.
        #[arg(long, default_value_t = 0.3)]
        eval_seconds: f64,
        /// Repeated timing blocks (the fastest is reported).
        #[arg(long, default_value_t = 5)]
        eval_repeats: usize,
        /// Seed of the sampler.
        #[arg(long, default_value_t = 20_240_917)]
        seed: u64,
    },
}

fn main() -> Result<()> {
    match Cli::parse().command {
        Command::Prepare { out } => prepare(&out),
        Command::Bench {
            out,
            steps,
            burn_in,
            walkers,
            eval_seconds,
            eval_repeats,
            seed,
        } => bench(
            &out,
            &BenchSettings {
                steps,
                burn_in,
                walkers,
                eval_seconds,
                eval_repeats,
                seed,
            },
        ),
    }
}

/// On-CPU time of this process in seconds (all its threads), from
/// `clock_gettime(CLOCK_PROCESS_CPUTIME_ID)`: on a machine shared with other
/// work this measures the work done, where wall time also counts waiting
/// for a core. NaN where the clock is not available.
#[cfg(target_os = "linux")]
fn process_cpu_seconds() -> f64 {
    #[repr(C)]
    struct Timespec {
        tv_sec: i64,
        tv_nsec: i64,
    }
    extern "C" {
        fn clock_gettime(clock_id: i32, tp: *mut Timespec) -> i32;
    }
    const CLOCK_PROCESS_CPUTIME_ID: i32 = 2;
    let mut t = Timespec {
        tv_sec: 0,
        tv_nsec: 0,
    };
    // SAFETY: clock_gettime (POSIX, in the C library std links on Linux)
    // writes one timespec (64-bit fields on 64-bit Linux) into `t`, which we own.
    let rc = unsafe { clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &mut t) };
    if rc == 0 {
        t.tv_sec as f64 + t.tv_nsec as f64 * 1e-9
    } else {
        f64::NAN
    }
}

#[cfg(not(target_os = "linux"))]
fn process_cpu_seconds() -> f64 {
    f64::NAN
}

/// The 1-minute load average (how busy the shared machine was), if known.
fn load_average() -> Option<f64> {
    fs::read_to_string("/proc/loadavg")
        .ok()?
        .split_whitespace()
        .next()?
        .parse()
        .ok()
}

/// Wall and on-CPU seconds since `start`.
struct Stopwatch {
    wall: Instant,
    cpu: f64,
}

impl Stopwatch {
    fn start() -> Self {
        Self {
            wall: Instant::now(),
            cpu: process_cpu_seconds(),
        }
    }
    fn wall(&self) -> f64 {
        self.wall.elapsed().as_secs_f64()
    }
    fn cpu(&self) -> f64 {
        process_cpu_seconds() - self.cpu
    }
}

/// SplitMix64 (Steele, Lea & Flood 2014, OOPSLA) with Box-Muller normals:
/// enough for seeded check points, no dependency needed.
struct SmallRng(u64);

impl SmallRng {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform on (0, 1].
    fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 1.0) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
    }
}

/// Epoch counts of a data set with `n` observations: half of them
/// astrometric (two per epoch), half velocities, of which 60 per cent come
/// from a double-lined instrument and the rest from a primary-only one.
fn epoch_counts(n: usize) -> (usize, usize, usize) {
    let astrometric_epochs = n / 4;
    let velocities = n - 2 * astrometric_epochs;
    let double_lined_epochs = 3 * velocities / 10;
    let single_lined = velocities - 2 * double_lined_epochs;
    (astrometric_epochs, double_lined_epochs, single_lined)
}

/// The scenario of the invented binary "Marrow Finch" with `n` observations.
fn scenario_text(n: usize) -> String {
    let (n_ast, n_double, n_single) = epoch_counts(n);
    format!(
        r#"# Invented binary for the benchmarks/peer speed comparison; not a real star.
seed = {seed}
noise = true

[system]
name = "Marrow Finch (invented)"
period_days = 3543.0
periastron_time_jd = 2457310.0
eccentricity = 0.42
inclination_deg = 63.0
periastron_argument_deg = 118.0
node_deg = 231.0
mass_primary_msun = 1.32
mass_secondary_msun = 0.87
parallax_mas = 28.4
systemic_velocity_kms = 14.2

[astrometry]
file = "positions.csv"
time_column = "jd"
form = "polar"
first = 2455100.0
last = 2460600.0
count = {n_ast}
separation_error_mas = 1.5
position_angle_error_deg = 0.6
corr = 0.15

[velocities]
file = "velocities.csv"
time_column = "jd"

[[velocities.instruments]]
name = "ridge-echelle"
stars = ["primary", "secondary"]
first = 2455230.5
last = 2460480.5
count = {n_double}
error_kms = 0.35
jitter_kms = 0.2
offset_kms = 0.0

[[velocities.instruments]]
name = "valley-spectrograph"
stars = ["primary"]
first = 2455400.25
last = 2460300.25
count = {n_single}
error_kms = 0.8
jitter_kms = 0.5
offset_kms = 1.3
"#,
        seed = 4100 + n
    )
}

/// Loads a data set folder written by `prepare` and builds dyad's model
/// with the default priors.
fn load_model(dir: &Path) -> Result<Model> {
    let dataset = load_dataset(
        Some(&dir.join("positions.csv")),
        &[&dir.join("velocities.csv")],
    )
    .with_context(|| format!("loading {}", dir.display()))?;
    let priors = ModelPriors::defaults(&dataset);
    Ok(Model::new(dataset, &priors)?)
}

fn dataset_dir(out: &Path, n: usize) -> PathBuf {
    out.join(format!("obs{n}"))
}

fn prepare(out: &Path) -> Result<()> {
    for &n in &OBSERVATION_COUNTS {
        let dir = dataset_dir(out, n);
        fs::create_dir_all(&dir).with_context(|| format!("creating {}", dir.display()))?;
        let text = scenario_text(n);
        let scenario_path = dir.join("scenario.toml");
        fs::write(&scenario_path, &text)?;
        let scenario = Scenario::from_toml_str(&text, &scenario_path)?;
        for (file, csv) in scenario.render()? {
            fs::write(&file, csv).with_context(|| format!("writing {}", file.display()))?;
        }
        let model = load_model(&dir)?;
        if model.observation_count() != n {
            bail!(
                "data set {n}: dyad counts {} observations",
                model.observation_count()
            );
        }
        let truth = truth_vector(&model, &scenario)?;
        let dim = model.dim();

        // Check points: the truth, then seeded offsets of growing size, then
        // two points outside the prior support (e >= 1; |cos i| > 1).
        let mut rng = SmallRng(0x5EED_0000 + n as u64);
        let mut points = vec![truth.clone()];
        for k in 1..CHECK_POINTS_NEAR {
            let spread = 1e-3 * (1.0 + k as f64 / 4.0);
            points.push(truth.iter().map(|t| t + spread * rng.normal()).collect());
        }
        let names = model.parameter_names();
        let index = |name: &str| names.iter().position(|s| s == name);
        if let Some(i) = index("sqrt_e_cos_omega") {
            let mut p = truth.clone();
            p[i] = 1.05;
            points.push(p);
        }
        if let Some(i) = index("cos_inclination") {
            let mut p = truth.clone();
            p[i] = 1.5;
            points.push(p);
        }
        let values: Vec<Value> = points
            .iter()
            .map(|x| {
                json!({
                    "x": x,
                    "log_prior": model.log_prior(x),
                    "log_likelihood": model.log_likelihood(x),
                    "log_posterior": model.log_posterior(x),
                })
            })
            .collect();

        // One starting ensemble of MAX_WALKERS; a run with W walkers takes the first W.
        let mut start_rng = SmallRng(0xBA11_0000 + n as u64);
        let start: Vec<Vec<f64>> = (0..MAX_WALKERS)
            .map(|_| {
                truth
                    .iter()
                    .map(|t| t + START_BALL_SCALE * start_rng.normal())
                    .collect()
            })
            .collect();
        for (w, x) in start.iter().enumerate() {
            if !model.log_posterior(x).is_finite() {
                bail!("data set {n}: start walker {w} is outside the support");
            }
        }
        let doc = json!({
            "observations": n,
            "dim": dim,
            "names": names,
            "instruments": model.dataset().instruments,
            "reference_epoch_jd": model.layout().reference_epoch_jd(),
            "truth": truth,
            "check_points": values,
            "start_ball_scale": START_BALL_SCALE,
            "start": start,
        });
        fs::write(dir.join("check.json"), serde_json::to_string_pretty(&doc)?)?;
        println!(
            "prepared {} ({n} observations, {dim} parameters)",
            dir.display()
        );
    }
    Ok(())
}

/// The sampled coordinates of the scenario's true parameters.
fn truth_vector(model: &Model, scenario: &Scenario) -> Result<Vec<f64>> {
    let sys = &scenario.system;
    let el = &sys.elements;
    let orbit = OrbitalParameters {
        period_days: el.period_days,
        eccentricity: el.e,
        omega_rad: el.omega_rad,
        mean_longitude_rad: 0.0,
        t_peri_jd: el.t_peri_jd,
        inclination_rad: Some(el.inc_rad),
        node_rad: Some(el.node_rad),
        total_mass_msun: sys.total_mass_msun(),
        parallax_mas: sys.parallax_mas,
        semi_major_axis_au: sys.semi_major_axis_au(),
        semi_major_axis_mas: Some(el.a),
        mass_ratio: sys.mass_ratio,
        k1_kms: None,
        k2_kms: None,
    };
    // Instrument truths as written in `scenario_text`.
    let truth_of = |name: &str| match name {
        "ridge-echelle" => Ok((sys.systemic_kms, 0.2)),
        "valley-spectrograph" => Ok((sys.systemic_kms + 1.3, 0.5)),
        other => bail!("unknown instrument {other}"),
    };
    let mut offsets_kms = Vec::new();
    let mut jitters_kms = Vec::new();
    for name in &model.dataset().instruments {
        let (o, j) = truth_of(name)?;
        offsets_kms.push(o);
        jitters_kms.push(j);
    }
    Ok(model.layout().from_physical(&PhysicalParameters {
        orbit,
        offsets_kms,
        jitters_kms,
    })?)
}

struct BenchSettings {
    steps: u64,
    burn_in: u64,
    walkers: usize,
    eval_seconds: f64,
    eval_repeats: usize,
    seed: u64,
}

/// What `bench` reads back from a data set's check.json.
struct CheckFile {
    /// Check points inside the prior support.
    points: Vec<Vec<f64>>,
    /// Starting ensemble of [`MAX_WALKERS`] walkers.
    start: Vec<Vec<f64>>,
}

/// The check points inside the support and the starting ensemble of a data set.
fn read_check(dir: &Path) -> Result<CheckFile> {
    let path = dir.join("check.json");
    let doc: Value = serde_json::from_str(&fs::read_to_string(&path)?)
        .with_context(|| format!("reading {}", path.display()))?;
    let vector = |v: &Value| -> Result<Vec<f64>> {
        v.as_array()
            .context("expected an array")?
            .iter()
            .map(|x| x.as_f64().context("expected a number"))
            .collect()
    };
    let mut points = Vec::new();
    for p in doc["check_points"].as_array().context("check_points")? {
        if p["log_posterior"].as_f64().is_some() {
            points.push(vector(&p["x"])?);
        }
    }
    let start = doc["start"]
        .as_array()
        .context("start")?
        .iter()
        .map(vector)
        .collect::<Result<Vec<_>>>()?;
    Ok(CheckFile { points, start })
}

/// Fastest of `repeats` blocks of about `seconds` each, in on-CPU
/// microseconds per log-posterior evaluation, cycling through `points`.
fn time_single_evaluation(model: &Model, points: &[Vec<f64>], seconds: f64, repeats: usize) -> f64 {
    // Calibrate the block length on a short trial.
    let trial = Stopwatch::start();
    let mut calls = 0usize;
    while trial.wall() < 0.02 {
        for p in points {
            black_box(model.log_posterior(black_box(p)));
        }
        calls += points.len();
    }
    let per_call = trial.cpu().max(1e-9) / calls as f64;
    let rounds = ((seconds / per_call) as usize / points.len()).max(1);
    let mut best = f64::INFINITY;
    for _ in 0..repeats {
        let t = Stopwatch::start();
        for _ in 0..rounds {
            for p in points {
                black_box(model.log_posterior(black_box(p)));
            }
        }
        let us = t.cpu() * 1e6 / (rounds * points.len()) as f64;
        best = best.min(us);
    }
    best
}

/// One ensemble run and its effective-sample rate.
struct RunTiming {
    walkers: usize,
    threads: usize,
    steps: u64,
    /// Wall seconds of the run.
    wall_seconds: f64,
    /// On-CPU seconds of the run (all threads).
    cpu_seconds: f64,
    /// On-CPU seconds of dyad's end-of-run diagnostics (not in `cpu_seconds`).
    end_of_run_cpu_seconds: f64,
    /// Wall seconds of the same.
    end_of_run_wall_seconds: f64,
    tau: Vec<f64>,
    tau_long_enough: bool,
    mean_acceptance: f64,
    final_positions: Vec<f64>,
    /// Post-burn-in samples, [step][walker][dim].
    kept: Vec<f64>,
    kept_steps: usize,
}

impl RunTiming {
    fn tau_max(&self) -> f64 {
        self.tau.iter().copied().fold(f64::NAN, f64::max)
    }
    /// Effective samples per second in equilibrium, W / (tau_max * seconds
    /// per step): the ESS of the kept steps over the time they took.
    fn ess_rate(&self, seconds: f64) -> f64 {
        self.walkers as f64 * self.steps as f64 / (self.tau_max() * seconds)
    }
    fn json(&self) -> Value {
        let ess = self.walkers as f64 * self.kept_steps as f64 / self.tau_max();
        let per_step = |s: f64| s * 1e6 / self.steps as f64;
        json!({
            "walkers": self.walkers,
            "threads": self.threads,
            "steps": self.steps,
            "kept_steps": self.kept_steps,
            "wall_seconds": self.wall_seconds,
            "cpu_seconds": self.cpu_seconds,
            "end_of_run_cpu_seconds": self.end_of_run_cpu_seconds,
            "end_of_run_wall_seconds": self.end_of_run_wall_seconds,
            "us_per_step_wall": per_step(self.wall_seconds),
            "us_per_step_cpu": per_step(self.cpu_seconds),
            "us_per_walker_step_cpu": per_step(self.cpu_seconds) / self.walkers as f64,
            "tau": self.tau,
            "tau_max": self.tau_max(),
            "tau_long_enough": self.tau_long_enough,
            "ess": ess,
            "ess_per_second_wall": self.ess_rate(self.wall_seconds),
            "ess_per_second_cpu": self.ess_rate(self.cpu_seconds),
            "mean_acceptance": self.mean_acceptance,
        })
    }
}

fn sample(
    model: &Model,
    start: &[Vec<f64>],
    walkers: usize,
    threads: usize,
    s: &BenchSettings,
    moves: &MoveMixture,
) -> Result<RunTiming> {
    let steps = s.steps;
    let dim = model.dim();
    let density = FnDensity::new(
        dim,
        |x: &[f64]| model.log_prior(x),
        |x: &[f64]| model.log_likelihood(x),
    );
    let mut config = RunConfig::new(walkers, s.seed, steps);
    config.convergence = None;
    config.moves = moves.clone();
    config.parallel = threads > 1;
    config.progress_every = steps.max(1);
    let positions: Vec<f64> = start[..walkers].iter().flatten().copied().collect();
    let start = Start::Positions(positions);
    let mut sink = MemorySink::for_samples(dim, walkers);
    // The clock stops at the last step (progress is reported there), before
    // the end-of-run diagnostics, which are timed on their own: the peer's
    // timed section likewise ends with its last step.
    let clock = Stopwatch::start();
    let mut at_last_step = (f64::NAN, f64::NAN);
    let mut on_progress = |p: &Progress| {
        if p.step == steps {
            at_last_step = (clock.wall(), clock.cpu());
        }
    };
    let mut go = || {
        let control = RunControl {
            progress: Some(&mut on_progress),
            cancel: None,
            watch: None,
        };
        run(&density, &config, &start, &mut sink, control)
    };
    let result = if threads > 1 {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()?
            .install(go)?
    } else {
        go()?
    };
    let (wall_total, cpu_total) = (clock.wall(), clock.cpu());
    let (wall_seconds, cpu_seconds) = at_last_step;
    if !(wall_seconds.is_finite() && result.steps == steps) {
        bail!("the run stopped at step {} of {steps}", result.steps);
    }
    let table = sink.table();
    let first = table.first_after(s.burn_in);
    let kept_steps = table.len() - first;
    let mut tau = Vec::with_capacity(dim);
    let mut long_enough = true;
    for p in 0..dim {
        let draws = table.column(p, first);
        let a = autocorr_time(&draws, kept_steps, walkers)?;
        long_enough &= a.long_enough;
        tau.push(a.tau);
    }
    let width = walkers * (dim + 2);
    let mut kept = Vec::with_capacity(kept_steps * walkers * dim);
    for r in first..table.len() {
        let rec = &table.values[r * width..(r + 1) * width];
        for w in 0..walkers {
            kept.extend_from_slice(&rec[w * (dim + 2)..w * (dim + 2) + dim]);
        }
    }
    Ok(RunTiming {
        walkers,
        threads,
        steps: result.steps,
        wall_seconds,
        cpu_seconds,
        end_of_run_cpu_seconds: cpu_total - cpu_seconds,
        end_of_run_wall_seconds: wall_total - wall_seconds,
        tau,
        tau_long_enough: long_enough,
        mean_acceptance: result.diagnostics.mean_acceptance,
        final_positions: result.final_positions,
        kept,
        kept_steps,
    })
}

/// One line about a finished run.
fn describe(n: usize, r: &RunTiming) -> String {
    format!(
        "dyad {n:>5} observations: {} walkers x {} steps, {} thread(s): {:.2} s on CPU ({:.2} s wall), \
         tau_max {:.1}, {:.0} ESS per CPU second",
        r.walkers,
        r.steps,
        r.threads,
        r.cpu_seconds,
        r.wall_seconds,
        r.tau_max(),
        r.ess_rate(r.cpu_seconds)
    )
}

fn bench(out: &Path, s: &BenchSettings) -> Result<()> {
    if s.burn_in >= s.steps {
        bail!(
            "burn-in ({}) must be shorter than the run ({})",
            s.burn_in,
            s.steps
        );
    }
    let load_before = load_average();
    let mut sets = Vec::new();
    let mut walker_scaling = Vec::new();
    for &n in &OBSERVATION_COUNTS {
        let dir = dataset_dir(out, n);
        let model = load_model(&dir)?;
        let CheckFile { points, start } = read_check(&dir)?;
        let us = time_single_evaluation(&model, &points, s.eval_seconds, s.eval_repeats);
        println!("dyad {n:>5} observations: {us:.3} us (on CPU) per log-posterior evaluation");

        let stretch = MoveMixture::default();
        let serial = sample(&model, &start, s.walkers, 1, s, &stretch)?;
        println!("{}", describe(n, &serial));
        let two = sample(&model, &start, s.walkers, 2, s, &stretch)?;
        let identical = two.final_positions == serial.final_positions;
        println!(
            "{}; same chain as on 1 thread: {identical}",
            describe(n, &two)
        );
        let fit_moves = fit_moves();
        let mixture = sample(&model, &start, s.walkers, 1, s, &fit_moves)?;
        println!("{} (dyad fit's moves)", describe(n, &mixture));
        let mixture_two = sample(&model, &start, s.walkers, 2, s, &fit_moves)?;
        println!("{} (dyad fit's moves)", describe(n, &mixture_two));
        if n == 100 {
            // The kept chain, for the Python side to check that emcee's
            // autocorrelation estimate agrees with dyad's on the same draws.
            let bytes: Vec<u8> = serial.kept.iter().flat_map(|v| v.to_le_bytes()).collect();
            fs::write(dir.join("dyad_chain.f64"), bytes)?;
            walker_scaling.push(serial.json());
            for &w in &[64usize, MAX_WALKERS] {
                let r = sample(&model, &start, w, 1, s, &stretch)?;
                println!("{}", describe(n, &r));
                walker_scaling.push(r.json());
            }
        }
        sets.push(json!({
            "observations": n,
            "dim": model.dim(),
            "us_per_eval": us,
            "serial": serial.json(),
            "two_threads": two.json(),
            "two_threads_identical_chain": identical,
            "fit_moves_serial": mixture.json(),
            "fit_moves_two_threads": mixture_two.json(),
            "fit_moves_two_threads_identical_chain":
                mixture_two.final_positions == mixture.final_positions,
            "chain_file": if n == 100 { Some("dyad_chain.f64") } else { None },
            "chain_shape": [serial.kept_steps, s.walkers, model.dim()],
        }));
    }
    let fit_weights = fit_moves().weights();
    let doc = json!({
        "steps": s.steps,
        "burn_in": s.burn_in,
        "walkers": s.walkers,
        "seed": s.seed,
        "move": "stretch, a = 2",
        // Read by the Python side, which gives emcee the same mixture.
        "fit_moves_weights": {
            "stretch": fit_weights[0],
            "differential_evolution": fit_weights[1],
        },
        "load_average_before": load_before,
        "load_average_after": load_average(),
        "data_sets": sets,
        "walker_scaling_obs100": walker_scaling,
    });
    let path = out.join("dyad_results.json");
    fs::write(&path, serde_json::to_string_pretty(&doc)?)?;
    println!("wrote {}", path.display());
    Ok(())
}
