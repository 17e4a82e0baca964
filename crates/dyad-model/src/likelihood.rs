//! The joint log-likelihood of relative astrometry and radial velocities,
//! and the log-posterior the sampler explores.
//!
//! Errors are Gaussian and fully normalised, so that evidences computed from
//! these densities are meaningful (the normalisation depends on the data
//! only through the error bars, and, for velocities, on the jitter):
//!
//! - Astrometry, per epoch, in the form measured: polar epochs give the
//!   residual r = (rho_obs - rho_model, wrap(theta_obs - theta_model)) with
//!   the PA residual wrapped to (-pi, pi]; Cartesian epochs give
//!   r = (dRA*_obs - dRA*_model, dDec_obs - dDec_model). With the 2x2
//!   covariance C built from the two errors and their correlation,
//!   ln L = -0.5 r^T C^-1 r - 0.5 ln det(2 pi C).
//! - Velocities: sigma^2 = err^2 + s_k^2 with s_k the jitter of instrument k,
//!   ln L = -0.5 (v_obs - v_model)^2 / sigma^2 - 0.5 ln(2 pi sigma^2).
//!
//! Models: a_au from Kepler's third law (`laws::semi_major_axis_au`),
//! a_mas = a_au * parallax; positions from `dyad_orbit::Orbit`; the relative
//! semi-amplitude K from `laws::relative_semi_amplitude_kms` and the stars'
//! velocities from `velocity::{primary_velocity, secondary_velocity}`
//! (DESIGN.md "Kinematics"). With velocities alone, v1 = gamma - K1 * shape
//! and v2 = gamma + K2 * shape.
//!
//! Nothing is allocated per call: inverse covariances and normalising
//! constants are computed once in [`Model::new`].

use std::f64::consts::{PI, TAU};

use dyad_orbit::{laws, velocity, Orbit};

use crate::config::RunConfig;
use crate::data::{Dataset, RelativePosition, Star};
use crate::error::ModelError;
use crate::params::{FitMode, ModelPriors, OrbitalParameters, ParameterLayout};

/// ln(2 pi).
const LN_2PI: f64 = 1.837_877_066_409_345_5;

/// What an astrometric epoch measured.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Measured {
    /// Separation (mas) and position angle (rad).
    Polar { sep_mas: f64, pa_rad: f64 },
    /// dRA* and dDec (mas).
    Cartesian { dra_mas: f64, ddec_mas: f64 },
}

/// One astrometric epoch ready for evaluation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct AstrometryTerm {
    pub t_jd: f64,
    pub measured: Measured,
    /// Inverse covariance (c11, c12, c22) of the residual pair.
    pub inv: [f64; 3],
}

/// One velocity ready for evaluation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct VelocityTerm {
    pub t_jd: f64,
    pub rv_kms: f64,
    pub err_sq: f64,
    pub star: Star,
    pub instrument: usize,
}

/// Inverse of the 2x2 covariance of errors (s1, s2) with correlation c, and
/// ln det(2 pi C) = 2 ln(2 pi) + ln(s1^2 s2^2 (1 - c^2)).
fn inverse_covariance(s1: f64, s2: f64, c: f64) -> Result<([f64; 3], f64), String> {
    if !(s1 > 0.0 && s2 > 0.0 && s1.is_finite() && s2.is_finite()) {
        return Err(format!(
            "errors must be positive and finite, got {s1} and {s2}"
        ));
    }
    if !(c > -1.0 && c < 1.0) {
        return Err(format!("error correlation must be in (-1, 1), got {c}"));
    }
    let one_m_c2 = 1.0 - c * c;
    let inv = [
        1.0 / (s1 * s1 * one_m_c2),
        -c / (s1 * s2 * one_m_c2),
        1.0 / (s2 * s2 * one_m_c2),
    ];
    let ln_det_2pi_c = 2.0 * LN_2PI + (s1 * s1 * s2 * s2 * one_m_c2).ln();
    Ok((inv, ln_det_2pi_c))
}

