//! The per-source astrometric error model (normalised densities, the
//! Student t's closed form) and the orbital parallax from the velocities.

use std::f64::consts::PI;

use dyad_model::astrometry_errors::ResidualDistribution;
use dyad_model::data::{AstrometryEpoch, RelativePosition, Star, VelocityPoint};
use dyad_model::likelihood::Model;
use dyad_model::params::{ModelPriors, ScaledPrior};
use dyad_model::prior::Prior;

use crate::common::{invented_physical, small_joint_dataset};

fn fixed(v: f64) -> ScaledPrior {
    ScaledPrior::internal(Prior::fixed(v).unwrap())
}

/// One Cartesian epoch observed at (dra, ddec) and the velocities of the
/// small joint data set; the model point is `invented_physical`.
fn one_epoch_model(
    dra: f64,
    ddec: f64,
    scale: f64,
    jitter: f64,
    nu: Option<f64>,
) -> (Model, Vec<f64>) {
    let mut data = small_joint_dataset();
    data.astrometry = vec![AstrometryEpoch {
        t_jd: 2_452_000.0,
        position: RelativePosition::Cartesian {
            dra_mas: dra,
            ddec_mas: ddec,
            dra_err_mas: 1.5,
            ddec_err_mas: 2.5,
            corr: 0.3,
        },
        source: Some("speckle".into()),
    }];
    let mut priors = ModelPriors::defaults(&data);
    priors.astrometry_errors.scale = vec![fixed(scale)];
    priors.astrometry_errors.jitter_mas = vec![fixed(jitter)];
    if let Some(nu) = nu {
        priors.astrometry_errors.distribution = ResidualDistribution::StudentT(fixed(nu));
    }
    let model = Model::new(data, &priors).unwrap();
    let x = model.layout().from_physical(&invented_physical()).unwrap();
    (model, x)
}

/// The astrometric part of ln L: the full ln L less that of the velocities
/// (which do not depend on the astrometric epoch).
fn astrometric_ln_l(dra: f64, ddec: f64, scale: f64, jitter: f64, nu: Option<f64>) -> f64 {
    let (model, x) = one_epoch_model(dra, ddec, scale, jitter, nu);
    let (reference, xr) = one_epoch_model(0.0, 0.0, 1.0, 0.0, None);
    let r = reference.residuals(&xr).unwrap().astrometry[0];
    // The Gaussian with the quoted errors at (0, 0), by hand, to remove the velocity part.
    let (s1, s2, c) = (1.5, 2.5, 0.3);
    let (a, b) = (r.residual[0], r.residual[1]);
    let det = s1 * s1 * s2 * s2 * (1.0 - c * c);
    let q = (s2 * s2 * a * a - 2.0 * c * s1 * s2 * a * b + s1 * s1 * b * b) / det;
    let ln_velocities =
        reference.log_likelihood(&xr) - (-(2.0 * PI).ln() - 0.5 * det.ln() - 0.5 * q);
    model.log_likelihood(&x) - ln_velocities
}

/// A rescaled and widened Gaussian, and the Student t, by the closed forms:
/// C = s^2 C_quoted + j^2 I; ln p = ln Gamma((nu + 2)/2) - ln Gamma(nu/2)
/// minus ln(nu pi) + 0.5 ln det C + (nu + 2)/2 ln(1 + Q/nu) (Lange, Little
/// & Taylor 1989, eq. 1 with p = 2; Gamma(2.5)/Gamma(1.5) = 1.5, nu = 3).
#[test]
fn scaled_and_student_t_densities_match_their_closed_forms() {
    let (model, x) = one_epoch_model(0.0, 0.0, 1.0, 0.0, None);
    let model_at = model.residuals(&x).unwrap().astrometry[0].model;
    let (dra, ddec) = (model_at.dra + 4.0, model_at.ddec - 3.0);
    let (s, j): (f64, f64) = (1.7, 0.8);
    let c11 = s * s * 1.5 * 1.5 + j * j;
    let c22 = s * s * 2.5 * 2.5 + j * j;
    let c12 = s * s * 0.3 * 1.5 * 2.5;
    let det = c11 * c22 - c12 * c12;
    let q = (c22 * 16.0 + 2.0 * c12 * 12.0 + c11 * 9.0) / det;
    let normal = -(2.0f64 * PI).ln() - 0.5 * det.ln() - 0.5 * q;
    let got = astrometric_ln_l(dra, ddec, s, j, None);
    assert!((got - normal).abs() < 1e-9, "{got} vs {normal}");
    let nu: f64 = 3.0;
    let t = 1.5f64.ln() - (nu * PI).ln() - 0.5 * det.ln() - 0.5 * (nu + 2.0) * (1.0 + q / nu).ln();
    let got = astrometric_ln_l(dra, ddec, s, j, Some(nu));
    assert!((got - t).abs() < 1e-9, "{got} vs {t}");
}

