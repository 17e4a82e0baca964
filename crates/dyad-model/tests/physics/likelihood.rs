//! The log-likelihood against an independent hand computation, and its
//! maximum at the true parameters of noise-free data.

use std::f64::consts::PI;

use dyad_model::data::{AstrometryEpoch, Dataset, RelativePosition, Star, VelocityPoint};
use dyad_model::likelihood::Model;
use dyad_model::params::ScaledPrior;
use dyad_model::params::{ModelPriors, PhysicalParameters};
use dyad_model::prior::Prior;
use dyad_orbit::kepler::solve_kepler;

use crate::common::{invented_physical, small_joint_dataset};

/// ln of the bivariate normal density of residual (r1, r2) with errors
/// (s1, s2) and correlation c, written out from the textbook formula
/// (e.g. any statistics text: N(r; 0, C) = exp(-r^T C^-1 r / 2) / (2 pi sqrt(det C))).
fn ln_bivariate(r1: f64, r2: f64, s1: f64, s2: f64, c: f64) -> f64 {
    let c11 = s1 * s1;
    let c22 = s2 * s2;
    let c12 = c * s1 * s2;
    let det = c11 * c22 - c12 * c12;
    // Explicit 2x2 inverse: [[c22, -c12], [-c12, c11]] / det.
    let q = (c22 * r1 * r1 - 2.0 * c12 * r1 * r2 + c11 * r2 * r2) / det;
    -(2.0 * PI).ln() - 0.5 * det.ln() - 0.5 * q
}

/// ln of the normal density, written out.
fn ln_normal(r: f64, s: f64) -> f64 {
    -0.5 * (2.0 * PI * s * s).ln() - 0.5 * r * r / (s * s)
}

#[test]
fn likelihood_matches_hand_computation() {
    // Data: one polar epoch, one Cartesian epoch, one primary and one
    // secondary velocity (two instruments with different jitters).
    let mut data = small_joint_dataset();
    data.astrometry.truncate(1);
    data.astrometry[0].position = RelativePosition::Polar {
        sep_mas: 131.0,
        sep_err_mas: 1.7,
        pa_rad: 1.95,
        pa_err_rad: 0.012,
        corr: 0.2,
    };
    data.astrometry.push(AstrometryEpoch {
        t_jd: 2_452_300.0,
        position: RelativePosition::Cartesian {
            dra_mas: -60.0,
            ddec_mas: 85.0,
            dra_err_mas: 1.1,
            ddec_err_mas: 2.3,
            corr: -0.4,
        },
        source: None,
    });
    data.velocities = vec![
        VelocityPoint {
            t_jd: 2_450_700.0,
            rv_kms: 8.1,
            rv_err_kms: 0.4,
            star: Star::Primary,
            instrument: 0,
        },
        VelocityPoint {
            t_jd: 2_451_900.0,
            rv_kms: 19.5,
            rv_err_kms: 0.6,
            star: Star::Secondary,
            instrument: 1,
        },
    ];
    let truth = invented_physical();
    let model = Model::new(data.clone(), &ModelPriors::defaults(&data)).unwrap();
    let x = model.layout().from_physical(&truth).unwrap();
    let got = model.log_likelihood(&x);

    let expected = hand_log_likelihood(&data, &truth);
    assert!(
        (got - expected).abs() < 1e-9 * expected.abs().max(1.0),
        "model {got} vs hand computation {expected}"
    );
    // The posterior is prior + likelihood.
    let lp = model.log_prior(&x);
    assert!(lp.is_finite());
    assert!((model.log_posterior(&x) - (lp + got)).abs() < 1e-12 * got.abs().max(1.0));
}

