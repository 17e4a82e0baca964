//! `dyad periods CONFIG`: which orbital periods do the data allow, and how
//! strongly? Each period window gets its own tempered run with the period
//! prior restricted to the window (and renormalised); the evidences of the
//! windows, weighted by the global prior mass of each window, give the
//! posterior probability of each window. Windows come from the configuration
//! (`period_windows_days` / `period_windows_years`) or, if it names none,
//! from the separate period modes of a first tempered run over the whole
//! prior.

use std::fs;
use std::path::{Path, PathBuf};

use anyhow::{bail, Context, Result};
use serde_json::json;

use dyad_model::config::RunConfig;
use dyad_model::likelihood::Model;
use dyad_model::params::ScaledPrior;
use dyad_model::prior::Prior;
use dyad_report::{MassInterval, WindowSummary};
use dyad_sampler::evidence::{estimate_evidence, window_probabilities, EvidenceEstimates};

use crate::density::Posterior;
use crate::fit::{checkpoint_config, finish, open_run_folder, sample_fresh, starting_ensemble};
use crate::modes::period_modes;
use crate::plan::SamplingPlan;
use crate::posterior::read_draws;
use crate::run_folder::{write_text, write_window, RunFiles};

/// Options of `dyad periods`.
pub struct PeriodOptions {
    /// Folder for the comparison (default: `<[output] folder>-periods`).
    pub output: Option<PathBuf>,
    /// Reuse a folder that holds files already.
    pub overwrite: bool,
    /// No progress bars.
    pub quiet: bool,
}

/// One window's result.
struct WindowResult {
    lo_days: f64,
    hi_days: f64,
    prior_mass: f64,
    evidence: EvidenceEstimates,
    masses: Vec<MassInterval>,
}

/// The configuration with the period prior replaced by a log-uniform one
/// over the window: used only to find a starting point inside the window
/// (the sampled density keeps the configured prior, truncated).
fn start_config(config: &RunConfig, lo: f64, hi: f64) -> Result<RunConfig> {
    let mut c = config.clone();
    c.priors.period = Some(ScaledPrior::internal(Prior::log_uniform(lo, hi)?));
    Ok(c)
}

fn window_label(lo: f64, hi: f64) -> String {
    if hi > 1000.0 {
        format!("{:.3}-{:.3} yr", lo / 365.25, hi / 365.25)
    } else {
        format!("{lo:.2}-{hi:.2} d")
    }
}

/// Mass intervals of a window's posterior, for the side-by-side view.
fn mass_intervals(files: &RunFiles, model: &Model, burn_in: u64) -> Result<Vec<MassInterval>> {
    let draws = read_draws(files, model, burn_in)?;
    let summary = dyad_report::summarise(&draws.table)?;
    Ok(summary
        .parameters
        .iter()
        .filter(|p| {
            matches!(
                p.info.name.as_str(),
                "mass_primary_msun" | "mass_secondary_msun" | "total_mass_msun"
            )
        })
        .map(|p| MassInterval {
            name: p.info.label.clone(),
            median: p.median,
            lo68: p.q68[0],
            hi68: p.q68[1],
            lo95: p.q95[0],
            hi95: p.q95[1],
        })
        .collect())
}

/// A tempered run of the posterior restricted to `[lo, hi]` days (or the
/// whole prior when `window` is `None`) in `folder`.
#[allow(clippy::too_many_arguments)]
fn tempered_run(
    folder: &Path,
    config: &RunConfig,
    config_text: &str,
    model: &Model,
    window: Option<(f64, f64)>,
    overwrite: bool,
    quiet: bool,
) -> Result<(RunFiles, dyad_sampler::RunResult)> {
    let files = open_run_folder(folder, config, config_text, overwrite)?;
    let mut plan = SamplingPlan::new(config, model, Some(checkpoint_config(&files)))?;
    let burn_in = (config.sampler.burn_in_fraction * config.sampler.max_steps as f64) as u64;
    plan.ensure_tempering(burn_in);
    let (density, start) = match window {
        Some((lo, hi)) => {
            write_window(&files, lo, hi)?;
            let start_model = Model::from_config(&start_config(config, lo, hi)?)?;
            let start = starting_ensemble(&start_model, config, &plan)?;
            let density =
                Posterior::in_period_window(model, lo, hi).context("invalid period window")?;
            (density, start)
        }
        None => (
            Posterior::new(model),
            starting_ensemble(model, config, &plan)?,
        ),
    };
    let result = sample_fresh(&files, &density, &plan, &start, quiet)?;
    finish(&files, config, model, &plan, &result, true)?;
    Ok((files, result))
}

