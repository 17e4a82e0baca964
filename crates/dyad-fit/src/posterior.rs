//! From the sampler's chain file to the report: posterior draws of every
//! sampled and derived quantity, summaries (text, Markdown, JSON), the
//! samples table, diagnostics and plots.

use std::fs;

use crate::error::{ensure, Context, Result};
use serde_json::json;

use dyad_model::config::RunConfig;
use dyad_model::data::{RelativePosition, Star};
use dyad_model::likelihood::Model;
use dyad_orbit::Orbit;
use dyad_report::{
    DistributionPanel, ParameterInfo, PosteriorDraws, PosteriorSummary, RunMetadata,
    SkyMeasurement, SkyPlotInput, VelocityPlotInput,
};
use dyad_sampler::{for_each_record, RecordTable};

use crate::check::prior_lines;
use crate::fit::Outcome;
use crate::modes::{split_modes, ModeSplit, PeriodMode};
use crate::run_folder::{write_text, RunFiles};

/// Most posterior draws kept for the report (records are thinned evenly
/// beyond this; the chain file keeps them all).
pub const MAX_DRAWS: usize = 40_000;

/// Posterior draws: sampled coordinates and physical quantities.
#[derive(Debug, Clone)]
pub struct Draws {
    /// Walkers per record: draw `d` came from walker `d % walkers`.
    pub walkers: usize,
    /// Sampled coordinates, draw-major.
    pub sampled: Vec<f64>,
    /// Sampled plus derived quantities, for the report crate.
    pub table: PosteriorDraws,
}

/// Plot label and kind of a quantity by its name.
fn info_for(name: &str, unit: &str, node_folded: bool) -> ParameterInfo {
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
            let period = if node_folded { 180.0 } else { 360.0 };
            ParameterInfo::angle(name, unit, label, period)
        }
        _ => ParameterInfo::linear(name, unit, label),
    }
}

/// Reads the chain file of a run and builds the posterior draws after burn-in.
pub fn read_draws(files: &RunFiles, model: &Model, burn_in: u64) -> Result<Draws> {
    // Two passes over the chain file, one record at a time: the steps first
    // (to place the burn-in and the thinning), then the kept records only,
    // so a long chain is never held in memory whole.
    let chain = files.chain();
    let mut steps = Vec::new();
    let shape = for_each_record(&chain, |step, _| steps.push(step))
        .with_context(|| format!("reading the chain {}", chain.display()))?;
    let source = chain.display().to_string();
    draws_of_records(model, burn_in, &steps, shape, &source, |visit| {
        for_each_record(&chain, |_, record| visit(record))
            .map(|_| ())
            .with_context(|| format!("reading the chain {}", chain.display()))
    })
}

/// The posterior draws after burn-in of records kept in memory (a run with
/// [`crate::Storage::Memory`]).
pub fn draws_from_table(table: &RecordTable, model: &Model, burn_in: u64) -> Result<Draws> {
    let width = table.n_walkers * table.values_per_walker;
    draws_of_records(
        model,
        burn_in,
        &table.steps,
        (table.n_walkers, table.values_per_walker),
        "the sampled records",
        |visit| {
            for record in table.values.chunks_exact(width.max(1)) {
                visit(record);
            }
            Ok(())
        },
    )
}

/// Draws from records of `nw` walkers of `vpw` values each (the sampled
/// coordinates, then the log-prior and log-likelihood): `steps[r]` is the
/// step of record `r`, and `records` calls its argument with every record
/// in order. Records after `burn_in` are kept, evenly thinned to at most
/// [`MAX_DRAWS`] draws.
fn draws_of_records(
    model: &Model,
    burn_in: u64,
    steps: &[u64],
    (nw, vpw): (usize, usize),
    source: &str,
    records: impl FnOnce(&mut dyn FnMut(&[f64])) -> Result<()>,
) -> Result<Draws> {
    let dim = model.dim();
    let first = steps.partition_point(|&s| s <= burn_in);
    let n_records = steps.len().saturating_sub(first);
    ensure!(
        vpw == dim + 2,
        "{source} holds {vpw} values per walker, but the model has {dim} parameters"
    );
    ensure!(
        n_records > 0,
        "{source} holds no samples after the burn-in of {burn_in} steps: run longer"
    );
    let stride = (n_records * nw).div_ceil(MAX_DRAWS).max(1);
    let derived_names = model.derived_names_units();
    let mut params: Vec<ParameterInfo> = derived_names
        .iter()
        .map(|(n, u)| info_for(n, u, model.node_folded()))
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
    let mut r = 0;
    records(&mut |record: &[f64]| {
        if r >= first && (r - first).is_multiple_of(stride) {
            for w in 0..nw {
                let v = &record[w * vpw..(w + 1) * vpw];
                let x = &v[..dim];
                sampled.extend_from_slice(x);
                values.extend(model.derived(x));
                values.extend_from_slice(x);
                log_posterior.push(v[dim] + v[dim + 1]);
            }
        }
        r += 1;
    })?;
    let table = PosteriorDraws::new(params, values, log_posterior)?;
    Ok(Draws {
        walkers: nw,
        sampled,
        table,
    })
}

