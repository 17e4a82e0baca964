//! `dyad calibrate SETTINGS.toml`: simulation-based calibration of the whole
//! pipeline (Talts, Betancourt, Simpson, Vehtari & Gelman 2018, "Validating
//! Bayesian inference algorithms with simulation-based calibration",
//! arXiv:1804.06788).
//!
//! For each system i: true parameters are drawn from the very prior the fit
//! uses (`ParameterLayout::sample_prior`), `dyad simulate`'s code writes
//! noisy measurements at the planned epochs, and the data are fitted exactly
//! as `dyad fit` does (starting-point search, sampling plan, ensemble
//! sampler). The post-burn-in draws are thinned by the largest
//! autocorrelation time to L roughly independent draws (Talts et al. sec.
//! 5), and the rank of the truth among them is recorded for M1, M2, P, e,
//! the parallax and q. If the whole pipeline is right, every rank is uniform
//! on 0..=L; a chi-square test of the binned ranks and the coverage of the
//! central 68 and 95 per cent intervals check that.
//!
//! Every system gets its own seeds from (seed, i), so the results depend on
//! the settings only, never on the number of threads. The data and run
//! configuration of every system are kept in `OUTPUT/systems/NNNN/`, so a
//! suspicious system can be refitted with `dyad fit`.
//!
//! The settings keys are documented in configs/calibration/README.md.

use std::collections::BTreeMap;
use std::fs;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

use crate::error::{bail, Context, FitError, Result};
use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use rayon::prelude::*;
use serde::Serialize;

use dyad_common::quantile::{median_of_finite as median, quantile_sorted};
use dyad_common::seed::mix64;
use dyad_model::config::RunConfig;
use dyad_model::likelihood::Model;
use dyad_model::simulate::Scenario;
use dyad_sampler::{MemorySink, RunControl, RunStatus};

use crate::density::Posterior;
use crate::observer::Observer;
use crate::plan::SamplingPlan;
use crate::run_folder::write_text;

/// The calibrated quantities: name in `Model::derived_names_units`, label.
const TRACKED: [(&str, &str); 6] = [
    ("mass_primary_msun", "M1"),
    ("mass_secondary_msun", "M2"),
    ("period_days", "P"),
    ("eccentricity", "e"),
    ("parallax_mas", "parallax"),
    ("mass_ratio", "q"),
];

/// Nominal probabilities of the central intervals whose coverage is checked.
const NOMINAL: [f64; 2] = [0.68, 0.95];

/// Options of `dyad calibrate`.
pub struct CalibrateOptions {
    /// Number of systems instead of the settings' `systems`.
    pub systems: Option<usize>,
    /// Output folder instead of the settings' `output`.
    pub output: Option<PathBuf>,
    /// Reuse an output folder that holds files already.
    pub overwrite: bool,
}

/// Parsed calibration settings.
struct Settings {
    file: PathBuf,
    systems: usize,
    seed: u64,
    draws: usize,
    bins: usize,
    output: PathBuf,
    /// `[observations]`: a `dyad simulate` scenario without `[system]`.
    observations: toml::Table,
    /// `[priors]`, passed verbatim into every run configuration.
    priors: toml::Table,
    /// `[sampler]`, passed into every run configuration (seed added).
    sampler: toml::Table,
    /// `[astrometry_errors]`, passed verbatim into every run configuration;
    /// the true error scales are drawn from its priors and simulated.
    astrometry_errors: Option<toml::Table>,
}

fn integer(table: &toml::Table, key: &str, file: &Path) -> Result<Option<u64>> {
    match table.get(key) {
        None => Ok(None),
        Some(toml::Value::Integer(i)) if *i >= 0 => Ok(Some(*i as u64)),
        Some(other) => bail!(
            "{}, key '{key}': must be a whole number >= 0, found {other}",
            file.display()
        ),
    }
}

fn sub_table(table: &toml::Table, key: &str, file: &Path) -> Result<Option<toml::Table>> {
    match table.get(key) {
        None => Ok(None),
        Some(toml::Value::Table(t)) => Ok(Some(t.clone())),
        Some(_) => bail!("{}, key '{key}': must be a table [{key}]", file.display()),
    }
}

