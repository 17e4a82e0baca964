//! From the sampler's chain file to the report: posterior draws of every
//! sampled and derived quantity, summaries (text, Markdown, JSON), the
//! samples table, diagnostics and plots.

use std::fs;

use anyhow::{Context, Result};
use serde_json::json;

use dyad_model::config::RunConfig;
use dyad_model::data::{RelativePosition, Star};
use dyad_model::likelihood::Model;
use dyad_model::params::FitMode;
use dyad_orbit::Orbit;
use dyad_report::{
    DistributionPanel, ParameterInfo, PosteriorDraws, PosteriorSummary, RunMetadata,
    SkyMeasurement, SkyPlotInput, VelocityPlotInput,
};
use dyad_sampler::read_record_file;

use crate::check::prior_lines;
use crate::fit::Outcome;
use crate::run_folder::{write_text, RunFiles};

/// Most posterior draws kept for the report (records are thinned evenly
/// beyond this; the chain file keeps them all).
pub const MAX_DRAWS: usize = 40_000;

/// Posterior orbits drawn on the sky plot.
const SKY_TRACKS: usize = 100;

/// Posterior draws: sampled coordinates and physical quantities.
pub struct Draws {
    /// Sampled coordinates, draw-major.
    pub sampled: Vec<f64>,
    /// Sampled plus derived quantities, for the report crate.
    pub table: PosteriorDraws,
}

/// Plot label and kind of a quantity by its name.
fn info_for(name: &str, unit: &str, mode: FitMode) -> ParameterInfo {
    let label = match name {
        "period_days" | "period_years" => "P",
        "eccentricity" => "e",
        "omega_secondary_deg" => "ω₂",
        "omega_primary_deg" => "ω₁",
        "inclination_deg" => "i",
        "node_deg" => "Ω",
        "semi_major_axis_mas" | "semi_major_axis_au" => "a",
        "total_mass_msun" => "M₁+M₂",
        "parallax_mas" => "ϖ",
        "orbital_parallax_mas" => "ϖ (orbital)",
        "mass_ratio" => "q",
        "mass_primary_msun" => "M₁",
        "mass_secondary_msun" => "M₂",
        "k1_kms" => "K₁",
        "k2_kms" => "K₂",
        "m1_sin3i_msun" => "M₁ sin³i",
        "m2_sin3i_msun" => "M₂ sin³i",
        "mass_function_msun" => "f(M)",
        "periastron_time_jd" | "periastron_time_jyear" => "T",
        other => other,
    };
    let unit = match unit {
        "M_sun" => "M☉",
        "1" => "",
        u => u,
    };
    match name {
        "omega_secondary_deg" | "omega_primary_deg" => {
            ParameterInfo::angle(name, unit, label, 360.0)
        }
        "node_deg" => {
            let period = if mode == FitMode::AstrometryOnly {
                180.0
            } else {
                360.0
            };
            ParameterInfo::angle(name, unit, label, period)
        }
        _ => ParameterInfo::linear(name, unit, label),
    }
}

/// Reads the chain file of a run and builds the posterior draws after burn-in.
pub fn read_draws(files: &RunFiles, model: &Model, burn_in: u64) -> Result<Draws> {
    let records = read_record_file(files.chain())
        .with_context(|| format!("reading the chain {}", files.chain().display()))?;
    let dim = model.dim();
    let first = records.first_after(burn_in);
    let n_records = records.len().saturating_sub(first);
    let nw = records.n_walkers;
    let vpw = records.values_per_walker;
    anyhow::ensure!(
        vpw == dim + 2,
        "{} holds {} values per walker, but the model has {} parameters",
        files.chain().display(),
        vpw,
        dim
    );
    anyhow::ensure!(
        n_records > 0,
        "{} holds no samples after the burn-in of {burn_in} steps: run longer",
        files.chain().display()
    );
    let stride = (n_records * nw).div_ceil(MAX_DRAWS).max(1);
    let derived_names = model.derived_names_units();
    let mut params: Vec<ParameterInfo> = derived_names
        .iter()
        .map(|(n, u)| info_for(n, u, model.mode()))
        .collect();
    params.extend(
        model
            .parameter_names()
            .iter()
            .zip(model.parameter_units())
            .map(|(n, u)| ParameterInfo::linear(&format!("sampled:{n}"), u, n)),
    );
    let mut sampled = Vec::new();
    let mut values = Vec::new();
    let mut log_posterior = Vec::new();
    for r in (first..records.len()).step_by(stride) {
        let record = &records.values[r * nw * vpw..(r + 1) * nw * vpw];
        for w in 0..nw {
            let v = &record[w * vpw..(w + 1) * vpw];
            let x = &v[..dim];
            sampled.extend_from_slice(x);
            values.extend(model.derived(x));
            values.extend_from_slice(x);
            log_posterior.push(v[dim] + v[dim + 1]);
        }
    }
    let table = PosteriorDraws::new(params, values, log_posterior)?;
    Ok(Draws { sampled, table })
}