/// The posterior of a finished run: its draws after burn-in, their summary
/// and their period modes, and the text summary (for a run folder, as
/// `summary.txt` holds it).
#[derive(Debug, Clone)]
pub struct PosteriorReport {
    /// The draws.
    pub draws: Draws,
    /// Medians, intervals and the MAP of every quantity.
    pub summary: PosteriorSummary,
    /// The separate period modes and the mode of every draw.
    pub modes: ModeSplit,
    /// The text summary.
    pub text: String,
}

impl PosteriorReport {
    /// Summary and modes of `draws`, with the parameter table as text (no
    /// run-folder statements: a fit in memory has none).
    pub fn of_draws(draws: Draws) -> Result<Self> {
        let summary = dyad_report::summarise(&draws.table)?;
        let modes = split_modes(&draws.table, draws.walkers);
        let text = dyad_report::text_parameter_table(&physical_only(&summary));
        Ok(Self {
            draws,
            summary,
            modes,
            text,
        })
    }
}

/// The statement of what the posterior depends on, for every report.
fn metadata(
    config: &RunConfig,
    model: &Model,
    outcome: &Outcome,
    modes: &[PeriodMode],
    window: Option<(f64, f64)>,
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
        crate::error_summary::error_model_description(model),
    ));
    for (name, mut prior) in prior_lines(model) {
        if let (Some((lo, hi)), "period") = (window, name.as_str()) {
            // A run of `dyad periods`: the prior is cut to its window.
            prior = format!(
                "{prior}, restricted to the window {lo:.2} to {hi:.2} d \
                 ({:.4} to {:.4} yr) and renormalised",
                lo / 365.25,
                hi / 365.25
            );
        }
        entries.push((format!("prior: {name}"), prior));
    }
    let parallax = match config.data.catalogue_parallax {
        Some((p, e)) => format!("catalogue value {p} +- {e} mas used as a normal prior"),
        None => "no catalogue value: the parallax prior above".to_owned(),
    };
    if model.has_astrometry() {
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
        for m in modes {
            let mass = m
                .total_mass_msun
                .map_or_else(String::new, |v| format!(", median M1+M2 {v:.3} M_sun"));
            entries.push((
                format!("period mode {}", m.number),
                format!(
                    "weight {:.3} +- {:.3}: P = {:.4} yr (range {:.4} to {:.4} yr){mass}",
                    m.weight,
                    m.weight_error,
                    m.period_days / 365.25,
                    m.range_days[0] / 365.25,
                    m.range_days[1] / 365.25
                ),
            ));
        }
        // First thing a reader sees: the table's intervals are not those
        // of one orbit.
        entries.insert(
            0,
            (
                "caution".to_owned(),
                format!(
                    "the posterior has {} separate period modes: the intervals in the table \
                     below span all of them; each mode's own medians and intervals follow the \
                     table (samples.csv column `mode`, plots in plots/mode-N/)",
                    modes.len()
                ),
            ),
        );
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
        "period_mode_shares": d["watched"],
        "parameters": per_parameter,
        "warnings": outcome.warnings,
        "inverse_temperatures": outcome.inverse_temperatures,
        "swap_acceptance_rate": outcome.swap_acceptance_rate,
        "evidence": outcome.evidence,
        "period_modes": modes,
    })
}