/// ln L written out independently from docs/DESIGN.md and first principles
/// (Kepler's third law, Thiele-Innes constants, the true anomaly from E),
/// one observation at a time.
fn hand_log_likelihood(data: &Dataset, truth: &PhysicalParameters) -> f64 {
    // Independent computation from docs/DESIGN.md and first principles.
    let o = &truth.orbit;
    let (p, t0, e, w) = (o.period_days, o.t_peri_jd, o.eccentricity, o.omega_rad);
    let (inc, node, mtot, plx, q) = (
        o.inclination_rad.unwrap(),
        o.node_rad.unwrap(),
        o.total_mass_msun.unwrap(),
        o.parallax_mas.unwrap(),
        o.mass_ratio.unwrap(),
    );
    // Kepler's third law with IAU 2015 B3 GM_sun and IAU 2012 au:
    // M = (4 pi^2 / GM[au^3/yr^2]) a^3 / P^2.
    let au_m = 149_597_870_700.0_f64;
    let year_s = 365.25 * 86_400.0;
    let gm = 1.3271244e20 / au_m.powi(3) * year_s * year_s;
    let p_yr = p / 365.25;
    let a_au = (mtot * p_yr * p_yr * gm / (4.0 * PI * PI)).cbrt();
    let a = a_au * plx;
    // Thiele-Innes constants (docs/DESIGN.md).
    let (cw, sw, cn, sn, ci) = (w.cos(), w.sin(), node.cos(), node.sin(), inc.cos());
    let ta = a * (cw * cn - sw * sn * ci);
    let tb = a * (cw * sn + sw * cn * ci);
    let tf = a * (-sw * cn - cw * sn * ci);
    let tg = a * (-sw * sn + cw * cn * ci);
    let position = |t: f64| {
        let ea = solve_kepler(2.0 * PI * (t - t0) / p, e).e_anom;
        let xx = ea.cos() - e;
        let yy = (1.0 - e * e).sqrt() * ea.sin();
        (tb * xx + tg * yy, ta * xx + tf * yy) // (dRA*, dDec)
    };
    let shape = |t: f64| {
        let ea = solve_kepler(2.0 * PI * (t - t0) / p, e).e_anom;
        // True anomaly: tan(nu/2) = sqrt((1+e)/(1-e)) tan(E/2).
        let nu =
            2.0 * ((1.0 + e).sqrt() * (ea / 2.0).sin()).atan2((1.0 - e).sqrt() * (ea / 2.0).cos());
        (nu + w).cos() + e * w.cos()
    };
    // K = 2 pi a sin i / (P sqrt(1 - e^2)) in km/s.
    let k = 2.0 * PI * a_au * au_m / 1000.0 * inc.sin() / (p * 86_400.0 * (1.0 - e * e).sqrt());

    let mut expected = 0.0;
    for epoch in &data.astrometry {
        let (dra, ddec) = position(epoch.t_jd);
        match epoch.position {
            RelativePosition::Polar {
                sep_mas,
                sep_err_mas,
                pa_rad,
                pa_err_rad,
                corr,
            } => {
                let rho = dra.hypot(ddec);
                let theta = dra.atan2(ddec);
                let mut d = pa_rad - theta;
                while d > PI {
                    d -= 2.0 * PI;
                }
                while d <= -PI {
                    d += 2.0 * PI;
                }
                expected += ln_bivariate(sep_mas - rho, d, sep_err_mas, pa_err_rad, corr);
            }
            RelativePosition::Cartesian {
                dra_mas,
                ddec_mas,
                dra_err_mas,
                ddec_err_mas,
                corr,
            } => {
                expected += ln_bivariate(
                    dra_mas - dra,
                    ddec_mas - ddec,
                    dra_err_mas,
                    ddec_err_mas,
                    corr,
                );
            }
        }
    }
    for v in &data.velocities {
        let v_rel = k * shape(v.t_jd);
        let gamma = truth.offsets_kms[v.instrument];
        let model_v = match v.star {
            Star::Primary => gamma - q / (1.0 + q) * v_rel,
            Star::Secondary => gamma + v_rel / (1.0 + q),
        };
        let s = (v.rv_err_kms.powi(2) + truth.jitters_kms[v.instrument].powi(2)).sqrt();
        expected += ln_normal(v.rv_kms - model_v, s);
    }
    expected
}