impl Settings {
    fn parse(text: &str, file: &Path) -> Result<Self> {
        let table: toml::Table =
            toml::from_str(text).with_context(|| format!("{}: not valid TOML", file.display()))?;
        const KEYS: [&str; 9] = [
            "astrometry_errors",
            "systems",
            "seed",
            "draws_per_system",
            "rank_bins",
            "output",
            "observations",
            "priors",
            "sampler",
        ];
        if let Some(k) = table.keys().find(|k| !KEYS.contains(&k.as_str())) {
            bail!(
                "{}: unknown key '{k}' (known: {})",
                file.display(),
                KEYS.join(", ")
            );
        }
        let systems = integer(&table, "systems", file)?.unwrap_or(200) as usize;
        let seed = integer(&table, "seed", file)?.unwrap_or(1);
        let draws = integer(&table, "draws_per_system", file)?.unwrap_or(99) as usize;
        let bins = integer(&table, "rank_bins", file)?.unwrap_or(20) as usize;
        if draws < 1 {
            bail!("{}, key 'draws_per_system': must be >= 1", file.display());
        }
        if bins < 2 || bins > draws + 1 {
            bail!(
                "{}, key 'rank_bins': must be in 2..={} (draws_per_system + 1)",
                file.display(),
                draws + 1
            );
        }
        let base = file.parent().map(Path::to_owned).unwrap_or_default();
        let output = match table.get("output") {
            None => base.join("calibration-run"),
            Some(toml::Value::String(s)) => base.join(s),
            Some(_) => bail!("{}, key 'output': must be a folder name", file.display()),
        };
        let observations = sub_table(&table, "observations", file)?.ok_or_else(|| {
            FitError::invalid(format!(
                "{}: missing [observations] (the observing plan)",
                file.display()
            ))
        })?;
        for key in ["astrometry", "velocities"] {
            if let Some(toml::Value::Table(t)) = observations.get(key) {
                if t.contains_key("file") {
                    bail!(
                        "{}, key 'observations.{key}.file': the file names are chosen by \
                         `dyad calibrate`; remove it",
                        file.display()
                    );
                }
            }
        }
        if let Some(k) = observations
            .keys()
            .find(|k| !["astrometry", "velocities"].contains(&k.as_str()))
        {
            bail!(
                "{}, key 'observations.{k}': unknown (give [observations.astrometry] and/or \
                 [observations.velocities]; the true system is drawn from the prior)",
                file.display()
            );
        }
        if let Some(toml::Value::Table(v)) = observations.get("velocities") {
            if let Some(toml::Value::Array(list)) = v.get("instruments") {
                for (n, inst) in list.iter().enumerate() {
                    if let toml::Value::Table(t) = inst {
                        for k in ["offset_kms", "jitter_kms"] {
                            if t.contains_key(k) {
                                bail!(
                                    "{}, key 'observations.velocities.instruments[{n}].{k}': \
                                     drawn from the prior ([priors] {k}); remove it",
                                    file.display()
                                );
                            }
                        }
                    }
                }
            }
        }
        let priors = sub_table(&table, "priors", file)?.unwrap_or_default();
        let sampler = sub_table(&table, "sampler", file)?.unwrap_or_default();
        if sampler.contains_key("seed") {
            bail!(
                "{}, key 'sampler.seed': every system's seed is derived from the top-level \
                 'seed'; remove it",
                file.display()
            );
        }
        Ok(Self {
            file: file.to_owned(),
            systems,
            seed,
            draws,
            bins,
            output,
            observations,
            priors,
            sampler,
            astrometry_errors: sub_table(&table, "astrometry_errors", file)?,
        })
    }
}

/// A seed for stream `stream` of system `system`: SplitMix64 finaliser
/// (Steele, Lea & Flood 2014, "Fast splittable pseudorandom number
/// generators") over the combined inputs, so that nearby inputs give
/// unrelated seeds.
fn system_seed(seed: u64, system: usize, stream: u64) -> u64 {
    let z = seed
        .wrapping_mul(dyad_common::seed::GOLDEN_GAMMA)
        .wrapping_add((system as u64).wrapping_mul(0xD1B5_4A32_D192_ED03))
        .wrapping_add(stream.wrapping_mul(0x8CB9_2BA7_2F3D_8DD7));
    mix64(mix64(z))
}

const STREAM_TRUTH: u64 = 1;
const STREAM_NOISE: u64 = 2;
const STREAM_SAMPLER: u64 = 3;
const STREAM_TIES: u64 = 4;

/// A true system drawn from the prior: the scenario's `[system]` table and
/// each instrument's offset and jitter, by instrument name.
struct Truth {
    system: toml::Table,
    instruments: BTreeMap<String, (f64, f64)>,
    /// Each astrometric source's true error scale (its simulated noise is
    /// that times the quoted errors).
    error_factors: BTreeMap<String, f64>,
}

/// The true system of prior draw `x` in the layout of `model`.
fn truth_of(model: &Model, x: &[f64], name: &str) -> Result<Truth> {
    let p = model
        .layout()
        .to_physical(x)
        .ok_or_else(|| FitError::invalid("a prior draw lies outside the model's domain"))?;
    let o = &p.orbit;
    let need = |v: Option<f64>, what: &str| {
        v.ok_or_else(|| {
            FitError::invalid(format!(
                "calibration needs astrometry and velocities of both stars ({what} missing)"
            ))
        })
    };
    let mut t = toml::Table::new();
    t.insert("name".into(), name.into());
    t.insert("period_days".into(), o.period_days.into());
    t.insert("periastron_time_jd".into(), o.t_peri_jd.into());
    t.insert("eccentricity".into(), o.eccentricity.into());
    t.insert(
        "inclination_deg".into(),
        need(o.inclination_rad, "inclination")?.to_degrees().into(),
    );
    t.insert(
        "periastron_argument_deg".into(),
        o.omega_rad.to_degrees().into(),
    );
    t.insert(
        "node_deg".into(),
        need(o.node_rad, "node")?.to_degrees().into(),
    );
    t.insert(
        "semi_major_axis_mas".into(),
        need(o.semi_major_axis_mas, "semi-major axis")?.into(),
    );
    t.insert(
        "parallax_mas".into(),
        need(o.parallax_mas, "parallax")?.into(),
    );
    t.insert(
        "mass_ratio".into(),
        need(o.mass_ratio, "mass ratio")?.into(),
    );
    // Each instrument's offset is the systemic velocity as it measures it.
    t.insert("systemic_velocity_kms".into(), 0.0.into());
    let instruments = model
        .dataset()
        .instruments
        .iter()
        .zip(p.offsets_kms.iter().zip(&p.jitters_kms))
        .map(|(n, (&off, &jit))| (n.clone(), (off, jit)))
        .collect();
    let layout = model.layout();
    let error_factors = layout
        .astrometry_sources()
        .iter()
        .enumerate()
        .map(|(k, n)| (n.clone(), layout.error_scale(x, k)))
        .collect();
    Ok(Truth {
        system: t,
        instruments,
        error_factors,
    })
}