/// Writes summaries, samples, diagnostics and plots of a finished run, and
/// returns its posterior.
pub fn write_report(
    files: &RunFiles,
    config: &RunConfig,
    model: &Model,
    outcome: &Outcome,
) -> Result<PosteriorReport> {
    let draws = read_draws(files, model, outcome.burn_in)?;
    let summary = dyad_report::summarise(&draws.table)?;
    let split = split_modes(&draws.table, draws.walkers);
    let modes = &split.modes;
    let window = crate::run_folder::read_window(files)?;
    let mut meta = metadata(config, model, outcome, modes, window);
    let mut diagnostics = diagnostics_document(model, outcome, modes);
    let (error_lines, error_document) =
        crate::error_summary::entries(config, model, &draws, &summary);
    meta.entries.extend(error_lines);
    diagnostics["error_model"] = error_document;
    let folder = &files.folder;
    let physical = physical_only(&summary);
    let plots = files.plots();
    fs::create_dir_all(&plots).with_context(|| format!("creating {}", plots.display()))?;
    write_plots(
        &plots,
        model,
        &draws,
        &summary,
        config.output.orbits_on_sky_plot,
        "",
    )?;
    let mut text = dyad_report::text_summary(&meta, &physical);
    let mut markdown = dyad_report::markdown_summary(&meta, &physical);
    let mut json = dyad_report::json_summary(&meta, &summary, &diagnostics)?;
    if split.is_multimodal() {
        let mut blocks = Vec::new();
        for m in modes {
            let of_mode = draws.of_mode(&split.labels, m.number)?;
            let mode_summary = dyad_report::summarise(&of_mode.table)?;
            let heading = format!(
                "Period mode {} of {}: weight {:.3} +- {:.3}, {} draws, P = {:.4} yr",
                m.number,
                modes.len(),
                m.weight,
                m.weight_error,
                mode_summary.n_draws,
                m.period_days / 365.25
            );
            let mode_physical = physical_only(&mode_summary);
            text.push_str(&format!(
                "\n{heading}\n{}\n{}",
                "-".repeat(heading.chars().count()),
                dyad_report::text_parameter_table(&mode_physical)
            ));
            markdown.push_str(&format!(
                "\n## {heading}\n\n{}",
                dyad_report::markdown_parameter_table(&mode_physical)
            ));
            blocks.push(json!({
                "mode": m.number,
                "weight": m.weight,
                "weight_error": m.weight_error,
                "n_draws": mode_summary.n_draws,
                "period_days": m.period_days,
                "range_days": m.range_days,
                "parameters": mode_summary.parameters,
            }));
            let mode_plots = plots.join(format!("mode-{}", m.number));
            fs::create_dir_all(&mode_plots)
                .with_context(|| format!("creating {}", mode_plots.display()))?;
            write_plots(
                &mode_plots,
                model,
                &of_mode,
                &mode_summary,
                config.output.orbits_on_sky_plot,
                &format!(" (period mode {}, weight {:.2})", m.number, m.weight),
            )?;
        }
        json["modes"] = serde_json::Value::Array(blocks);
    }
    let mut json_text = serde_json::to_string_pretty(&json)?;
    json_text.push('\n');
    write_text(&folder.join("summary.txt"), &text)?;
    write_text(&folder.join("summary.md"), &markdown)?;
    write_text(&folder.join("summary.json"), &json_text)?;
    dyad_report::write_samples_csv(
        &folder.join("samples.csv"),
        &draws.table,
        Some(&split.labels),
    )?;
    write_text(
        &folder.join("diagnostics.json"),
        &serde_json::to_string_pretty(&diagnostics)?,
    )?;
    write_tables(folder, model, &draws, &summary, &split)?;
    Ok(PosteriorReport {
        draws,
        summary,
        modes: split,
        text,
    })
}

fn map_point<'a>(draws: &'a Draws, summary: &PosteriorSummary, dim: usize) -> &'a [f64] {
    &draws.sampled[summary.map_draw * dim..(summary.map_draw + 1) * dim]
}

/// The astrometric residuals at the MAP draw and the LaTeX elements table.
fn write_tables(
    folder: &std::path::Path,
    model: &Model,
    draws: &Draws,
    summary: &PosteriorSummary,
    split: &crate::modes::ModeSplit,
) -> Result<()> {
    let map_x = map_point(draws, summary, model.dim());
    if !model.dataset().astrometry.is_empty() {
        if let Some(rows) = crate::astrometry_views::residual_rows(model, map_x) {
            dyad_report::write_astrometry_residuals_csv(
                &folder.join("astrometry-residuals.csv"),
                &rows,
            )?;
        }
    }
    // One column per period mode when there are several.
    dyad_report::write_latex_elements_table(
        &folder.join("elements.tex"),
        "Orbital elements and masses (dyad posterior)",
        &crate::paper_table::element_rows(&draws.table),
        split.is_multimodal().then_some(split.labels.as_slice()),
    )?;
    Ok(())
}

