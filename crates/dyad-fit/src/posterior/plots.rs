//! The plots of a posterior (or of one period mode): distributions, pairs,
//! the orbit on the sky and the velocity curves.

use crate::error::Result;

use dyad_model::data::{RelativePosition, Star};
use dyad_model::likelihood::Model;
use dyad_orbit::Orbit;
use dyad_report::{
    DistributionPanel, PosteriorSummary, SkyMeasurement, SkyPlotInput, VelocityPlotInput,
};

use super::{map_point, Draws};

/// Draws the plots of `draws` (the whole posterior or one mode's) into the
/// folder `plots`; `note` is appended to every title.
pub(super) fn write_plots(
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
