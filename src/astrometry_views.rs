//! What the report shows of the relative astrometry beyond the summary:
//! the per-measurement residuals table, the separation and position angle
//! against time with posterior bands, and the marks on the sky plot (line
//! of nodes, periastron, O − C connectors).

use std::f64::consts::PI;

use dyad_model::data::RelativePosition;
use dyad_model::derived::ResidualForm;
use dyad_model::likelihood::{wrap_angle, Model};
use dyad_model::params::FitMode;
use dyad_orbit::{Orbit, SkyOffset, TimeScale};
use dyad_report::stats::quantile_sorted;
use dyad_report::{
    AstrometryResidualRow, Band, LineOfNodes, MeasuredForm, PolarPoint, SeparationPlotInput,
};

/// Posterior draws used for the bands of the separation and position-angle
/// plot (evenly spaced through the draws).
const BAND_DRAWS: usize = 400;
/// Grid times of that plot.
const BAND_TIMES: usize = 300;

/// chi-square of a residual pair r with errors s and correlation rho:
/// rᵀ C⁻¹ r = (z1² - 2 rho z1 z2 + z2²) / (1 - rho²), z = r / s.
fn pair_chi_square(r: [f64; 2], s: [f64; 2], rho: f64) -> f64 {
    let (z1, z2) = (r[0] / s[0], r[1] / s[1]);
    (z1 * z1 - 2.0 * rho * z1 * z2 + z2 * z2) / (1.0 - rho * rho)
}

/// The residual table rows of parameter vector `x` (the caller says which
/// draw: the report uses the MAP draw), or `None` outside the domain.
pub fn residual_rows(model: &Model, x: &[f64]) -> Option<Vec<AstrometryResidualRow>> {
    let residuals = model.residuals(x)?;
    let epochs = &model.dataset().astrometry;
    let rows = residuals
        .astrometry
        .iter()
        .zip(epochs)
        .map(|(r, epoch)| {
            let corr = match epoch.position {
                RelativePosition::Polar { corr, .. } | RelativePosition::Cartesian { corr, .. } => {
                    corr
                }
            };
            let chi_square = pair_chi_square(r.residual, r.error, corr);
            let (form, observed, model_pair, residual, error) = match r.form {
                ResidualForm::Polar => (
                    MeasuredForm::Polar,
                    [
                        r.observed.separation(),
                        r.observed.position_angle_rad().to_degrees(),
                    ],
                    [
                        r.model.separation(),
                        r.model.position_angle_rad().to_degrees(),
                    ],
                    [r.residual[0], r.residual[1].to_degrees()],
                    [r.error[0], r.error[1].to_degrees()],
                ),
                ResidualForm::Cartesian => (
                    MeasuredForm::Cartesian,
                    [r.observed.dra, r.observed.ddec],
                    [r.model.dra, r.model.ddec],
                    r.residual,
                    r.error,
                ),
            };
            AstrometryResidualRow {
                t_jd: r.t_jd,
                t_jyear: TimeScale::JulianYear.from_jd(r.t_jd),
                source: epoch.source.clone().unwrap_or_default(),
                form,
                observed,
                model: model_pair,
                residual,
                error,
                chi_square,
            }
        })
        .collect();
    Some(rows)
}

/// The eccentric anomaly's (sin E, cos E) at true anomaly `nu`:
/// tan(E/2) = sqrt((1-e)/(1+e)) tan(nu/2) (e.g. Murray & Dermott 1999,
/// Solar System Dynamics, eq. 2.46).
fn anomaly_at(nu: f64, e: f64) -> (f64, f64) {
    let half = (nu / 2.0).sin_cos();
    let big_e = 2.0 * ((1.0 - e).sqrt() * half.0).atan2((1.0 + e).sqrt() * half.1);
    big_e.sin_cos()
}

/// Line of nodes and periastron of the orbit of `x` on the sky (mas).
/// The ascending node lies at argument of latitude nu + omega = 0, where
/// the position angle equals Omega (DESIGN.md Thiele-Innes formulas).
pub fn sky_marks(model: &Model, x: &[f64]) -> Option<(LineOfNodes, (f64, f64))> {
    if model.mode() == FitMode::VelocitiesOnly {
        return None;
    }
    let o = model.layout().orbital(x)?;
    let orbit = Orbit::new(&o.campbell_elements()).ok()?;
    let e = o.eccentricity;
    let at = |nu: f64| {
        let (s, c) = anomaly_at(nu, e);
        let p = orbit.sky_offset_from_sin_cos(s, c);
        (p.dra, p.ddec)
    };
    let nodes = LineOfNodes {
        ascending: at(-o.omega_rad),
        descending: at(PI - o.omega_rad),
        ascending_known: model.mode() == FitMode::Joint,
    };
    let peri = orbit.sky_offset_from_sin_cos(0.0, 1.0);
    Some((nodes, (peri.dra, peri.ddec)))
}

