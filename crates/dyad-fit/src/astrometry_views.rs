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
/// the position angle equals Omega (docs/DESIGN.md Thiele-Innes formulas).
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

#[cfg(test)]
mod tests {
    use super::*;
    use dyad_model::data::{AstrometryEpoch, Dataset};
    use dyad_model::params::{ModelPriors, OrbitalParameters, PhysicalParameters};

    // eta Coronae Borealis, J. Meeus, Astronomical Algorithms (2nd ed.,
    // 1998), Example 57.a: P = 41.623 yr, T = 1934.008, e = 0.2763,
    // a = 0.907 arcsec, i = 59.025, Omega = 23.717, omega = 219.907 deg.
    const P_YR: f64 = 41.623;
    const T_YR: f64 = 1934.008;
    const E: f64 = 0.2763;
    const A_MAS: f64 = 907.0;
    const I_DEG: f64 = 59.025;
    const NODE_DEG: f64 = 23.717;
    const OMEGA_DEG: f64 = 219.907;
    /// An invented parallax; the total mass follows from Kepler's third law
    /// with k = 1.0000377738 (docs/REFERENCE-VALUES.md, from IAU 2015 B3).
    const PARALLAX_MAS: f64 = 50.0;

    /// The book's epochs are decimal years; as Julian years their JD keep
    /// t - T and P in the same proportion, so M is the book's.
    fn jd(year: f64) -> f64 {
        TimeScale::JulianYear.to_jd(year)
    }

    /// (dRA*, dDec) in mas at decimal year `t`, by hand from the docs/DESIGN.md
    /// formulas: Kepler's equation by Newton's method, Thiele-Innes
    /// constants, dDec = A X + F Y, dRA* = B X + G Y.
    fn hand_position(t: f64) -> (f64, f64) {
        let m = std::f64::consts::TAU * (t - T_YR) / P_YR;
        let mut big_e = m;
        for _ in 0..50 {
            big_e -= (big_e - E * big_e.sin() - m) / (1.0 - E * big_e.cos());
        }
        let (w, n, i) = (
            OMEGA_DEG.to_radians(),
            NODE_DEG.to_radians(),
            I_DEG.to_radians(),
        );
        let a = A_MAS * (w.cos() * n.cos() - w.sin() * n.sin() * i.cos());
        let b = A_MAS * (w.cos() * n.sin() + w.sin() * n.cos() * i.cos());
        let f = A_MAS * (-w.sin() * n.cos() - w.cos() * n.sin() * i.cos());
        let g = A_MAS * (-w.sin() * n.sin() + w.cos() * n.cos() * i.cos());
        let x = big_e.cos() - E;
        let y = (1.0 - E * E).sqrt() * big_e.sin();
        (b * x + g * y, a * x + f * y)
    }

    fn polar(p: (f64, f64)) -> (f64, f64) {
        (
            p.0.hypot(p.1),
            p.0.atan2(p.1).to_degrees().rem_euclid(360.0),
        )
    }

    fn model_and_point(astrometry: Vec<AstrometryEpoch>) -> (Model, Vec<f64>) {
        let dataset = Dataset {
            astrometry,
            velocities: Vec::new(),
            instruments: Vec::new(),
        };
        let priors = ModelPriors::defaults(&dataset);
        let model = Model::new(dataset, &priors).expect("model");
        let a_au = A_MAS / PARALLAX_MAS;
        let orbit = OrbitalParameters {
            period_days: P_YR * 365.25,
            eccentricity: E,
            omega_rad: OMEGA_DEG.to_radians(),
            mean_longitude_rad: 0.0,
            t_peri_jd: jd(T_YR),
            inclination_rad: Some(I_DEG.to_radians()),
            node_rad: Some(NODE_DEG.to_radians()),
            total_mass_msun: Some(1.000_037_773_8 * a_au.powi(3) / (P_YR * P_YR)),
            parallax_mas: Some(PARALLAX_MAS),
            semi_major_axis_au: Some(a_au),
            semi_major_axis_mas: Some(A_MAS),
            mass_ratio: None,
            k1_kms: None,
            k2_kms: None,
        };
        let x = model
            .layout()
            .from_physical(&PhysicalParameters {
                orbit,
                offsets_kms: Vec::new(),
                jitters_kms: Vec::new(),
            })
            .expect("parameter vector");
        (model, x)
    }