/// The `[system]` of the template: a fixed invented binary.
fn template_system() -> toml::Table {
    let mut t = toml::Table::new();
    t.insert("name".into(), "calibration template".into());
    t.insert("period_days".into(), 1000.0.into());
    t.insert("periastron_time_jd".into(), 2_451_545.0.into());
    t.insert("eccentricity".into(), 0.3.into());
    t.insert("inclination_deg".into(), 60.0.into());
    t.insert("periastron_argument_deg".into(), 30.0.into());
    t.insert("node_deg".into(), 40.0.into());
    t.insert("semi_major_axis_mas".into(), 100.0.into());
    t.insert("parallax_mas".into(), 20.0.into());
    t.insert("mass_ratio".into(), 0.5.into());
    t
}

/// Writes the scenario, data and run configuration of one system into
/// `folder` and returns the run configuration. `truth` is `None` for the
/// template (noise-free data of a fixed invented system, used only to learn
/// the parameter layout, which depends on the epochs and instruments alone).
fn write_system(
    settings: &Settings,
    folder: &Path,
    truth: Option<(Truth, u64)>,
    sampler_seed: u64,
    noise: bool,
) -> Result<RunConfig> {
    fs::create_dir_all(folder).with_context(|| format!("creating {}", folder.display()))?;
    let mut scenario = settings.observations.clone();
    let (system, instruments, error_factors, noise_seed, noise) = match truth {
        Some((t, seed)) => (t.system, t.instruments, t.error_factors, seed, noise),
        None => (
            template_system(),
            BTreeMap::new(),
            BTreeMap::new(),
            1,
            false,
        ),
    };
    if let Some(toml::Value::Table(a)) = scenario.get_mut("astrometry") {
        a.insert("file".into(), "positions.csv".into());
        if let Some(toml::Value::Array(list)) = a.get_mut("sources") {
            for source in list.iter_mut() {
                let toml::Value::Table(t) = source else {
                    continue;
                };
                let name = t.get("name").and_then(|n| n.as_str()).map(str::trim);
                if let Some(&factor) = name.and_then(|n| error_factors.get(n)) {
                    t.insert("error_factor".into(), factor.into());
                }
            }
        }
    }
    if let Some(toml::Value::Table(v)) = scenario.get_mut("velocities") {
        v.insert("file".into(), "velocities.csv".into());
        if let Some(toml::Value::Array(list)) = v.get_mut("instruments") {
            for inst in list.iter_mut() {
                let toml::Value::Table(t) = inst else {
                    continue;
                };
                let name = t.get("name").and_then(|n| n.as_str()).map(str::trim);
                if let Some(&(offset, jitter)) = name.and_then(|n| instruments.get(n)) {
                    t.insert("offset_kms".into(), offset.into());
                    t.insert("jitter_kms".into(), jitter.into());
                }
            }
        }
    }
    // TOML integers are signed 64-bit.
    scenario.insert(
        "seed".into(),
        toml::Value::Integer((noise_seed >> 1) as i64),
    );
    scenario.insert("noise".into(), noise.into());
    scenario.insert("system".into(), toml::Value::Table(system));
    let scenario_path = folder.join("scenario.toml");
    let scenario_text = format!(
        "# Written by `dyad calibrate` ({}); rerun with `dyad simulate`.\n{}",
        settings.file.display(),
        toml::to_string(&scenario)?
    );
    let parsed = Scenario::from_toml_str(&scenario_text, &scenario_path)
        .with_context(|| format!("the observing plan of {}", settings.file.display()))?;
    for (path, text) in parsed.render()? {
        write_text(&path, &text)?;
    }
    write_text(&scenario_path, &scenario_text)?;

    let mut run = toml::Table::new();
    let mut data = toml::Table::new();
    if scenario.contains_key("astrometry") {
        data.insert("astrometry".into(), "positions.csv".into());
    }
    if scenario.contains_key("velocities") {
        data.insert(
            "velocities".into(),
            toml::Value::Array(vec!["velocities.csv".into()]),
        );
    }
    run.insert("data".into(), toml::Value::Table(data));
    run.insert("priors".into(), toml::Value::Table(settings.priors.clone()));
    if let Some(errors) = &settings.astrometry_errors {
        run.insert(
            "astrometry_errors".into(),
            toml::Value::Table(errors.clone()),
        );
    }
    let mut sampler = settings.sampler.clone();
    sampler.insert(
        "seed".into(),
        toml::Value::Integer((sampler_seed >> 1) as i64),
    );
    run.insert("sampler".into(), toml::Value::Table(sampler));
    let mut output = toml::Table::new();
    output.insert("folder".into(), "fit".into());
    run.insert("output".into(), toml::Value::Table(output));
    let run_path = folder.join("run.toml");
    let run_text = format!(
        "# Written by `dyad calibrate` ({}); refit with `dyad fit`.\n{}",
        settings.file.display(),
        toml::to_string(&run)?
    );
    write_text(&run_path, &run_text)?;
    Ok(RunConfig::from_toml_str(&run_text, &run_path)?)
}

/// What one system gave.
#[derive(Debug, Clone, Serialize)]
struct SystemOutcome {
    system: usize,
    /// `None` when the fit succeeded.
    failure: Option<String>,
    status: String,
    steps: u64,
    burn_in: u64,
    tau_max: f64,
    /// Roughly independent draws available after thinning by tau.
    independent_draws: usize,
    /// Per tracked quantity: truth, rank (0..=L) and interval hits.
    truths: Vec<f64>,
    ranks: Vec<usize>,
    inside: Vec<[bool; 2]>,
}

impl SystemOutcome {
    fn failed(system: usize, why: String) -> Self {
        Self {
            system,
            failure: Some(why),
            status: "failed".into(),
            steps: 0,
            burn_in: 0,
            tau_max: f64::NAN,
            independent_draws: 0,
            truths: Vec::new(),
            ranks: Vec::new(),
            inside: Vec::new(),
        }
    }
}