/// One separated period mode of the posterior.
#[derive(Debug, Clone, serde::Serialize)]
pub struct PeriodMode {
    /// Posterior weight (fraction of draws).
    pub weight: f64,
    /// Median period, days.
    pub period_days: f64,
    /// Range of the mode's draws, days.
    pub range_days: [f64; 2],
    /// Median total mass in the mode, when the model has one.
    pub total_mass_msun: Option<f64>,
}

/// Splits the period marginal into modes separated by empty stretches of a
/// histogram in ln P, so that a multimodal posterior is reported as such
/// rather than averaged.
pub fn period_modes(draws: &PosteriorDraws) -> Vec<PeriodMode> {
    let Some(ip) = draws.index_of("period_days") else {
        return Vec::new();
    };
    let im = draws.index_of("total_mass_msun");
    let n = draws.n_draws();
    let mut pairs: Vec<(f64, f64)> = (0..n)
        .map(|d| {
            let row = &draws.values[d * draws.n_params()..(d + 1) * draws.n_params()];
            (row[ip].ln(), im.map_or(f64::NAN, |i| row[i]))
        })
        .filter(|(l, _)| l.is_finite())
        .collect();
    if pairs.is_empty() {
        return Vec::new();
    }
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
    let (lo, hi) = (pairs[0].0, pairs[pairs.len() - 1].0);
    const BINS: usize = 200;
    let width = ((hi - lo) / BINS as f64).max(1e-12);
    let mut counts = [0usize; BINS];
    for (l, _) in &pairs {
        counts[(((l - lo) / width) as usize).min(BINS - 1)] += 1;
    }
    // A bin holding under 0.05 per cent of the draws counts as empty; two
    // modes are separate when at least two empty bins lie between them.
    let empty = |c: usize| (c as f64) < 5e-4 * pairs.len() as f64;
    let mut groups: Vec<(usize, usize)> = Vec::new();
    let mut b = 0;
    while b < BINS {
        if empty(counts[b]) {
            b += 1;
            continue;
        }
        let start = b;
        let mut end = b;
        let mut gap = 0;
        while b < BINS {
            if empty(counts[b]) {
                gap += 1;
                if gap >= 2 {
                    break;
                }
            } else {
                gap = 0;
                end = b;
            }
            b += 1;
        }
        groups.push((start, end));
    }
    let total = pairs.len() as f64;
    groups
        .into_iter()
        .filter_map(|(s, e)| {
            let (a, z) = (lo + s as f64 * width, lo + (e + 1) as f64 * width);
            let members: Vec<&(f64, f64)> =
                pairs.iter().filter(|(l, _)| *l >= a && *l <= z).collect();
            let weight = members.len() as f64 / total;
            if weight < 0.005 {
                return None;
            }
            let median = |v: &mut Vec<f64>| {
                v.sort_by(f64::total_cmp);
                v[v.len() / 2]
            };
            let mut periods: Vec<f64> = members.iter().map(|(l, _)| l.exp()).collect();
            let range_days = [periods[0], periods[periods.len() - 1]];
            let mut masses: Vec<f64> = members
                .iter()
                .map(|(_, m)| *m)
                .filter(|m| m.is_finite())
                .collect();
            Some(PeriodMode {
                weight,
                period_days: median(&mut periods),
                range_days,
                total_mass_msun: (!masses.is_empty()).then(|| median(&mut masses)),
            })
        })
        .collect()
}