/// Windows from the separate period modes of a tempered run over the whole
/// prior: each mode's range widened by 5 per cent either side, overlaps merged.
fn discover_windows(
    folder: &Path,
    config: &RunConfig,
    config_text: &str,
    model: &Model,
    options: &PeriodOptions,
) -> Result<Vec<(f64, f64)>> {
    if !options.quiet {
        eprintln!(
            "no period windows configured: a tempered run over the whole prior finds them ..."
        );
    }
    let (files, result) = tempered_run(
        &folder.join("survey"),
        config,
        config_text,
        model,
        None,
        options.overwrite,
        options.quiet,
    )?;
    let outcome = crate::fit::Outcome::read(&files)?;
    let _ = result;
    let draws = read_draws(&files, model, outcome.burn_in)?;
    let (p_lo, p_hi) = model.layout().priors().period_days.support();
    let mut windows: Vec<(f64, f64)> = Vec::new();
    for m in period_modes(&draws) {
        let lo = (m.range_days[0] / 1.05).max(p_lo);
        let hi = (m.range_days[1] * 1.05).min(p_hi);
        match windows.last_mut() {
            Some(last) if lo <= last.1 => last.1 = last.1.max(hi),
            _ => windows.push((lo, hi)),
        }
    }
    if windows.is_empty() {
        bail!("the survey run found no period mode");
    }
    Ok(windows)
}

/// `dyad periods CONFIG`.
pub fn periods(config_path: &Path, options: &PeriodOptions) -> Result<()> {
    let config_text = fs::read_to_string(config_path)
        .with_context(|| format!("reading {}", config_path.display()))?;
    let config = RunConfig::from_toml_str(&config_text, config_path)?;
    let model = Model::from_config(&config)?;
    let folder = options.output.clone().unwrap_or_else(|| {
        let mut name = config.output.folder.as_os_str().to_owned();
        name.push("-periods");
        PathBuf::from(name)
    });
    dyad_report::prepare_run_folder(&folder, options.overwrite)
        .with_context(|| format!("preparing {}", folder.display()))?;
    let mut windows = config.sampler.period_windows_days.clone();
    if windows.is_empty() {
        windows = discover_windows(&folder, &config, &config_text, &model, options)?;
    }
    windows.sort_by(|a, b| a.0.total_cmp(&b.0));
    let period_prior = model.layout().priors().period_days;
    let mut results = Vec::new();
    for (k, &(lo, hi)) in windows.iter().enumerate() {
        let prior_mass = period_prior.cdf(hi) - period_prior.cdf(lo);
        if prior_mass.is_nan() || prior_mass <= 0.0 {
            bail!(
                "{}: period window {} ({}) has no prior mass: it lies outside the period prior",
                config.file.display(),
                k + 1,
                window_label(lo, hi)
            );
        }
        if !options.quiet {
            eprintln!(
                "window {} of {}: {}",
                k + 1,
                windows.len(),
                window_label(lo, hi)
            );
        }
        let (files, result) = tempered_run(
            &folder.join(format!("window-{}", k + 1)),
            &config,
            &config_text,
            &model,
            Some((lo, hi)),
            options.overwrite,
            options.quiet,
        )?;
        let tempered = result
            .tempered
            .as_ref()
            .context("the tempered run returned no tempered chains")?;
        let evidence = estimate_evidence(tempered).context("estimating the evidence")?;
        let outcome = crate::fit::Outcome::read(&files)?;
        results.push(WindowResult {
            lo_days: lo,
            hi_days: hi,
            prior_mass,
            evidence,
            masses: mass_intervals(&files, &model, outcome.burn_in)?,
        });
    }
    write_comparison(&folder, &results, options.quiet)
}