/// Rank of `truth` among `draws`: the number of draws below it, ties
/// broken at random (Talts et al. 2018, Algorithm 1 and sec. 4.1).
pub fn rank_of<R: Rng + ?Sized>(truth: f64, draws: &[f64], rng: &mut R) -> usize {
    let below = draws.iter().filter(|&&d| d < truth).count();
    let ties = draws.iter().filter(|&&d| d == truth).count();
    below + if ties > 0 { rng.gen_range(0..=ties) } else { 0 }
}

/// Counts of ranks 0..=max_rank in `n_bins` bins (`bin = rank * n_bins /
/// (max_rank + 1)`, as in `dyad_report::plot_rank_histograms`), with the
/// expected count of each bin under uniform ranks.
pub fn binned_ranks(ranks: &[usize], max_rank: usize, n_bins: usize) -> (Vec<usize>, Vec<f64>) {
    let mut counts = vec![0usize; n_bins];
    for &r in ranks {
        counts[(r.min(max_rank) * n_bins / (max_rank + 1)).min(n_bins - 1)] += 1;
    }
    let mut width = vec![0usize; n_bins];
    for r in 0..=max_rank {
        width[r * n_bins / (max_rank + 1)] += 1;
    }
    let n = ranks.len() as f64;
    let expected = width
        .iter()
        .map(|&w| n * w as f64 / (max_rank + 1) as f64)
        .collect();
    (counts, expected)
}

/// Pearson's chi-square test of observed against expected counts: the
/// statistic, its degrees of freedom (bins - 1) and the upper-tail p-value
/// (Pearson 1900; any statistics text, e.g. NIST/SEMATECH e-Handbook of
/// Statistical Methods, sec. 1.3.5.15).
pub fn chi_square_test(counts: &[usize], expected: &[f64]) -> Result<(f64, usize, f64)> {
    use statrs::distribution::{ChiSquared, ContinuousCDF};
    if counts.len() < 2 || counts.len() != expected.len() {
        bail!("chi-square test needs at least two bins");
    }
    let statistic: f64 = counts
        .iter()
        .zip(expected)
        .map(|(&o, &e)| (o as f64 - e).powi(2) / e)
        .sum();
    let df = counts.len() - 1;
    let dist =
        ChiSquared::new(df as f64).map_err(|e| FitError::invalid(format!("chi-square: {e}")))?;
    Ok((statistic, df, dist.sf(statistic)))
}

/// Whether `truth` lies in the central `prob` interval of the sorted draws.
pub fn inside_central(sorted: &[f64], truth: f64, prob: f64) -> bool {
    let tail = 0.5 * (1.0 - prob);
    quantile_sorted(sorted, tail) <= truth && truth <= quantile_sorted(sorted, 1.0 - tail)
}

/// Coverage of a nominal probability: the fraction of `hits`, its binomial
/// standard error at the nominal value sqrt(p (1 - p) / n), and the
/// distance from nominal in standard errors.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Coverage {
    /// Nominal probability.
    pub nominal: f64,
    /// Observed fraction.
    pub fraction: f64,
    /// Binomial standard error at the nominal probability.
    pub standard_error: f64,
    /// (fraction - nominal) / standard_error.
    pub z: f64,
}

/// The coverage of `hits` at `nominal` (binomial standard error: common
/// practice).
pub fn coverage(hits: &[bool], nominal: f64) -> Coverage {
    let n = hits.len().max(1) as f64;
    let fraction = hits.iter().filter(|&&h| h).count() as f64 / n;
    let standard_error = (nominal * (1.0 - nominal) / n).sqrt();
    Coverage {
        nominal,
        fraction,
        standard_error,
        z: (fraction - nominal) / standard_error,
    }
}