/// The statement of what the posterior depends on, for every report.
fn metadata(
    config: &RunConfig,
    model: &Model,
    outcome: &Outcome,
    modes: &[PeriodMode],
) -> RunMetadata {
    let data = model.dataset();
    let mut entries = vec![(
        "configuration".to_owned(),
        config.file.display().to_string(),
    )];
    if let Some(a) = &config.data.astrometry {
        entries.push((
            "astrometry".to_owned(),
            format!("{} ({} epochs)", a.display(), data.astrometry.len()),
        ));
    }
    for v in &config.data.velocities {
        entries.push(("velocities".to_owned(), v.display().to_string()));
    }
    entries.push((
        "error model".to_owned(),
        "Gaussian measurement errors as given (astrometric pairs with their correlation, \
         position-angle residuals wrapped); per-instrument velocity jitter added in quadrature \
         and a per-instrument velocity offset"
            .to_owned(),
    ));
    for (name, prior) in prior_lines(model) {
        entries.push((format!("prior: {name}"), prior));
    }
    let parallax = match config.data.catalogue_parallax {
        Some((p, e)) => format!("catalogue value {p} +- {e} mas used as a normal prior"),
        None => "no catalogue value: the parallax prior above".to_owned(),
    };
    if model.mode() != FitMode::VelocitiesOnly {
        entries.push(("parallax used".to_owned(), parallax));
    }
    entries.push((
        "sampling".to_owned(),
        format!(
            "{} steps ({}), burn-in {} steps discarded, seed {}",
            outcome.steps, outcome.status, outcome.burn_in, config.sampler.seed
        ),
    ));
    entries.push((
        "stopping rule".to_owned(),
        format!(
            "every sampled parameter needs at least {} effective draws in the bulk and in the \
             tails after burn-in, and split R-hat at most {} (Vehtari et al. 2021)",
            config.sampler.effective_draws, config.sampler.max_split_rhat
        ),
    ));
    if outcome.inverse_temperatures.len() > 1 {
        entries.push((
            "tempering".to_owned(),
            format!("{} temperatures", outcome.inverse_temperatures.len()),
        ));
    }
    if let Some(ev) = &outcome.evidence {
        let get = |k: &str, f: &str| ev[k][f].as_f64().unwrap_or(f64::NAN);
        entries.push((
            "evidence ln Z".to_owned(),
            format!(
                "thermodynamic integration {:.3} +- {:.3} (MC) +- {:.3} (discretisation); stepping stone {:.3} +- {:.3}",
                get("thermodynamic_integration", "ln_z"),
                get("thermodynamic_integration", "mc_error"),
                get("thermodynamic_integration", "discretisation_error"),
                get("stepping_stone", "ln_z"),
                get("stepping_stone", "mc_error"),
            ),
        ));
    }
    if modes.len() > 1 {
        for (k, m) in modes.iter().enumerate() {
            let mass = m
                .total_mass_msun
                .map_or_else(String::new, |v| format!(", median M1+M2 {v:.3} M_sun"));
            entries.push((
                format!("period mode {}", k + 1),
                format!(
                    "weight {:.3}: P = {:.4} yr (range {:.4} to {:.4} yr){mass}",
                    m.weight,
                    m.period_days / 365.25,
                    m.range_days[0] / 365.25,
                    m.range_days[1] / 365.25
                ),
            ));
        }
        entries.push((
            "caution".to_owned(),
            "the posterior has several separate period modes: the intervals below span all of \
             them; see the modes above and `dyad periods` for per-window results"
                .to_owned(),
        ));
    }
    for w in &outcome.warnings {
        entries.push(("warning".to_owned(), w.clone()));
    }
    RunMetadata {
        title: "dyad posterior summary".to_owned(),
        entries,
    }
}

/// The physical quantities only (the sampled coordinates stay in the JSON
/// and the samples table).
fn physical_only(summary: &PosteriorSummary) -> PosteriorSummary {
    PosteriorSummary {
        parameters: summary
            .parameters
            .iter()
            .filter(|p| !p.info.name.starts_with("sampled:"))
            .cloned()
            .collect(),
        ..summary.clone()
    }
}

fn diagnostics_document(
    model: &Model,
    outcome: &Outcome,
    modes: &[PeriodMode],
) -> serde_json::Value {
    let d = &outcome.diagnostics;
    let per_parameter: Vec<serde_json::Value> = model
        .parameter_names()
        .iter()
        .enumerate()
        .map(|(i, name)| {
            json!({
                "name": name,
                "autocorrelation_time_steps": d["tau"][i],
                "split_rhat": d["split_rhat"][i],
                "effective_draws_bulk": d["effective_draws_bulk"][i],
                "effective_draws_tail": d["effective_draws_tail"][i],
            })
        })
        .collect();
    json!({
        "status": outcome.status,
        "steps": outcome.steps,
        "burn_in": outcome.burn_in,
        "mean_acceptance": d["mean_acceptance"],
        "acceptance_per_walker": d["acceptance"],
        "stuck_walkers": d["stuck_walkers"],
        "stopping_rule_last_check": d["last_check"],
        "parameters": per_parameter,
        "warnings": outcome.warnings,
        "inverse_temperatures": outcome.inverse_temperatures,
        "swap_acceptance_rate": outcome.swap_acceptance_rate,
        "evidence": outcome.evidence,
        "period_modes": modes,
    })
}