/// Both densities integrate to 1 over the measured position (the evidence
/// stays meaningful): a Riemann sum over +-40 sigma.
#[test]
fn the_error_model_densities_are_normalised() {
    let (model, x) = one_epoch_model(0.0, 0.0, 1.0, 0.0, None);
    let centre = model.residuals(&x).unwrap().astrometry[0].model;
    for nu in [None, Some(6.0)] {
        let (s, j): (f64, f64) = (1.3, 0.7);
        let half = 40.0 * 3.5;
        let n = 160;
        let h = 2.0 * half / n as f64;
        let mut sum = 0.0;
        for a in 0..n {
            for b in 0..n {
                let dra = centre.dra - half + (a as f64 + 0.5) * h;
                let ddec = centre.ddec - half + (b as f64 + 0.5) * h;
                sum += astrometric_ln_l(dra, ddec, s, j, nu).exp() * h * h;
            }
        }
        assert!((sum - 1.0).abs() < 2e-3, "{nu:?}: integral {sum}");
    }
}

/// The orbital parallax from noise-free velocities of both stars equals
/// the true parallax, and agrees with the textbook relation
/// a sin i [km] = 13750.9871 (1 - e^2)^(1/2) K P [km/s, d]
/// (R. W. Hilditch, An Introduction to Close Binary Stars, 2001, eq. 2.46;
/// docs/REFERENCE-VALUES.md), parallax = a_mas sin i / (a sin i in au).
#[test]
fn orbital_parallax_from_exact_velocities_is_the_true_parallax() {
    let truth = invented_physical();
    let mut data = small_joint_dataset();
    let mut priors = ModelPriors::defaults(&data);
    priors.jitter_kms = vec![fixed(0.0); 2];
    let model = Model::new(data.clone(), &priors).unwrap();
    let x = model.layout().from_physical(&truth).unwrap();
    // Exact velocities at many epochs, with tiny errors.
    data.velocities = (0..40)
        .map(|k| {
            let t = 2_449_000.0 + 97.0 * k as f64;
            let star = if k % 2 == 0 {
                Star::Primary
            } else {
                Star::Secondary
            };
            let instrument = (k / 2) % 2;
            VelocityPoint {
                t_jd: t,
                rv_kms: model.velocity_model(&x, t, star, instrument).unwrap(),
                rv_err_kms: 1e-6,
                star,
                instrument,
            }
        })
        .collect();
    let model = Model::new(data, &priors).unwrap();
    let x = model.layout().from_physical(&truth).unwrap();
    let names = model.derived_names_units();
    let derived = model.derived(&x);
    let get = |n: &str| derived[names.iter().position(|(m, _)| m == n).unwrap()];
    let orbital = get("orbital_parallax_mas");
    assert!((orbital / 40.0 - 1.0).abs() < 1e-6, "{orbital}");
    let (k, p, e) = (
        get("k1_kms") + get("k2_kms"),
        get("period_days"),
        get("eccentricity"),
    );
    let a_sini_au = 13750.9871 * (1.0 - e * e).sqrt() * k * p / 149_597_870.7;
    let textbook =
        get("semi_major_axis_mas") * get("inclination_deg").to_radians().sin() / a_sini_au;
    assert!(
        (orbital / textbook - 1.0).abs() < 1e-6,
        "{orbital} vs {textbook}"
    );
}