/// Fits one simulated system and ranks the truth.
fn calibrate_system(
    settings: &Settings,
    template: &Model,
    tracked: &[(usize, &str)],
    index: usize,
) -> Result<SystemOutcome> {
    let folder = settings.output.join("systems").join(format!("{index:04}"));
    let mut rng =
        Xoshiro256PlusPlus::seed_from_u64(system_seed(settings.seed, index, STREAM_TRUTH));
    let x_true = template.layout().sample_prior(&mut rng);
    if !template.log_prior(&x_true).is_finite() {
        bail!("the prior draw has zero prior density (is the prior proper?)");
    }
    let truth = truth_of(template, &x_true, &format!("calibration system {index}"))?;
    let config = write_system(
        settings,
        &folder,
        Some((truth, system_seed(settings.seed, index, STREAM_NOISE))),
        system_seed(settings.seed, index, STREAM_SAMPLER),
        true,
    )?;
    let model = Model::from_config(&config)?;
    if model.parameter_names() != template.parameter_names()
        || model.layout().reference_epoch_jd() != template.layout().reference_epoch_jd()
    {
        bail!("the simulated data set does not have the template's parameter layout");
    }
    let truths_all = model.derived(&x_true);
    let truths: Vec<f64> = tracked.iter().map(|&(k, _)| truths_all[k]).collect();

    let mut plan = SamplingPlan::new(&config, &model, None)?;
    // Systems are fitted in parallel; within a system the walkers then run
    // serially (the chain is the same either way: it depends on the seed only).
    plan.sampler.parallel = false;
    let start = crate::fit::starting_ensemble(&model, &config, &plan)?;
    let density = Posterior::new(&model);
    let mut sink = MemorySink::for_samples(model.dim(), plan.sampler.n_walkers);
    let result = dyad_sampler::run(
        &density,
        &plan.sampler,
        &start,
        &mut sink,
        RunControl {
            watch: Some(&mut crate::modes::ModeWatch::new(&model)),
            ..RunControl::default()
        },
    )?;
    let status = match result.status {
        RunStatus::Converged => "converged",
        RunStatus::StepCap => "step cap",
        RunStatus::Cancelled => "cancelled",
    };
    let burn_in = result.burn_in.max(dyad_common::burn_in_steps(
        plan.burn_in_fraction,
        result.steps,
    ));
    let table = sink.into_table();
    let first = table.first_after(burn_in);
    let nw = table.n_walkers;
    let dim = model.dim();
    let n_records = table.len().saturating_sub(first);
    if n_records == 0 {
        bail!("no draws after burn-in");
    }
    // All post-burn-in draws, as derived quantities (for the intervals).
    let width = nw * table.values_per_walker;
    let mut all: Vec<Vec<f64>> = vec![Vec::with_capacity(n_records * nw); tracked.len()];
    for r in first..table.len() {
        let rec = &table.values[r * width..(r + 1) * width];
        for w in 0..nw {
            let x = &rec[w * table.values_per_walker..w * table.values_per_walker + dim];
            let d = model.derived(x);
            for (slot, &(k, _)) in all.iter_mut().zip(tracked) {
                slot.push(d[k]);
            }
        }
    }
    // Thin by the largest autocorrelation time (in records) to roughly
    // independent draws, then take L of them evenly spread (Talts et al.
    // 2018, sec. 5).
    let tau_max = result
        .diagnostics
        .tau
        .iter()
        .copied()
        .fold(f64::NAN, f64::max);
    let spacing = if tau_max.is_finite() {
        ((tau_max / table_thin(&table, result.thin)).ceil() as usize).max(1)
    } else {
        1
    };
    let independent: Vec<usize> = (0..n_records)
        .step_by(spacing)
        .flat_map(|r| (0..nw).map(move |w| r * nw + w))
        .collect();
    let l = settings.draws;
    let chosen: Vec<usize> = (0..l)
        .map(|k| independent[((k as f64 + 0.5) * independent.len() as f64 / l as f64) as usize])
        .collect();
    let mut tie_rng =
        Xoshiro256PlusPlus::seed_from_u64(system_seed(settings.seed, index, STREAM_TIES));
    let mut ranks = Vec::with_capacity(tracked.len());
    let mut inside = Vec::with_capacity(tracked.len());
    for (values, &truth) in all.iter_mut().zip(&truths) {
        let draws: Vec<f64> = chosen.iter().map(|&j| values[j]).collect();
        ranks.push(rank_of(truth, &draws, &mut tie_rng));
        values.sort_by(f64::total_cmp);
        inside.push([
            inside_central(values, truth, NOMINAL[0]),
            inside_central(values, truth, NOMINAL[1]),
        ]);
    }
    Ok(SystemOutcome {
        system: index,
        failure: None,
        status: status.into(),
        steps: result.steps,
        burn_in,
        tau_max,
        independent_draws: independent.len(),
        truths,
        ranks,
        inside,
    })
}

/// Steps between records of the table.
fn table_thin(table: &dyad_sampler::RecordTable, thin: u64) -> f64 {
    match table.steps.as_slice() {
        [a, b, ..] => (b - a) as f64,
        _ => thin.max(1) as f64,
    }
}

/// The calibration verdict of one quantity.
#[derive(Debug, Clone, Serialize)]
struct ParameterVerdict {
    parameter: String,
    systems: usize,
    chi_square: f64,
    degrees_of_freedom: usize,
    p_value: f64,
    counts: Vec<usize>,
    expected: Vec<f64>,
    coverage_68: Coverage,
    coverage_95: Coverage,
    /// chi-square p > 0.01 and both coverages within 2 standard errors.
    passes: bool,
}

#[derive(Debug, Clone, Serialize)]
struct Summary {
    settings: String,
    seed: u64,
    systems: usize,
    fitted: usize,
    failed: usize,
    hit_step_cap: usize,
    /// Fits with fewer roughly independent draws than L (their L draws are
    /// then correlated, which piles ranks up at the ends).
    short_of_independent_draws: usize,
    draws_per_system: usize,
    rank_bins: usize,
    median_steps: f64,
    median_tau_max: f64,
    parameters: Vec<ParameterVerdict>,
    failures: Vec<(usize, String)>,
    all_pass: bool,
}

fn summary_text(s: &Summary) -> String {
    use std::fmt::Write as _;
    let mut t = String::new();
    let _ = writeln!(
        t,
        "Simulation-based calibration (Talts et al. 2018) of {}",
        s.settings
    );
    let _ = writeln!(
        t,
        "seed {}; {} systems, {} fitted, {} failed, {} at the step cap, {} short of {} independent draws",
        s.seed, s.systems, s.fitted, s.failed, s.hit_step_cap, s.short_of_independent_draws,
        s.draws_per_system
    );
    let _ = writeln!(
        t,
        "ranks among L = {} thinned draws in {} bins; median steps {:.0}, median largest tau {:.1}",
        s.draws_per_system, s.rank_bins, s.median_steps, s.median_tau_max
    );
    let _ = writeln!(t);
    let _ = writeln!(
        t,
        "{:<10} {:>4} {:>9} {:>4} {:>8}   {:>16}   {:>16}  verdict",
        "parameter", "n", "chi2", "df", "p", "68% coverage", "95% coverage"
    );
    for p in &s.parameters {
        let cov =
            |c: &Coverage| format!("{:.3}±{:.3} ({:+.1}σ)", c.fraction, c.standard_error, c.z);
        let _ = writeln!(
            t,
            "{:<10} {:>4} {:>9.2} {:>4} {:>8.4}   {:>16}   {:>16}  {}",
            p.parameter,
            p.systems,
            p.chi_square,
            p.degrees_of_freedom,
            p.p_value,
            cov(&p.coverage_68),
            cov(&p.coverage_95),
            if p.passes { "ok" } else { "MISCALIBRATED?" }
        );
    }
    let _ = writeln!(t);
    let _ = writeln!(
        t,
        "verdict: {} (pass = chi-square p > 0.01 and both coverages within 2 binomial standard errors)",
        if s.all_pass {
            "every parameter passes"
        } else {
            "some parameter fails"
        }
    );
    for (i, why) in &s.failures {
        let _ = writeln!(t, "system {i} failed: {why}");
    }
    t
}

