//! From the sampler's chain file to the report: posterior draws of every
//! sampled and derived quantity, summaries (text, Markdown, JSON), the
//! samples table, diagnostics and plots.

mod documents;
mod draws;
mod plots;

use std::fs;

use crate::error::{Context, Result};
use serde_json::json;

use dyad_model::config::RunConfig;
use dyad_model::likelihood::Model;
use dyad_report::PosteriorSummary;

use crate::fit::Outcome;
use crate::modes::{split_modes, ModeSplit};
use crate::run_folder::{write_text, RunFiles};

use documents::{diagnostics_document, metadata, physical_only};
pub use draws::{draws_from_table, read_draws, Draws, MAX_DRAWS};
use plots::write_plots;
pub use plots::{orbit_track, sky_measurement};

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

pub(super) fn map_point<'a>(draws: &'a Draws, summary: &PosteriorSummary, dim: usize) -> &'a [f64] {
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

/// `dyad report RUN`: redraws summaries and plots from a run folder and
/// returns its posterior.
pub fn report(folder: &std::path::Path) -> Result<PosteriorReport> {
    let run = crate::run_folder::ExistingRun::open(folder)?;
    let model = Model::from_config(&run.config)?;
    let outcome = Outcome::read(&run.files)?;
    write_report(&run.files, &run.config, &model, &outcome)
}