/// The same hand computation on a larger, unordered data set: more epochs
/// than one block of the batched evaluation and not a multiple of it,
/// polar and Cartesian epochs interleaved, double-lined epochs (both stars
/// at one instant, which share a Kepler solve), a star measured twice at
/// one instant, errors that vary from point to point and two instruments
/// taking turns.
#[test]
fn likelihood_matches_hand_computation_on_many_mixed_epochs() {
    let mut data = small_joint_dataset();
    data.astrometry.clear();
    data.velocities.clear();
    for n in 0..23 {
        let t_jd = 2_449_800.0 + 173.0 * n as f64;
        let f = n as f64;
        let position = if n % 3 == 1 {
            RelativePosition::Cartesian {
                dra_mas: -60.0 + 7.0 * f,
                ddec_mas: 85.0 - 3.0 * f,
                dra_err_mas: 1.1 + 0.05 * f,
                ddec_err_mas: 2.3,
                corr: -0.4,
            }
        } else {
            RelativePosition::Polar {
                sep_mas: 110.0 + 2.0 * f,
                sep_err_mas: 1.7 + 0.1 * f,
                // Some far from the model, so both arctangent paths run.
                pa_rad: (0.3 * f) % (2.0 * PI),
                pa_err_rad: 0.012,
                corr: 0.2,
            }
        };
        data.astrometry.push(AstrometryEpoch {
            t_jd,
            position,
            source: None,
        });
    }
    for n in 0..37 {
        let f = n as f64;
        // Every third instant has both stars, from the same instrument.
        let t_jd = 2_450_100.0 + 97.0 * (n / 3 * 2 + (n % 3).min(1)) as f64;
        let star = if n % 3 == 1 {
            Star::Secondary
        } else {
            Star::Primary
        };
        data.velocities.push(VelocityPoint {
            t_jd,
            rv_kms: 5.0 + 0.7 * f,
            rv_err_kms: 0.3 + 0.02 * f,
            star,
            instrument: (n / 3) % 2,
        });
    }
    // The primary measured twice at one instant by one instrument.
    let again = data.velocities[0].clone();
    data.velocities.push(VelocityPoint {
        rv_kms: again.rv_kms + 0.5,
        ..again
    });
    let truth = invented_physical();
    let model = Model::new(data.clone(), &ModelPriors::defaults(&data)).unwrap();
    let x = model.layout().from_physical(&truth).unwrap();
    let got = model.log_likelihood(&x);
    let expected = hand_log_likelihood(&data, &truth);
    assert!(
        (got - expected).abs() < 1e-9 * expected.abs().max(1.0),
        "model {got} vs hand computation {expected}"
    );
}

#[test]
fn position_angle_residual_is_wrapped() {
    // A measured PA of 359.9 deg against a model near 0.1 deg is a 0.2 deg
    // residual, not 359.8 deg (common practice). Compare observed PAs that
    // differ by exactly 360 deg: the likelihood must not change.
    let truth = invented_physical();
    let make = |pa_rad: f64| {
        let data = Dataset {
            astrometry: vec![AstrometryEpoch {
                t_jd: 2_451_000.0,
                position: RelativePosition::Polar {
                    sep_mas: 100.0,
                    sep_err_mas: 1.0,
                    pa_rad,
                    pa_err_rad: 0.01,
                    corr: 0.0,
                },
                source: None,
            }],
            ..Dataset::default()
        };
        Model::new(data.clone(), &ModelPriors::defaults(&data)).unwrap()
    };
    let base = make(0.0);
    let x = base.layout().from_physical(&truth).unwrap();
    let theta = base
        .predict_position(&x, 2_451_000.0)
        .unwrap()
        .position_angle_rad();
    let near = make(theta + 0.003);
    let shifted = make(theta + 0.003 - 2.0 * PI);
    let a = near.log_likelihood(&x);
    let b = shifted.log_likelihood(&x);
    assert!((a - b).abs() < 1e-9, "{a} vs {b}");
    // And the residual is the small one: chi^2 = (0.003 / 0.01)^2 plus the separation term.
    let r = near.residuals(&x).unwrap();
    assert!((r.astrometry[0].residual[1] - 0.003).abs() < 1e-9);
}

/// Noise-free joint data made from `truth`, with zero jitter.
fn noise_free_model() -> (Model, Vec<f64>) {
    let mut data = small_joint_dataset();
    let truth = invented_physical();
    // First build a model only to predict the data.
    let predictor = Model::new(data.clone(), &ModelPriors::defaults(&data)).unwrap();
    let x = predictor.layout().from_physical(&truth).unwrap();
    data.astrometry.clear();
    data.velocities.clear();
    for n in 0..14 {
        let t = 2_449_000.0 + 300.0 * n as f64;
        let s = predictor.predict_position(&x, t).unwrap();
        let position = if n % 2 == 0 {
            RelativePosition::Polar {
                sep_mas: s.separation(),
                sep_err_mas: 1.0,
                pa_rad: s.position_angle_rad(),
                pa_err_rad: 0.01,
                corr: 0.1,
            }
        } else {
            RelativePosition::Cartesian {
                dra_mas: s.dra,
                ddec_mas: s.ddec,
                dra_err_mas: 1.0,
                ddec_err_mas: 1.2,
                corr: -0.2,
            }
        };
        data.astrometry.push(AstrometryEpoch {
            t_jd: t,
            position,
            source: None,
        });
    }
    for n in 0..20 {
        let t = 2_449_100.0 + 210.0 * n as f64;
        let star = if n % 2 == 0 {
            Star::Primary
        } else {
            Star::Secondary
        };
        let instrument = (n / 2) % 2;
        let v = predictor.velocity_model(&x, t, star, instrument).unwrap();
        data.velocities.push(VelocityPoint {
            t_jd: t,
            rv_kms: v,
            rv_err_kms: 0.2,
            star,
            instrument,
        });
    }
    let mut priors = ModelPriors::defaults(&data);
    // Zero jitter: noise-free data would otherwise pull it to zero.
    priors.jitter_kms = vec![ScaledPrior::internal(Prior::fixed(0.0).unwrap()); 2];
    let model = Model::new(data, &priors).unwrap();
    let mut truth0 = truth;
    truth0.jitters_kms = vec![0.0, 0.0];
    let x = model.layout().from_physical(&truth0).unwrap();
    (model, x)
}