/// An angle difference wrapped to (-pi, pi].
#[inline]
pub fn wrap_angle(d: f64) -> f64 {
    let r = d - TAU * (d / TAU).round();
    if r <= -PI {
        r + TAU
    } else if r > PI {
        r - TAU
    } else {
        r
    }
}

/// The posterior of one binary: data, priors and the parameter layout.
#[derive(Debug, Clone)]
pub struct Model {
    layout: ParameterLayout,
    dataset: Dataset,
    pub(crate) astrometry: Vec<AstrometryTerm>,
    pub(crate) velocities: Vec<VelocityTerm>,
    /// Sum over epochs of -0.5 ln det(2 pi C).
    astrometry_ln_norm: f64,
}

impl Model {
    /// Builds the model of a data set under the given priors.
    pub fn new(dataset: Dataset, priors: &ModelPriors) -> Result<Self, ModelError> {
        let layout = ParameterLayout::new(&dataset, priors)?;
        let mut astrometry = Vec::with_capacity(dataset.astrometry.len());
        let mut astrometry_ln_norm = 0.0;
        for (n, epoch) in dataset.astrometry.iter().enumerate() {
            let (measured, s1, s2, c) = match epoch.position {
                RelativePosition::Polar {
                    sep_mas,
                    sep_err_mas,
                    pa_rad,
                    pa_err_rad,
                    corr,
                } => (
                    Measured::Polar { sep_mas, pa_rad },
                    sep_err_mas,
                    pa_err_rad,
                    corr,
                ),
                RelativePosition::Cartesian {
                    dra_mas,
                    ddec_mas,
                    dra_err_mas,
                    ddec_err_mas,
                    corr,
                } => (
                    Measured::Cartesian { dra_mas, ddec_mas },
                    dra_err_mas,
                    ddec_err_mas,
                    corr,
                ),
            };
            let (inv, ln_det) = inverse_covariance(s1, s2, c).map_err(|m| {
                ModelError::InvalidModel(format!("astrometric epoch {}: {m}", n + 1))
            })?;
            astrometry_ln_norm -= 0.5 * ln_det;
            astrometry.push(AstrometryTerm {
                t_jd: epoch.t_jd,
                measured,
                inv,
            });
        }
        let mut velocities = Vec::with_capacity(dataset.velocities.len());
        for (n, v) in dataset.velocities.iter().enumerate() {
            if !(v.rv_err_kms > 0.0 && v.rv_err_kms.is_finite())
                || v.instrument >= dataset.instruments.len()
            {
                return Err(ModelError::InvalidModel(format!(
                    "velocity {}: error must be positive and the instrument known",
                    n + 1
                )));
            }
            velocities.push(VelocityTerm {
                t_jd: v.t_jd,
                rv_kms: v.rv_kms,
                err_sq: v.rv_err_kms * v.rv_err_kms,
                star: v.star,
                instrument: v.instrument,
            });
        }
        Ok(Self {
            layout,
            dataset,
            astrometry,
            velocities,
            astrometry_ln_norm,
        })
    }

    /// Loads the data named by a run configuration and builds the model
    /// with its priors.
    pub fn from_config(config: &RunConfig) -> Result<Self, ModelError> {
        let dataset = config.load_dataset()?;
        let priors = config.model_priors(&dataset)?;
        Self::new(dataset, &priors)
    }

    /// Number of sampled coordinates.
    pub fn dim(&self) -> usize {
        self.layout.dim()
    }

    /// Names of the sampled coordinates.
    pub fn parameter_names(&self) -> &[String] {
        self.layout.names()
    }

    /// Units of the sampled coordinates.
    pub fn parameter_units(&self) -> &[String] {
        self.layout.units()
    }

    /// The parameter layout (maps to and from physical parameters).
    pub fn layout(&self) -> &ParameterLayout {
        &self.layout
    }

    /// The data.
    pub fn dataset(&self) -> &Dataset {
        &self.dataset
    }

    /// Which data the model explains.
    pub fn mode(&self) -> FitMode {
        self.layout.mode()
    }