fn write_comparison(folder: &Path, results: &[WindowResult], quiet: bool) -> Result<()> {
    let ln_z = |f: &dyn Fn(&EvidenceEstimates) -> (f64, f64)| -> (Vec<f64>, Vec<f64>) {
        results.iter().map(|r| f(&r.evidence)).unzip()
    };
    let (z_ss, e_ss) = ln_z(&|e| (e.stepping_stone.ln_z, e.stepping_stone.total_error()));
    let (z_ti, e_ti) = ln_z(&|e| {
        (
            e.thermodynamic_integration.ln_z,
            e.thermodynamic_integration.total_error(),
        )
    });
    let mass: Vec<f64> = results.iter().map(|r| r.prior_mass).collect();
    let odds_ss = window_probabilities(&z_ss, &e_ss, &mass)?;
    let odds_ti = window_probabilities(&z_ti, &e_ti, &mass)?;

    let mut table = String::new();
    table.push_str("Period windows compared by evidence (prior of each window: the global prior restricted to it)\n\n");
    table.push_str(&format!(
        "{:<22} {:>10} {:>22} {:>22} {:>18} {:>18}\n",
        "window",
        "prior mass",
        "ln Z (stepping stone)",
        "ln Z (thermodynamic)",
        "P (stepping st.)",
        "P (thermodyn.)"
    ));
    for (k, r) in results.iter().enumerate() {
        table.push_str(&format!(
            "{:<22} {:>10.4} {:>14.3} +- {:<5.3} {:>14.3} +- {:<5.3} {:>9.4} +- {:<6.4} {:>9.4} +- {:<6.4}\n",
            window_label(r.lo_days, r.hi_days),
            r.prior_mass,
            z_ss[k],
            e_ss[k],
            z_ti[k],
            e_ti[k],
            odds_ss[k].posterior_probability,
            odds_ss[k].posterior_probability_error,
            odds_ti[k].posterior_probability,
            odds_ti[k].posterior_probability_error,
        ));
    }
    table.push_str(
        "\nP: posterior probability of the window among those compared, proportional to\n\
         prior mass x evidence. The odds depend on the priors (period range and shape above all).\n\
         Per-window posteriors: window-N/summary.txt.\n",
    );
    for (k, r) in results.iter().enumerate() {
        let masses: Vec<String> = r
            .masses
            .iter()
            .map(|m| {
                format!(
                    "{} = {:.3} [{:.3}, {:.3}]",
                    m.name, m.median, m.lo68, m.hi68
                )
            })
            .collect();
        table.push_str(&format!(
            "window {} masses (68 %): {}\n",
            k + 1,
            masses.join("; ")
        ));
    }
    write_text(&folder.join("periods.txt"), &table)?;
    let doc = json!({
        "windows": results.iter().enumerate().map(|(k, r)| json!({
            "period_min_days": r.lo_days,
            "period_max_days": r.hi_days,
            "prior_mass": r.prior_mass,
            "evidence": r.evidence,
            "stepping_stone": odds_ss[k],
            "thermodynamic_integration": odds_ti[k],
            "folder": format!("window-{}", k + 1),
        })).collect::<Vec<_>>(),
    });
    write_text(
        &folder.join("periods.json"),
        &serde_json::to_string_pretty(&doc)?,
    )?;
    let summaries: Vec<WindowSummary> = results
        .iter()
        .enumerate()
        .map(|(k, r)| WindowSummary {
            label: window_label(r.lo_days, r.hi_days),
            p_lo_days: r.lo_days,
            p_hi_days: r.hi_days,
            probability: odds_ss[k].posterior_probability,
            probability_err: odds_ss[k].posterior_probability_error,
            ln_z: z_ss[k],
            ln_z_err: e_ss[k],
            masses: r.masses.clone(),
        })
        .collect();
    dyad_report::plot_period_windows(
        &folder.join("periods"),
        "Period windows: posterior probability (stepping-stone evidence)",
        &summaries,
    )?;
    if !quiet {
        println!("{table}");
        println!("results in {}", folder.display());
    }
    Ok(())
}