/// Draws the plots of `draws` (the whole posterior or one mode's) into the
/// folder `plots`; `note` is appended to every title.
fn write_plots(
    plots: &std::path::Path,
    model: &Model,
    draws: &Draws,
    summary: &PosteriorSummary,
    sky_orbits: usize,
    note: &str,
) -> Result<()> {
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
    let pairs = match (model.has_astrometry(), model.has_velocities()) {
        (true, true) => present(&[
            "period_years",
            "eccentricity",
            "inclination_deg",
            "semi_major_axis_mas",
            "parallax_mas",
            "mass_primary_msun",
            "mass_secondary_msun",
        ]),
        (true, false) => present(&[
            "period_years",
            "eccentricity",
            "inclination_deg",
            "semi_major_axis_mas",
            "parallax_mas",
            "total_mass_msun",
        ]),
        (false, _) => present(&[
            "period_days",
            "eccentricity",
            "k1_kms",
            "k2_kms",
            "m1_sin3i_msun",
            "m2_sin3i_msun",
        ]),
    };
    dyad_report::plot_pairs(
        &plots.join("pairs"),
        &format!("Posterior of the main parameters{note}"),
        table,
        &pairs,
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
        dyad_report::plot_mass_distributions(
            &plots.join("masses"),
            &format!("Masses{note}"),
            &panels,
        )?;
    }

    if model.has_astrometry() {
        dyad_report::plot_sky(
            &plots.join("sky"),
            &sky_input(model, draws, map_x, sky_orbits, note),
        )?;
        if let Some(input) = crate::astrometry_views::separation_input(model, &draws.sampled, map_x)
        {
            dyad_report::plot_separation_and_angle(&plots.join("separation-and-angle"), &input)?;
        }
    }
    if model.has_velocities() {
        if let Some(input) = velocity_input(model, map_x, note) {
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
                model: None,
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
                model: None,
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

fn sky_input(
    model: &Model,
    draws: &Draws,
    map_x: &[f64],
    n_tracks: usize,
    note: &str,
) -> SkyPlotInput {
    let dim = model.dim();
    let n = draws.sampled.len() / dim;
    let step = (n / n_tracks.max(1)).max(1);
    let tracks = (0..n)
        .step_by(step)
        .take(n_tracks)
        .filter_map(|d| orbit_track(model, &draws.sampled[d * dim..(d + 1) * dim], 240))
        .collect();
    let model_at = |t: f64| model.predict_position(map_x, t).map(|p| (p.dra, p.ddec));
    let marks = crate::astrometry_views::sky_marks(model, map_x);
    SkyPlotInput {
        title: format!("Relative orbit on the sky{note}"),
        measurements: model
            .dataset()
            .astrometry
            .iter()
            .map(|e| SkyMeasurement {
                model: model_at(e.t_jd),
                ..sky_measurement(&e.position)
            })
            .collect(),
        tracks,
        best_track: orbit_track(model, map_x, 480),
        predictions: Vec::new(),
        nodes: marks.map(|m| m.0),
        periastron: marks.map(|m| m.1),
    }
}

fn velocity_input(model: &Model, map_x: &[f64], note: &str) -> Option<VelocityPlotInput> {
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
        title: format!("Radial velocities folded on the period (best-fit orbit){note}"),
        period_days: o.period_days,
        t_peri_jd: o.t_peri_jd,
        points,
        model_primary: curve(Star::Primary),
        model_secondary: curve(Star::Secondary),
    })
}

/// `dyad report RUN`: redraws summaries and plots from a run folder and
/// returns its posterior.
pub fn report(folder: &std::path::Path) -> Result<PosteriorReport> {
    let run = crate::run_folder::ExistingRun::open(folder)?;
    let model = Model::from_config(&run.config)?;
    let outcome = Outcome::read(&run.files)?;
    write_report(&run.files, &run.config, &model, &outcome)
}