    /// Number of scalar observations (2 per astrometric epoch, 1 per velocity).
    pub fn observation_count(&self) -> usize {
        2 * self.astrometry.len() + self.velocities.len()
    }

    /// ln prior density of the sampled coordinates (Jacobians included).
    #[inline]
    pub fn log_prior(&self, x: &[f64]) -> f64 {
        self.layout.log_prior(x)
    }

    /// ln likelihood; `-inf` where the parameters do not describe a bound
    /// orbit. Allocates nothing.
    pub fn log_likelihood(&self, x: &[f64]) -> f64 {
        match self.layout.orbital(x) {
            Some(o) => self.log_likelihood_of(&o, x),
            None => f64::NEG_INFINITY,
        }
    }

    /// ln prior + ln likelihood (the likelihood is not evaluated where the
    /// prior is zero).
    pub fn log_posterior(&self, x: &[f64]) -> f64 {
        let lp = self.log_prior(x);
        if lp == f64::NEG_INFINITY {
            return lp;
        }
        let ll = self.log_likelihood(x);
        let total = lp + ll;
        if total.is_nan() {
            f64::NEG_INFINITY
        } else {
            total
        }
    }

    /// The factors (c1, c2) with v_star = gamma + c_star * rv_shape
    /// (zero for a star the model has no amplitude for).
    #[inline]
    pub(crate) fn velocity_factors(&self, o: &OrbitalParameters) -> (f64, f64) {
        match self.layout.mode() {
            FitMode::VelocitiesOnly => (-o.k1_kms.unwrap_or(0.0), o.k2_kms.unwrap_or(0.0)),
            _ => {
                let k = match (o.semi_major_axis_au, o.inclination_rad) {
                    (Some(a), Some(i)) => {
                        laws::relative_semi_amplitude_kms(a, o.period_days, o.eccentricity, i)
                    }
                    _ => 0.0,
                };
                let q = o.mass_ratio.unwrap_or(0.0);
                // velocity::primary_velocity(0, q, K) = -q/(1+q) K, etc.
                (
                    velocity::primary_velocity(0.0, q, k),
                    velocity::secondary_velocity(0.0, q, k),
                )
            }
        }
    }

    fn log_likelihood_of(&self, o: &OrbitalParameters, x: &[f64]) -> f64 {
        let orbit = match Orbit::new(&o.campbell_elements()) {
            Ok(orbit) => orbit,
            Err(_) => return f64::NEG_INFINITY,
        };
        let mut chi2 = 0.0;
        for term in &self.astrometry {
            let s = orbit.state(term.t_jd);
            let (r1, r2) = match term.measured {
                Measured::Polar { sep_mas, pa_rad } => {
                    let sep = s.dra.hypot(s.ddec);
                    let pa = s.dra.atan2(s.ddec);
                    (sep_mas - sep, wrap_angle(pa_rad - pa))
                }
                Measured::Cartesian { dra_mas, ddec_mas } => (dra_mas - s.dra, ddec_mas - s.ddec),
            };
            let [c11, c12, c22] = term.inv;
            chi2 += c11 * r1 * r1 + 2.0 * c12 * r1 * r2 + c22 * r2 * r2;
        }
        let mut ll = self.astrometry_ln_norm - 0.5 * chi2;
        if !self.velocities.is_empty() {
            let (c1, c2) = self.velocity_factors(o);
            for term in &self.velocities {
                let shape = orbit.state(term.t_jd).rv_shape;
                let gamma = self.layout.offset_kms(x, term.instrument);
                let jitter = self.layout.jitter_kms(x, term.instrument);
                let model = match term.star {
                    Star::Primary => gamma + c1 * shape,
                    Star::Secondary => gamma + c2 * shape,
                };
                let var = term.err_sq + jitter * jitter;
                let r = term.rv_kms - model;
                ll -= 0.5 * (r * r / var + LN_2PI + var.ln());
            }
        }
        if ll.is_nan() {
            f64::NEG_INFINITY
        } else {
            ll
        }
    }
}
