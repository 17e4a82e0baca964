//! The summary's statements about the error model and the parallax: what
//! the astrometric error model is, per-source residual statistics at the
//! MAP with cautions when a source's quoted errors look wrong, the parallax
//! the orbit and velocities imply without the catalogue prior, its tension
//! with the catalogue value, and how much that prior drives the masses.

use dyad_model::astrometry_errors::ResidualDistribution;
use dyad_model::config::RunConfig;
use dyad_model::likelihood::Model;
use dyad_model::params::FitMode;
use dyad_orbit::laws;
use dyad_report::PosteriorSummary;
use serde_json::json;

use crate::posterior::Draws;

/// A fitted error scale outside this range earns a caution.
const SCALE_CAUTION: (f64, f64) = (0.67, 1.5);

/// The "error model" line of the summary.
pub fn error_model_description(model: &Model) -> String {
    let velocity = "per-instrument velocity jitter added in quadrature and a per-instrument \
                    velocity offset";
    if model.mode() == FitMode::VelocitiesOnly {
        return format!("Gaussian velocity errors as given; {velocity}");
    }
    let priors = model.layout().astrometry_error_priors();
    let sources = model.layout().astrometry_sources();
    let mut parts = Vec::new();
    for (k, name) in sources.iter().enumerate() {
        let mut terms = Vec::new();
        if priors.scale[k].fixed_value() != Some(1.0) {
            terms.push(format!(
                "error scale {}",
                priors.scale[k].prior().describe()
            ));
        }
        if priors.jitter_mas[k].fixed_value() != Some(0.0) {
            terms.push(format!(
                "jitter {} mas",
                priors.jitter_mas[k].prior().describe()
            ));
        }
        if !terms.is_empty() {
            parts.push(format!("source '{name}': {}", terms.join(", ")));
        }
    }
    let distribution = match &priors.distribution {
        ResidualDistribution::Normal => "Gaussian astrometric errors".to_owned(),
        ResidualDistribution::StudentT(p) => format!(
            "bivariate Student-t astrometric residuals (Lange, Little & Taylor 1989), degrees \
             of freedom {}",
            p.prior().describe()
        ),
    };
    let errors = if parts.is_empty() {
        "as given".to_owned()
    } else {
        format!(
            "with quoted errors rescaled and/or widened per source ({})",
            parts.join("; ")
        )
    };
    format!(
        "{distribution} {errors} (pairs with their correlation, position-angle residuals \
         wrapped); {velocity}"
    )
}

/// Summary lines on the astrometric sources and the parallax, and the same
/// as JSON for the diagnostics.
pub fn entries(
    config: &RunConfig,
    model: &Model,
    draws: &Draws,
    summary: &PosteriorSummary,
) -> (Vec<(String, String)>, serde_json::Value) {
    let mut out = Vec::new();
    let mut document = json!({});
    let dim = model.dim();
    let map_x = &draws.sampled[summary.map_draw * dim..(summary.map_draw + 1) * dim];
    if let Some(stats) = model.astrometry_source_statistics(map_x) {
        let scales_sampled = !model.layout().astrometry_error_priors().is_as_given();
        for s in &stats {
            let mut rms = Vec::new();
            if let (Some(sep), Some(pa)) = (s.rms_separation_mas, s.rms_position_angle_deg) {
                rms.push(format!(
                    "rms {sep:.3} mas in separation and {pa:.4} deg in position angle"
                ));
            }
            if let Some(off) = s.rms_offset_mas {
                rms.push(format!("rms {off:.3} mas in the offsets"));
            }
            let per_dof = s.chi_square / s.degrees_of_freedom;
            let per_dof_quoted = s.chi_square_quoted / s.degrees_of_freedom;
            let scale = summary.get(&format!("error_scale[{}]", s.name));
            let mut line = format!(
                "{} epochs; {}; chi-square per degree of freedom {per_dof:.2} at the MAP",
                s.epochs,
                rms.join(", ")
            );
            if scales_sampled {
                line.push_str(&format!(" ({per_dof_quoted:.2} with the errors as quoted)"));
            }
            if let Some(p) = scale {
                line.push_str(&format!(
                    "; error scale {:.3} (68 %: {:.3} to {:.3})",
                    p.median, p.q68[0], p.q68[1]
                ));
            }
            if s.smallest_weight < 0.3 {
                line.push_str(&format!(
                    "; smallest Student-t weight {:.3} (an outlier, down-weighted)",
                    s.smallest_weight
                ));
            }
            out.push((format!("astrometry source {}", s.name), line));
            if let Some(p) = scale {
                if p.median < SCALE_CAUTION.0 || p.median > SCALE_CAUTION.1 {
                    out.push((
                        "caution".to_owned(),
                        format!(
                            "source '{}': the fitted error scale is {:.2}: its quoted errors \
                             look {} by that factor",
                            s.name,
                            p.median,
                            if p.median > 1.0 {
                                "too small"
                            } else {
                                "too large"
                            }
                        ),
                    ));
                }
            } else if !scales_sampled && chi_square_far_from_one(per_dof, s.degrees_of_freedom) {
                out.push((
                    "caution".to_owned(),
                    format!(
                        "source '{}': chi-square per degree of freedom {per_dof:.2} with the \
                         errors as given: its quoted errors look {} (by a factor of about \
                         {:.1}); consider an error scale for it ([astrometry_errors] in the \
                         configuration)",
                        s.name,
                        if per_dof > 1.0 {
                            "too small"
                        } else {
                            "too large"
                        },
                        per_dof.sqrt().max(1.0 / per_dof.sqrt())
                    ),
                ));
            }
        }
        document["astrometry_sources_at_map"] = json!(stats);
    }
    if let Some((lines, doc)) = parallax_entries(config, draws) {
        out.extend(lines);
        document["orbital_parallax"] = doc;
    }
    (out, document)
}