/// Writes summaries, samples, diagnostics and plots of a finished run.
pub fn write_report(
    files: &RunFiles,
    config: &RunConfig,
    model: &Model,
    outcome: &Outcome,
    quiet: bool,
) -> Result<()> {
    let draws = read_draws(files, model, outcome.burn_in)?;
    let summary = dyad_report::summarise(&draws.table)?;
    let modes = period_modes(&draws.table);
    let meta = metadata(config, model, outcome, &modes);
    let diagnostics = diagnostics_document(model, outcome, &modes);
    let folder = &files.folder;
    let physical = physical_only(&summary);
    dyad_report::write_text_summary(&folder.join("summary.txt"), &meta, &physical)?;
    dyad_report::write_markdown_summary(&folder.join("summary.md"), &meta, &physical)?;
    dyad_report::write_json_summary(&folder.join("summary.json"), &meta, &summary, &diagnostics)?;
    dyad_report::write_samples_csv(&folder.join("samples.csv"), &draws.table)?;
    write_text(
        &folder.join("diagnostics.json"),
        &serde_json::to_string_pretty(&diagnostics)?,
    )?;
    let plots = files.plots();
    fs::create_dir_all(&plots).with_context(|| format!("creating {}", plots.display()))?;
    write_plots(files, model, &draws, &summary)?;
    if !quiet {
        println!("{}", dyad_report::text_summary(&meta, &physical));
        println!("results in {}", folder.display());
    }
    Ok(())
}

fn map_point<'a>(draws: &'a Draws, summary: &PosteriorSummary, dim: usize) -> &'a [f64] {
    &draws.sampled[summary.map_draw * dim..(summary.map_draw + 1) * dim]
}