/// `dyad calibrate SETTINGS`: fits every simulated system (reporting each
/// one done to `observer`), writes the verdicts and returns them.
pub fn calibrate(
    settings_path: &Path,
    options: &CalibrateOptions,
    observer: &mut (dyn Observer + Send),
) -> Result<Calibration> {
    let text = fs::read_to_string(settings_path)
        .with_context(|| format!("reading {}", settings_path.display()))?;
    let mut settings = Settings::parse(&text, settings_path)?;
    if let Some(n) = options.systems {
        settings.systems = n;
    }
    if let Some(o) = &options.output {
        settings.output = o.clone();
    }
    if settings.systems < 2 {
        bail!("calibration needs at least 2 systems");
    }
    dyad_report::prepare_run_folder(&settings.output, options.overwrite)
        .with_context(|| format!("preparing {}", settings.output.display()))?;
    write_text(&settings.output.join("settings.toml"), &text)?;

    let template_config = write_system(
        &settings,
        &settings.output.join("systems").join("template"),
        None,
        settings.seed,
        false,
    )?;
    let template =
        Model::from_config(&template_config).context("building the model of the observing plan")?;
    let names = template.derived_names_units();
    let tracked: Vec<(usize, &str)> = TRACKED
        .iter()
        .filter_map(|&(name, label)| {
            names
                .iter()
                .position(|(n, _)| n == name)
                .map(|k| (k, label))
        })
        // And every sampled astrometric error scale.
        .chain(
            names
                .iter()
                .enumerate()
                .filter(|(_, (n, _))| n.starts_with("error_scale["))
                .map(|(k, (n, _))| (k, n.as_str())),
        )
        .filter(|&(k, _)| varies_under_prior(&template, k))
        .collect();
    if tracked.is_empty() {
        bail!("none of M1, M2, P, e, parallax, q is sampled by this model");
    }

    let total = settings.systems;
    let done = Mutex::new((0usize, observer));
    let outcomes: Vec<SystemOutcome> = (0..total)
        .into_par_iter()
        .map(|i| {
            let out = calibrate_system(&settings, &template, &tracked, i)
                .unwrap_or_else(|e| SystemOutcome::failed(i, chain_text(&e)));
            if let Ok(mut guard) = done.lock() {
                let (count, observer) = &mut *guard;
                *count += 1;
                observer.items_done(*count, total);
            }
            out
        })
        .collect();

    let fitted: Vec<&SystemOutcome> = outcomes.iter().filter(|o| o.failure.is_none()).collect();
    if fitted.len() < 2 {
        bail!(
            "only {} of {} systems could be fitted; first failure: {}",
            fitted.len(),
            outcomes.len(),
            outcomes
                .iter()
                .find_map(|o| o.failure.clone())
                .unwrap_or_default()
        );
    }

    // ranks.csv
    let mut csv = String::from("system,parameter,rank,draws,truth\n");
    for o in &fitted {
        for (j, &(_, label)) in tracked.iter().enumerate() {
            csv.push_str(&format!(
                "{},{},{},{},{:e}\n",
                o.system, label, o.ranks[j], settings.draws, o.truths[j]
            ));
        }
    }
    write_text(&settings.output.join("ranks.csv"), &csv)?;

    let mut verdicts = Vec::new();
    let mut plot_inputs = Vec::new();
    for (j, &(_, label)) in tracked.iter().enumerate() {
        let ranks: Vec<usize> = fitted.iter().map(|o| o.ranks[j]).collect();
        let (counts, expected) = binned_ranks(&ranks, settings.draws, settings.bins);
        let (chi_square, df, p_value) = chi_square_test(&counts, &expected)?;
        let hits68: Vec<bool> = fitted.iter().map(|o| o.inside[j][0]).collect();
        let hits95: Vec<bool> = fitted.iter().map(|o| o.inside[j][1]).collect();
        let c68 = coverage(&hits68, NOMINAL[0]);
        let c95 = coverage(&hits95, NOMINAL[1]);
        verdicts.push(ParameterVerdict {
            parameter: label.to_owned(),
            systems: ranks.len(),
            chi_square,
            degrees_of_freedom: df,
            p_value,
            counts,
            expected,
            coverage_68: c68,
            coverage_95: c95,
            passes: p_value > 0.01 && c68.z.abs() <= 2.0 && c95.z.abs() <= 2.0,
        });
        plot_inputs.push(dyad_report::RankHistogramInput {
            label: label.to_owned(),
            ranks,
        });
    }
    dyad_report::plot_rank_histograms(
        &settings.output.join("ranks"),
        &format!(
            "Rank of the truth among {} draws, {} systems",
            settings.draws,
            fitted.len()
        ),
        &plot_inputs,
        settings.draws,
        settings.bins,
    )
    .context("drawing the rank histograms")?;

    let failures: Vec<(usize, String)> = outcomes
        .iter()
        .filter_map(|o| o.failure.clone().map(|f| (o.system, f)))
        .collect();
    let summary = Summary {
        settings: settings.file.display().to_string(),
        seed: settings.seed,
        systems: outcomes.len(),
        fitted: fitted.len(),
        failed: failures.len(),
        hit_step_cap: fitted.iter().filter(|o| o.status == "step cap").count(),
        short_of_independent_draws: fitted
            .iter()
            .filter(|o| o.independent_draws < settings.draws)
            .count(),
        draws_per_system: settings.draws,
        rank_bins: settings.bins,
        median_steps: median(fitted.iter().map(|o| o.steps as f64).collect()),
        median_tau_max: median(fitted.iter().map(|o| o.tau_max).collect()),
        all_pass: failures.is_empty() && verdicts.iter().all(|v| v.passes),
        parameters: verdicts,
        failures,
    };
    let table = summary_text(&summary);
    write_text(&settings.output.join("calibration.txt"), &table)?;
    write_text(
        &settings.output.join("calibration.json"),
        &serde_json::to_string_pretty(&serde_json::json!({
            "summary": summary,
            "systems": outcomes,
            "tracked": tracked.iter().map(|&(_, l)| l).collect::<Vec<_>>(),
        }))?,
    )?;
    Ok(Calibration {
        folder: settings.output,
        text: table,
        all_pass: summary.all_pass,
    })
}