    #[test]
    fn residual_table_agrees_with_a_hand_computation() {
        // Measurements invented as the hand-computed position plus known
        // offsets, at three epochs: two polar, one Cartesian with a
        // correlated error pair.
        let (rho80, theta80) = polar(hand_position(1980.0));
        // Meeus, Example 57.a, gives theta = 318.4 deg, rho = 0.411 arcsec
        // for 1980.0 (to full precision 318.42426 deg, 411.0178 mas,
        // docs/REFERENCE-VALUES.md): the hand computation is the book's.
        assert!((theta80 - 318.42426).abs() < 2e-5, "{theta80}");
        assert!((rho80 - 411.0178).abs() < 2e-4, "{rho80}");
        let (rho60, theta60) = polar(hand_position(1960.5));
        let (dra90, ddec90) = hand_position(1990.25);
        let epochs = vec![
            AstrometryEpoch {
                t_jd: jd(1980.0),
                position: RelativePosition::Polar {
                    sep_mas: rho80 + 2.0,
                    sep_err_mas: 4.0,
                    pa_rad: (theta80 + 0.3).to_radians(),
                    pa_err_rad: 0.5f64.to_radians(),
                    corr: 0.0,
                },
                source: Some("speckle, 4 m".into()),
            },
            AstrometryEpoch {
                t_jd: jd(1960.5),
                position: RelativePosition::Polar {
                    sep_mas: rho60 - 5.0,
                    sep_err_mas: 10.0,
                    pa_rad: (theta60 - 1.2).rem_euclid(360.0).to_radians(),
                    pa_err_rad: 0.8f64.to_radians(),
                    corr: 0.0,
                },
                source: None,
            },
            AstrometryEpoch {
                t_jd: jd(1990.25),
                position: RelativePosition::Cartesian {
                    dra_mas: dra90 + 1.5,
                    ddec_mas: ddec90 - 2.5,
                    dra_err_mas: 3.0,
                    ddec_err_mas: 2.0,
                    corr: 0.3,
                },
                source: Some("space".into()),
            },
        ];
        let (model, x) = model_and_point(epochs);
        let rows = residual_rows(&model, &x).expect("rows");
        assert_eq!(rows.len(), 3);

        let r = &rows[0];
        assert_eq!(r.form, MeasuredForm::Polar);
        assert_eq!(r.source, "speckle, 4 m");
        assert!((r.t_jyear - 1980.0).abs() < 1e-9);
        assert!((r.model[0] - rho80).abs() < 1e-6, "{:?}", r.model);
        assert!((r.model[1] - theta80).abs() < 1e-7, "{:?}", r.model);
        assert!((r.residual[0] - 2.0).abs() < 1e-6);
        assert!((r.residual[1] - 0.3).abs() < 1e-7);
        assert!((r.residual[0] / r.error[0] - 0.5).abs() < 1e-6);
        assert!((r.residual[1] / r.error[1] - 0.6).abs() < 1e-6);
        assert!((r.chi_square - (0.25 + 0.36)).abs() < 1e-5);

        let r = &rows[1];
        assert_eq!(r.source, "");
        assert!((r.residual[0] + 5.0).abs() < 1e-6);
        assert!((r.residual[1] + 1.2).abs() < 1e-6, "{:?}", r.residual);

        let r = &rows[2];
        assert_eq!(r.form, MeasuredForm::Cartesian);
        assert!((r.model[0] - dra90).abs() < 1e-6 && (r.model[1] - ddec90).abs() < 1e-6);
        assert!((r.residual[0] - 1.5).abs() < 1e-6 && (r.residual[1] + 2.5).abs() < 1e-6);
        // (z1^2 - 2 rho z1 z2 + z2^2) / (1 - rho^2), z = (0.5, -1.25).
        let expected = (0.25 + 2.0 * 0.3 * 0.5 * 1.25 + 1.5625) / (1.0 - 0.09);
        assert!((r.chi_square - expected).abs() < 1e-5, "{}", r.chi_square);
    }

    #[test]
    fn nodes_lie_at_the_node_position_angle_and_periastron_at_rho_a_one_minus_e() {
        let (model, x) = model_and_point(vec![AstrometryEpoch {
            t_jd: jd(1980.0),
            position: RelativePosition::Polar {
                sep_mas: 411.0,
                sep_err_mas: 4.0,
                pa_rad: 318.4f64.to_radians(),
                pa_err_rad: 0.01,
                corr: 0.0,
            },
            source: None,
        }]);
        let (nodes, peri) = sky_marks(&model, &x).expect("marks");
        // At the nodes the position angle is Omega or Omega + 180 (common
        // practice: the line of nodes has position angle Omega).
        let pa = |p: (f64, f64)| polar(p).1;
        let d = (pa(nodes.ascending) - NODE_DEG).rem_euclid(180.0);
        assert!(d.min(180.0 - d) < 1e-7, "{}", pa(nodes.ascending));
        let d = (pa(nodes.descending) - NODE_DEG).rem_euclid(180.0);
        assert!(d.min(180.0 - d) < 1e-7, "{}", pa(nodes.descending));
        // Radius at the nodes r = a (1 - e^2) / (1 ± e cos omega): the sky
        // projection leaves points on the line of nodes unshortened.
        let w = OMEGA_DEG.to_radians();
        let r_asc = A_MAS * (1.0 - E * E) / (1.0 + E * w.cos());
        assert!((polar(nodes.ascending).0 - r_asc).abs() < 1e-6);
        let r_desc = A_MAS * (1.0 - E * E) / (1.0 - E * w.cos());
        assert!((polar(nodes.descending).0 - r_desc).abs() < 1e-6);
        // Periastron: the hand position at T.
        let (px, py) = hand_position(T_YR);
        assert!((peri.0 - px).abs() < 1e-6 && (peri.1 - py).abs() < 1e-6);
        assert!(!nodes.ascending_known, "astrometry alone: node modulo 180");
    }
}