/// Analytic: with noise-free data every residual is zero at the truth, so
/// chi^2 = 0 is its global minimum and the (fixed-error) likelihood its
/// maximum; moving any parameter that changes a model value lowers ln L.
#[test]
fn noise_free_data_peak_at_the_truth() {
    let (model, x) = noise_free_model();
    assert_eq!(model.dim(), 13, "{:?}", model.parameter_names());
    let best = model.log_likelihood(&x);
    assert!(best.is_finite());
    for i in 0..model.dim() {
        for sign in [-1.0, 1.0] {
            let mut y = x.clone();
            y[i] += sign * 1e-3;
            let ll = model.log_likelihood(&y);
            assert!(
                ll < best - 1e-9,
                "moving {} by {} raised ln L from {best} to {ll}",
                model.parameter_names()[i],
                sign * 1e-3
            );
        }
    }
}

/// Self-consistency: to_physical and from_physical are inverse maps.
#[test]
fn physical_round_trip() {
    let (model, x) = noise_free_model();
    let p = model.layout().to_physical(&x).unwrap();
    let y = model.layout().from_physical(&p).unwrap();
    for (a, b) in x.iter().zip(&y) {
        assert!((a - b).abs() < 1e-10, "{x:?} vs {y:?}");
    }
    let truth = invented_physical().orbit;
    let o = p.orbit;
    assert!((o.period_days - truth.period_days).abs() < 1e-9);
    assert!((o.eccentricity - truth.eccentricity).abs() < 1e-12);
    assert!((o.omega_rad - truth.omega_rad).abs() < 1e-12);
    // T_peri may differ by whole periods.
    let cycles = (o.t_peri_jd - truth.t_peri_jd) / truth.period_days;
    assert!((cycles - cycles.round()).abs() < 1e-9);
    assert!((o.inclination_rad.unwrap() - 0.9).abs() < 1e-12);
    assert!((o.node_rad.unwrap() - 2.2).abs() < 1e-12);
}

#[test]
fn velocity_likelihood_is_the_sum_of_gaussians_for_any_number_of_instruments() {
    // Velocities alone, with 2 and with 20 instruments (the latter beyond
    // the stack cache of per-instrument terms): ln L must equal the sum of
    // normal log-densities of the residuals with sigma^2 = err^2 + s_k^2
    // (docs/DESIGN.md), errors varying from point to point.
    for n_inst in [2usize, 20] {
        let mut data = Dataset {
            instruments: (0..n_inst).map(|k| format!("i{k}")).collect(),
            ..Dataset::default()
        };
        for n in 0..60 {
            data.velocities.push(VelocityPoint {
                t_jd: 2_450_000.0 + 37.0 * n as f64,
                rv_kms: 5.0 * ((n as f64) * 0.7).sin(),
                rv_err_kms: if n % 3 == 0 {
                    0.4
                } else {
                    0.25 + 0.01 * (n % 5) as f64
                },
                star: if n % 4 == 1 {
                    Star::Secondary
                } else {
                    Star::Primary
                },
                instrument: (n * 7) % n_inst,
            });
        }
        let model = Model::new(data.clone(), &ModelPriors::defaults(&data)).unwrap();
        let mut rng = <rand_xoshiro::Xoshiro256PlusPlus as rand::SeedableRng>::seed_from_u64(3);
        for _ in 0..5 {
            let mut x = model.layout().sample_prior(&mut rng);
            // A period comparable to the span, so the shape matters.
            x[model.layout().period_index().unwrap()] = 900f64.ln();
            let r = model.residuals(&x).unwrap();
            let expected: f64 = r
                .velocities
                .iter()
                .map(|v| ln_normal(v.residual_kms, v.error_kms))
                .sum();
            let got = model.log_likelihood(&x);
            assert!(
                (got - expected).abs() < 1e-9 * expected.abs().max(1.0),
                "{n_inst}: {got} vs {expected}"
            );
        }
    }
}