/// Whether a chi-square per degree of freedom is far from 1: outside
/// [0.5, 2] and more than 3 of its standard deviations, sqrt(2 / dof),
/// away (common practice).
fn chi_square_far_from_one(per_dof: f64, dof: f64) -> bool {
    dof > 0.0 && !(0.5..=2.0).contains(&per_dof) && (per_dof - 1.0).abs() > 3.0 * (2.0 / dof).sqrt()
}

/// Median and the half-width of the central 68 % of finite values.
fn median_and_sigma(mut v: Vec<f64>) -> Option<(f64, f64)> {
    v.retain(|x| x.is_finite());
    if v.len() < 10 {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let q = |p: f64| crate::calibrate::quantile_sorted(&v, p);
    Some((q(0.5), 0.5 * (q(0.84) - q(0.16))))
}

/// The orbital parallax, its tension with the catalogue and the
/// catalogue's weight in the masses.
fn parallax_entries(
    config: &RunConfig,
    draws: &Draws,
) -> Option<(Vec<(String, String)>, serde_json::Value)> {
    let table = &draws.table;
    let column = |name: &str| table.index_of(name).map(|i| table.column(i));
    let orbital = column("orbital_parallax_mas")?;
    let (a_mas, period, parallax, mass) = (
        column("semi_major_axis_mas")?,
        column("period_days")?,
        column("parallax_mas")?,
        column("total_mass_msun")?,
    );
    let (orb, orb_sigma) = median_and_sigma(orbital.clone())?;
    let (plx, plx_sigma) = median_and_sigma(parallax)?;
    // The total mass the orbital parallax gives, draw by draw (Kepler's third law).
    let orbital_mass: Vec<f64> = orbital
        .iter()
        .zip(a_mas.iter().zip(&period))
        .map(|(&p, (&a, &per))| laws::total_mass_from_angular(a, p, per))
        .collect();
    let (m, m_sigma) = median_and_sigma(mass)?;
    let (m_orb, m_orb_sigma) = median_and_sigma(orbital_mass)?;
    let mut lines = vec![(
        "orbital parallax".to_owned(),
        format!(
            "{orb:.3} +- {orb_sigma:.3} mas from the orbit and the velocities alone (no \
             parallax prior; semi-amplitudes fitted to the velocities for every draw); total \
             mass from it {m_orb:.3} +- {m_orb_sigma:.3} M_sun"
        ),
    )];
    let mut doc = json!({
        "orbital_parallax_mas": orb,
        "orbital_parallax_sigma_mas": orb_sigma,
        "posterior_parallax_mas": plx,
        "posterior_parallax_sigma_mas": plx_sigma,
        "total_mass_msun": m,
        "total_mass_sigma_msun": m_sigma,
        "total_mass_from_orbital_parallax_msun": m_orb,
        "total_mass_from_orbital_parallax_sigma_msun": m_orb_sigma,
    });
    if let Some((cat, cat_sigma)) = config.data.catalogue_parallax {
        let tension = (orb - cat) / (orb_sigma * orb_sigma + cat_sigma * cat_sigma).sqrt();
        // Share of the parallax information (inverse variance) from the catalogue.
        let share = cat_sigma.powi(-2) / (cat_sigma.powi(-2) + orb_sigma.powi(-2));
        lines.push((
            "parallax tension".to_owned(),
            format!(
                "orbital {orb:.3} +- {orb_sigma:.3} mas against the catalogue's {cat} +- \
                 {cat_sigma} mas: {tension:+.1} sigma{}",
                if tension.abs() > 3.0 {
                    " (they disagree: check the parallax, the velocity zero points and the \
                     error model)"
                } else {
                    ""
                }
            ),
        ));
        lines.push((
            "catalogue prior".to_owned(),
            format!(
                "gives {:.0} % of the parallax information; the posterior parallax is {:.2} \
                 times as wide as the catalogue's; total mass {m:.3} +- {m_sigma:.3} M_sun with \
                 it, {m_orb:.3} +- {m_orb_sigma:.3} M_sun from the orbital parallax alone",
                100.0 * share,
                plx_sigma / cat_sigma
            ),
        ));
        doc["catalogue_parallax_mas"] = json!(cat);
        doc["catalogue_parallax_sigma_mas"] = json!(cat_sigma);
        doc["tension_sigma"] = json!(tension);
        doc["catalogue_information_share"] = json!(share);
    }
    Some((lines, doc))
}