fn write_plots(
    files: &RunFiles,
    model: &Model,
    draws: &Draws,
    summary: &PosteriorSummary,
) -> Result<()> {
    let plots = files.plots();
    let table = &draws.table;
    let dim = model.dim();
    let map_x = map_point(draws, summary, dim);
    let present = |names: &[&'static str]| -> Vec<&'static str> {
        names
            .iter()
            .copied()
            .filter(|n| table.index_of(n).is_some())
            .collect()
    };
    let corner = match model.mode() {
        FitMode::Joint => present(&[
            "period_years",
            "eccentricity",
            "inclination_deg",
            "semi_major_axis_mas",
            "parallax_mas",
            "mass_primary_msun",
            "mass_secondary_msun",
        ]),
        FitMode::AstrometryOnly => present(&[
            "period_years",
            "eccentricity",
            "inclination_deg",
            "semi_major_axis_mas",
            "parallax_mas",
            "total_mass_msun",
        ]),
        FitMode::VelocitiesOnly => present(&[
            "period_days",
            "eccentricity",
            "k1_kms",
            "k2_kms",
            "m1_sin3i_msun",
            "m2_sin3i_msun",
        ]),
    };
    dyad_report::plot_corner(
        &plots.join("corner"),
        "Posterior of the main parameters",
        table,
        &corner,
    )?;

    let panels: Vec<DistributionPanel> = present(&[
        "mass_primary_msun",
        "mass_secondary_msun",
        "total_mass_msun",
        "mass_ratio",
        "m1_sin3i_msun",
        "m2_sin3i_msun",
    ])
    .into_iter()
    .take(4)
    .filter_map(|n| {
        let i = table.index_of(n)?;
        let info = &table.params[i];
        Some(DistributionPanel {
            label: info.label.clone(),
            unit: info.unit.clone(),
            values: table.column(i),
        })
    })
    .collect();
    if !panels.is_empty() {
        dyad_report::plot_mass_distributions(&plots.join("masses"), "Masses", &panels)?;
    }

    if model.mode() != FitMode::VelocitiesOnly {
        dyad_report::plot_sky(&plots.join("sky"), &sky_input(model, draws, map_x))?;
    }
    if model.mode() != FitMode::AstrometryOnly {
        if let Some(input) = velocity_input(model, map_x) {
            dyad_report::plot_velocity_curves(&plots.join("velocities"), &input)?;
        }
    }
    Ok(())
}

/// dRA*/dDec covariance of a measurement (polar errors propagated linearly:
/// dRA* = rho sin theta, dDec = rho cos theta).
pub fn sky_measurement(p: &RelativePosition) -> SkyMeasurement {
    match *p {
        RelativePosition::Polar {
            sep_mas,
            sep_err_mas,
            pa_rad,
            pa_err_rad,
            corr,
        } => {
            let (s, c) = pa_rad.sin_cos();
            // Jacobian of (dRA*, dDec) with respect to (rho, theta).
            let j = [[s, sep_mas * c], [c, -sep_mas * s]];
            let cov_in = [
                [sep_err_mas * sep_err_mas, corr * sep_err_mas * pa_err_rad],
                [corr * sep_err_mas * pa_err_rad, pa_err_rad * pa_err_rad],
            ];
            let mut cov = [[0.0; 2]; 2];
            for (a, row) in cov.iter_mut().enumerate() {
                for (b, out) in row.iter_mut().enumerate() {
                    *out = (0..2)
                        .flat_map(|k| (0..2).map(move |l| (k, l)))
                        .map(|(k, l)| j[a][k] * cov_in[k][l] * j[b][l])
                        .sum();
                }
            }
            SkyMeasurement {
                dra: sep_mas * s,
                ddec: sep_mas * c,
                cov,
                label: String::new(),
            }
        }
        RelativePosition::Cartesian {
            dra_mas,
            ddec_mas,
            dra_err_mas,
            ddec_err_mas,
            corr,
        } => {
            let off = corr * dra_err_mas * ddec_err_mas;
            SkyMeasurement {
                dra: dra_mas,
                ddec: ddec_mas,
                cov: [
                    [dra_err_mas * dra_err_mas, off],
                    [off, ddec_err_mas * ddec_err_mas],
                ],
                label: String::new(),
            }
        }
    }
}

/// One period of the relative orbit of `x`, as (dRA*, dDec) points.
pub fn orbit_track(model: &Model, x: &[f64], points: usize) -> Option<Vec<(f64, f64)>> {
    let o = model.layout().orbital(x)?;
    let orbit = Orbit::new(&o.campbell_elements()).ok()?;
    Some(
        (0..=points)
            .map(|k| {
                let t = o.t_peri_jd + o.period_days * k as f64 / points as f64;
                let s = orbit.sky_offset(t);
                (s.dra, s.ddec)
            })
            .collect(),
    )
}

fn sky_input(model: &Model, draws: &Draws, map_x: &[f64]) -> SkyPlotInput {
    let dim = model.dim();
    let n = draws.sampled.len() / dim;
    let step = (n / SKY_TRACKS).max(1);
    let tracks = (0..n)
        .step_by(step)
        .take(SKY_TRACKS)
        .filter_map(|d| orbit_track(model, &draws.sampled[d * dim..(d + 1) * dim], 240))
        .collect();
    SkyPlotInput {
        title: "Relative orbit on the sky".to_owned(),
        measurements: model
            .dataset()
            .astrometry
            .iter()
            .map(|e| sky_measurement(&e.position))
            .collect(),
        tracks,
        best_track: orbit_track(model, map_x, 480),
        predictions: Vec::new(),
    }
}

fn velocity_input(model: &Model, map_x: &[f64]) -> Option<VelocityPlotInput> {
    let o = model.layout().orbital(map_x)?;
    let residuals = model.residuals(map_x)?;
    let layout = model.layout();
    let gamma0 = layout.offset_kms(map_x, 0);
    let instruments = &model.dataset().instruments;
    let points = residuals
        .velocities
        .iter()
        .map(|v| dyad_report::VelocityPoint {
            t_jd: v.t_jd,
            // Shift every instrument onto the first one's zero point.
            rv_kms: v.observed_kms - (layout.offset_kms(map_x, v.instrument) - gamma0),
            err_kms: v.error_kms,
            residual_kms: v.residual_kms,
            star: match v.star {
                Star::Primary => dyad_report::Star::Primary,
                Star::Secondary => dyad_report::Star::Secondary,
            },
            instrument: instruments.get(v.instrument).cloned().unwrap_or_default(),
        })
        .collect();
    let curve = |star: Star| -> Vec<(f64, f64)> {
        if !layout.has_velocities_of(star) {
            return Vec::new();
        }
        (0..=400)
            .filter_map(|k| {
                let phase = k as f64 / 400.0;
                let t = o.t_peri_jd + phase * o.period_days;
                model.velocity_model(map_x, t, star, 0).map(|v| (phase, v))
            })
            .collect()
    };
    Some(VelocityPlotInput {
        title: "Radial velocities folded on the period (best-fit orbit)".to_owned(),
        period_days: o.period_days,
        t_peri_jd: o.t_peri_jd,
        points,
        model_primary: curve(Star::Primary),
        model_secondary: curve(Star::Secondary),
    })
}

/// `dyad report RUN`: redraws summaries and plots from a run folder.
pub fn report(folder: &std::path::Path) -> Result<()> {
    let run = crate::run_folder::ExistingRun::open(folder)?;
    let model = Model::from_config(&run.config)?;
    let outcome = Outcome::read(&run.files)?;
    write_report(&run.files, &run.config, &model, &outcome, false)
}