/// Separation, position angle and their propagated errors of a measured
/// position (first-order propagation for Cartesian offsets).
fn polar_of(position: &RelativePosition) -> (f64, f64, f64, f64) {
    match *position {
        RelativePosition::Polar {
            sep_mas,
            sep_err_mas,
            pa_rad,
            pa_err_rad,
            ..
        } => (sep_mas, sep_err_mas, pa_rad, pa_err_rad),
        RelativePosition::Cartesian {
            dra_mas,
            ddec_mas,
            dra_err_mas,
            ddec_err_mas,
            corr,
        } => {
            let p = SkyOffset {
                dra: dra_mas,
                ddec: ddec_mas,
            };
            let rho = p.separation().max(f64::MIN_POSITIVE);
            let (ux, uy) = (dra_mas / rho, ddec_mas / rho);
            let cov = corr * dra_err_mas * ddec_err_mas;
            let (vx, vy) = (dra_err_mas.powi(2), ddec_err_mas.powi(2));
            // rho = |p|: d rho = ux dx + uy dy; theta = atan2(x, y):
            // d theta = (uy dx - ux dy) / rho.
            let var_rho = ux * ux * vx + 2.0 * ux * uy * cov + uy * uy * vy;
            let var_theta = (uy * uy * vx - 2.0 * ux * uy * cov + ux * ux * vy) / (rho * rho);
            (
                rho,
                var_rho.sqrt(),
                p.position_angle_rad(),
                var_theta.sqrt(),
            )
        }
    }
}

/// Everything the separation and position-angle plot needs, from the
/// draws (`sampled`, draw-major with `model.dim()` per draw) and the best
/// point `best`.
pub fn separation_input(
    model: &Model,
    sampled: &[f64],
    best: &[f64],
) -> Option<SeparationPlotInput> {
    let dim = model.dim();
    let epochs = &model.dataset().astrometry;
    if epochs.is_empty() || model.mode() == FitMode::VelocitiesOnly {
        return None;
    }
    let year = |jd: f64| TimeScale::JulianYear.from_jd(jd);
    let (t_lo, t_hi) = epochs
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |a, e| {
            (a.0.min(e.t_jd), a.1.max(e.t_jd))
        });
    let pad = (0.05 * (t_hi - t_lo)).max(30.0);
    let times_jd: Vec<f64> = (0..BAND_TIMES)
        .map(|k| t_lo - pad + (t_hi - t_lo + 2.0 * pad) * k as f64 / (BAND_TIMES - 1) as f64)
        .collect();
    // The best orbit's position angle, unwrapped along time (degrees).
    let best_positions: Vec<SkyOffset> = times_jd
        .iter()
        .map(|&t| model.predict_position(best, t))
        .collect::<Option<_>>()?;
    let mut best_pa: Vec<f64> = Vec::with_capacity(BAND_TIMES);
    for p in &best_positions {
        let raw = p.position_angle_rad().to_degrees();
        let v = match best_pa.last() {
            Some(&prev) => prev + wrap_angle((raw - prev).to_radians()).to_degrees(),
            None => raw,
        };
        best_pa.push(v);
    }
    let best_sep: Vec<f64> = best_positions.iter().map(SkyOffset::separation).collect();
    // Every draw's PA on the branch nearest the best orbit's at that time.
    let near_best = |pa_deg: f64, k: usize| {
        best_pa[k] + wrap_angle((pa_deg - best_pa[k]).to_radians()).to_degrees()
    };
    let n_draws = sampled.len() / dim.max(1);
    let step = (n_draws / BAND_DRAWS).max(1);
    let mut seps = vec![Vec::new(); BAND_TIMES];
    let mut pas = vec![Vec::new(); BAND_TIMES];
    for d in (0..n_draws).step_by(step).take(BAND_DRAWS) {
        let x = &sampled[d * dim..(d + 1) * dim];
        for (k, &t) in times_jd.iter().enumerate() {
            if let Some(p) = model.predict_position(x, t) {
                seps[k].push(p.separation());
                pas[k].push(near_best(p.position_angle_rad().to_degrees(), k));
            }
        }
    }
    let band = |columns: &mut [Vec<f64>]| -> Option<Band> {
        let mut b = Band::default();
        for c in columns.iter_mut() {
            if c.is_empty() {
                return None;
            }
            c.sort_by(f64::total_cmp);
            let q = |p| quantile_sorted(c, p);
            b.median.push(q(0.5));
            b.q68.push([q(0.16), q(0.84)]);
            b.q95.push([q(0.025), q(0.975)]);
        }
        Some(b)
    };
    let residuals = model.residuals(best)?;
    let points = epochs
        .iter()
        .zip(&residuals.astrometry)
        .map(|(e, r)| {
            let (sep, sep_err, pa, pa_err) = polar_of(&e.position);
            let k = (((e.t_jd - times_jd[0]) / (times_jd[1] - times_jd[0])).round() as usize)
                .min(BAND_TIMES - 1);
            PolarPoint {
                t_year: year(e.t_jd),
                sep_mas: sep,
                sep_err_mas: sep_err,
                pa_deg: near_best(pa.to_degrees(), k),
                pa_err_deg: pa_err.to_degrees(),
                sep_oc_mas: sep - r.model.separation(),
                pa_oc_deg: wrap_angle(pa - r.model.position_angle_rad()).to_degrees(),
                source: e.source.clone().unwrap_or_default(),
            }
        })
        .collect();
    Some(SeparationPlotInput {
        title: "Separation and position angle against time".to_owned(),
        time_label: "Epoch [Julian year]".to_owned(),
        times_year: times_jd.iter().map(|&t| year(t)).collect(),
        separation: band(&mut seps)?,
        position_angle: band(&mut pas)?,
        best_separation: best_sep,
        best_position_angle: best_pa,
        points,
    })
}
