//! What the summaries state beside the parameter table (the posterior's
//! dependencies, sampler and evidence lines) and the diagnostics document.

use serde_json::json;

use dyad_model::config::RunConfig;
use dyad_model::likelihood::Model;
use dyad_report::{PosteriorSummary, RunMetadata};

use crate::check::prior_lines;
use crate::fit::Outcome;
use crate::modes::PeriodMode;

/// The statement of what the posterior depends on, for every report.
pub(super) fn metadata(
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
        ) + &if modes.len() > 1 {
            format!(
                "; with period modes, each mode's weight known to {} (Monte Carlo error of \
                 its share of walkers)",
                config.sampler.mode_weight_error
            )
        } else {
            String::new()
        },
    ));
    if outcome.inverse_temperatures.len() > 1 {
        entries.push((
            "tempering".to_owned(),
            format!("{} temperatures", outcome.inverse_temperatures.len()),
        ));
    }
    if let Some(ev) = &outcome.evidence {
        let (ti, ss) = (&ev.thermodynamic_integration, &ev.stepping_stone);
        entries.push((
            "evidence ln Z".to_owned(),
            format!(
                "thermodynamic integration {:.3} +- {:.3} (MC) +- {:.3} (discretisation); stepping stone {:.3} +- {:.3}",
                ti.ln_z,
                ti.mc_error,
                ti.discretisation_error.unwrap_or(f64::NAN),
                ss.ln_z,
                ss.mc_error,
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
                ) + if outcome.inverse_temperatures.len() > 1 {
                    // Measured on the invented Marrow Gate (README, "Mode
                    // weights and the stopping rule"): 0.123 at the rule's
                    // stop against about 0.09 from the evidence ratio.
                    "; in a tempered run the weights come from the steps kept after \
                     burn-in and can still be relaxing more slowly than those steps show: \
                     for weights to publish, compare the periods by evidence with `dyad \
                     periods`"
                } else {
                    ""
                },
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
pub(super) fn physical_only(summary: &PosteriorSummary) -> PosteriorSummary {
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

pub(super) fn diagnostics_document(
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
                "autocorrelation_time_steps": d.tau.get(i),
                "split_rhat": d.split_rhat.get(i),
                "effective_draws_bulk": d.effective_draws_bulk.get(i),
                "effective_draws_tail": d.effective_draws_tail.get(i),
            })
        })
        .collect();
    json!({
        "status": outcome.status,
        "steps": outcome.steps,
        "burn_in": outcome.burn_in,
        "mean_acceptance": d.mean_acceptance,
        "acceptance_per_walker": d.acceptance,
        "stuck_walkers": d.stuck_walkers,
        "stopping_rule_last_check": d.last_check,
        "period_mode_shares": d.watched,
        "parameters": per_parameter,
        "warnings": outcome.warnings,
        "inverse_temperatures": outcome.inverse_temperatures,
        "swap_acceptance_rate": outcome.swap_acceptance_rate,
        "evidence": outcome.evidence,
        "period_modes": modes,
    })
}