/// What `dyad calibrate` found.
#[derive(Debug, Clone)]
pub struct Calibration {
    /// The output folder (`calibration.txt`, `.json`, `ranks.csv`, the
    /// rank histograms and every system's data).
    pub folder: PathBuf,
    /// The verdict table of `calibration.txt`.
    pub text: String,
    /// Whether every system was fitted and every quantity passes.
    pub all_pass: bool,
}

/// An error and its causes on one line, as the terminal shows them.
fn chain_text(e: &FitError) -> String {
    let mut text = e.to_string();
    let mut cause = std::error::Error::source(e);
    while let Some(c) = cause {
        text.push_str(&format!(": {c}"));
        cause = c.source();
    }
    text
}

/// Whether derived quantity `k` takes different values under two prior
/// draws (a fixed parameter has no rank).
fn varies_under_prior(model: &Model, k: usize) -> bool {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(7);
    let a = model.derived(&model.layout().sample_prior(&mut rng))[k];
    let b = model.derived(&model.layout().sample_prior(&mut rng))[k];
    a != b
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand_distr::{Distribution, Normal};

    #[test]
    fn rank_counts_draws_below_the_truth() {
        // Definition of the rank statistic (Talts et al. 2018, Algorithm 1).
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(1);
        assert_eq!(rank_of(2.5, &[1.0, 2.0, 3.0, 4.0], &mut rng), 2);
        assert_eq!(rank_of(0.0, &[1.0, 2.0, 3.0], &mut rng), 0);
        assert_eq!(rank_of(9.0, &[1.0, 2.0, 3.0], &mut rng), 3);
        // Ties are broken at random over every position among the ties.
        let mut seen = [false; 3];
        for _ in 0..200 {
            seen[rank_of(2.0, &[2.0, 2.0], &mut rng)] = true;
        }
        assert_eq!(seen, [true, true, true]);
    }

    #[test]
    fn bins_match_the_plot_and_the_expected_counts_sum_to_n() {
        // 20 ranks 0..=19 into 5 bins of 4 ranks.
        let ranks: Vec<usize> = (0..20).collect();
        let (counts, expected) = binned_ranks(&ranks, 19, 5);
        assert_eq!(counts, vec![4; 5]);
        assert_eq!(expected, vec![4.0; 5]);
        // Unequal bins: ranks 0..=9 into 3 bins get widths 4, 3, 3.
        let (counts, expected) = binned_ranks(&(0..10).collect::<Vec<_>>(), 9, 3);
        assert_eq!(counts, vec![4, 3, 3]);
        assert!((expected.iter().sum::<f64>() - 10.0).abs() < 1e-12);
    }

    #[test]
    fn chi_square_p_values_match_the_table() {
        // Upper critical values of the chi-square distribution (NIST/SEMATECH
        // e-Handbook of Statistical Methods, table 1.3.6.7.4): 7.815 for
        // df = 3 and 16.919 for df = 9 at upper-tail probability 0.05.
        let (x, df, p) = chi_square_test(&[0, 0], &[1.0, 1.0]).expect("test runs");
        assert_eq!((x, df), (2.0, 1));
        // df = 1: P(chi2 > 2) = erfc(1) = 0.157299... (from memory)
        assert!((p - 0.157_299_207).abs() < 1e-6, "{p}");
        use statrs::distribution::{ChiSquared, ContinuousCDF};
        let sf3 = ChiSquared::new(3.0).expect("valid").sf(7.815);
        assert!((sf3 - 0.05).abs() < 2e-4, "{sf3}");
        let sf9 = ChiSquared::new(9.0).expect("valid").sf(16.919);
        assert!((sf9 - 0.05).abs() < 2e-4, "{sf9}");
        // Perfectly uniform counts: statistic 0, p = 1.
        let (x, _, p) = chi_square_test(&[5, 5, 5, 5], &[5.0; 4]).expect("test runs");
        assert_eq!(x, 0.0);
        assert!((p - 1.0).abs() < 1e-12);
    }

    #[test]
    fn central_intervals() {
        // Type-7 quantiles (Hyndman & Fan 1996) of an even grid on [0, 1].
        let grid: Vec<f64> = (0..=1000).map(|i| i as f64 / 1000.0).collect();
        assert!(inside_central(&grid, 0.5, 0.68));
        assert!(inside_central(&grid, 0.17, 0.68));
        assert!(!inside_central(&grid, 0.15, 0.68));
        assert!(inside_central(&grid, 0.03, 0.95));
        assert!(!inside_central(&grid, 0.02, 0.95));
    }

    #[test]
    fn coverage_and_its_binomial_error() {
        // 19 of 20 inside at nominal 0.95: fraction 0.95, se sqrt(0.95 0.05 / 20).
        let mut hits = vec![true; 19];
        hits.push(false);
        let c = coverage(&hits, 0.95);
        assert!((c.fraction - 0.95).abs() < 1e-12);
        assert!((c.standard_error - (0.95f64 * 0.05 / 20.0).sqrt()).abs() < 1e-12);
        assert!(c.z.abs() < 1e-9);
        let c = coverage(&[true, false, false, false], 0.5);
        // 1 of 4 at nominal 0.5: fraction 0.25, se sqrt(0.25 / 4) = 0.25, z = -1.
        assert!((c.z + 1.0).abs() < 1e-12);
    }

    /// SBC of a conjugate normal model, where the exact posterior is known:
    /// theta ~ N(0, 1), y ~ N(theta, 1) gives theta | y ~ N(y/2, 1/2)
    /// (any Bayesian text, e.g. Gelman et al., Bayesian Data Analysis, 3rd
    /// ed., sec. 2.5). `shift` and `scale` corrupt the posterior draws the
    /// way a sign error or a unit error in a pipeline would.
    fn conjugate_sbc(shift: f64, scale: f64) -> (f64, Coverage) {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(2024);
        let (n_sims, l, bins) = (400, 39, 8);
        let unit = Normal::new(0.0, 1.0).expect("valid");
        let mut ranks = Vec::new();
        let mut hits = Vec::new();
        for _ in 0..n_sims {
            let theta: f64 = unit.sample(&mut rng);
            let y = theta + unit.sample(&mut rng);
            let post = Normal::new(y / 2.0 + shift, scale * 0.5f64.sqrt()).expect("valid");
            let mut draws: Vec<f64> = (0..l).map(|_| post.sample(&mut rng)).collect();
            ranks.push(rank_of(theta, &draws, &mut rng));
            draws.sort_by(f64::total_cmp);
            hits.push(inside_central(&draws, theta, 0.68));
        }
        let (counts, expected) = binned_ranks(&ranks, l, bins);
        let (_, _, p) = chi_square_test(&counts, &expected).expect("test runs");
        (p, coverage(&hits, 0.68))
    }

    #[test]
    fn exact_posterior_passes_and_corrupted_posteriors_fail() {
        let (p, c) = conjugate_sbc(0.0, 1.0);
        assert!(p > 0.001, "exact posterior rejected: p = {p}");
        // 39 draws estimate the 68 % interval only roughly; within 4 sigma.
        assert!(c.z.abs() < 4.0, "{c:?}");
        // Biased posterior (shifted by one posterior sd): ranks pile up at one end.
        let (p, _) = conjugate_sbc(0.7, 1.0);
        assert!(p < 1e-6, "shifted posterior not detected: p = {p}");
        // Too narrow posterior (a unit error of a factor 2 in the error bars):
        // U-shaped ranks, and under-coverage.
        let (p, c) = conjugate_sbc(0.0, 0.5);
        assert!(p < 1e-6, "narrow posterior not detected: p = {p}");
        assert!(c.z < -4.0, "{c:?}");
    }

    #[test]
    fn system_seeds_differ_between_systems_and_streams() {
        let mut seen = std::collections::BTreeSet::new();
        for i in 0..100 {
            for s in 1..5 {
                assert!(seen.insert(system_seed(7, i, s)));
            }
        }
        assert_ne!(system_seed(1, 0, 1), system_seed(2, 0, 1));
    }

    #[test]
    fn noise_free_simulations_fit_the_truth_exactly() {
        // The simulator (dyad-orbit's Orbit) and the likelihood (its batched
        // solver) must agree: at the true parameters every residual of
        // noise-free data is zero up to the rounding of the CSV columns
        // (4 decimals). A sign or unit error between them shows up here.
        let dir = tempfile::tempdir().expect("temp dir");
        let file =
            Path::new(env!("CARGO_MANIFEST_DIR")).join("../../configs/calibration/small.toml");
        let text = std::fs::read_to_string(&file).expect("small.toml");
        let mut settings = Settings::parse(&text, &file).expect("valid settings");
        settings.output = dir.path().to_owned();
        let template_config = write_system(&settings, &dir.path().join("template"), None, 1, false)
            .expect("template");
        let template = Model::from_config(&template_config).expect("model");
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(5);
        for n in 0..20 {
            let x = template.layout().sample_prior(&mut rng);
            let truth = truth_of(&template, &x, "test").expect("truth");
            let folder = dir.path().join(format!("{n}"));
            let config =
                write_system(&settings, &folder, Some((truth, 3)), 1, false).expect("written");
            let model = Model::from_config(&config).expect("model");
            let res = model.residuals(&x).expect("residuals");
            for a in &res.astrometry {
                for r in a.residual {
                    assert!(r.abs() < 2e-4, "system {n}: astrometric residual {r}");
                }
            }
            assert_eq!(res.velocities.len(), 24);
            for v in &res.velocities {
                assert!(
                    v.residual_kms.abs() < 2e-4,
                    "system {n}: velocity residual {v:?}"
                );
            }
        }
    }

    #[test]
    fn unknown_and_forbidden_settings_are_refused() {
        let file = Path::new("x.toml");
        let base = "[observations.astrometry]\nform = \"cartesian\"\n";
        assert!(Settings::parse(base, file).is_ok());
        assert!(Settings::parse(&format!("systemz = 3\n{base}"), file).is_err());
        assert!(Settings::parse(&format!("{base}[sampler]\nseed = 3\n"), file).is_err());
        assert!(Settings::parse("systems = 3\n", file).is_err());
        assert!(Settings::parse(
            &format!("draws_per_system = 9\nrank_bins = 11\n{base}"),
            file
        )
        .is_err());
    }
}
