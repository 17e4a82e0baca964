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

mod settings;
mod simulated;
mod statistics;
mod summary;
mod system_fit;

use std::fs;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

use rand::SeedableRng;
use rand_xoshiro::Xoshiro256PlusPlus;
use rayon::prelude::*;

use dyad_common::csv_table::CsvText;
use dyad_common::quantile::median_of_finite as median;
use dyad_model::likelihood::Model;

use crate::error::{bail, Context, FitError, Result};
use crate::observer::Observer;
use crate::run_folder::write_text;

use settings::Settings;
use simulated::write_system;
pub use statistics::{binned_ranks, chi_square_test, coverage, inside_central, rank_of, Coverage};
use summary::{summary_text, ParameterVerdict, Summary};
use system_fit::{calibrate_system, SystemOutcome};

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
    let mut csv = CsvText::new();
    csv.record(["system", "parameter", "rank", "draws", "truth"])?;
    for o in &fitted {
        for (j, &(_, label)) in tracked.iter().enumerate() {
            csv.record([
                o.system.to_string(),
                label.to_owned(),
                o.ranks[j].to_string(),
                settings.draws.to_string(),
                format!("{:e}", o.truths[j]),
            ])?;
        }
    }
    write_text(&settings.output.join("ranks.csv"), &csv.finish()?)?;

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
