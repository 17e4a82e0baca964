//! Residuals (observed minus model) of every measurement at one parameter
//! vector, per-source residual statistics of the astrometry, and the model's
//! predictions of a position or a velocity at any epoch.

use dyad_orbit::{Orbit, SkyOffset};

use crate::astrometry_errors::astrometry_sources;
use crate::data::{RelativePosition, Star};
use crate::likelihood::{wrap_angle, Model};
use crate::params::OrbitalParameters;

/// How an astrometric residual is expressed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ResidualForm {
    /// (separation in mas, position angle in radians, wrapped to (-pi, pi]).
    Polar,
    /// (dRA* in mas, dDec in mas).
    Cartesian,
}

/// Observed minus model for one astrometric epoch.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AstrometryResidual {
    /// Epoch, JD.
    pub t_jd: f64,
    /// The form the measurement was given in (units of the pairs below).
    pub form: ResidualForm,
    /// Observed minus model, in the form measured.
    pub residual: [f64; 2],
    /// 1-sigma errors as quoted, in the form measured.
    pub error: [f64; 2],
    /// Index of the epoch's source in `ParameterLayout::astrometry_sources`.
    pub source: usize,
    /// 1-sigma errors used in the fit (scaled and widened by the source's
    /// error model; the t's scale for Student-t residuals).
    pub error_used: [f64; 2],
    /// Q = r^T C^-1 r with the covariance used (chi-square with 2 degrees
    /// of freedom for normal residuals).
    pub quadratic_form: f64,
    /// Q with the errors as quoted.
    pub quadratic_form_quoted: f64,
    /// The epoch's weight in the fit: 1 with normal residuals, (nu + 2) /
    /// (nu + Q) with Student-t residuals (small for an outlier).
    pub weight: f64,
    /// The measured position as a sky offset (mas).
    pub observed: SkyOffset,
    /// The model position (mas).
    pub model: SkyOffset,
}

/// Observed minus model for one velocity.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct VelocityResidual {
    /// Epoch, JD.
    pub t_jd: f64,
    /// The star.
    pub star: Star,
    /// Index of the instrument in `Dataset::instruments`.
    pub instrument: usize,
    /// Measured velocity, km/s.
    pub observed_kms: f64,
    /// Model velocity (with the instrument's offset), km/s.
    pub model_kms: f64,
    /// Observed minus model, km/s.
    pub residual_kms: f64,
    /// The error used in the fit: sqrt(err^2 + jitter^2), km/s.
    pub error_kms: f64,
}

/// All residuals of one parameter vector, in data order.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Residuals {
    /// Astrometric epochs.
    pub astrometry: Vec<AstrometryResidual>,
    /// Velocities.
    pub velocities: Vec<VelocityResidual>,
}

/// Residual statistics of one astrometric source at one parameter vector.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct SourceStatistics {
    /// The source's name.
    pub name: String,
    /// Number of epochs.
    pub epochs: usize,
    /// Of which polar (separation and position angle).
    pub polar_epochs: usize,
    /// Root mean square of the separation residuals, mas (polar epochs).
    pub rms_separation_mas: Option<f64>,
    /// Root mean square of the position-angle residuals, deg (polar epochs).
    pub rms_position_angle_deg: Option<f64>,
    /// Root mean square of the dRA* and dDec residuals, mas (Cartesian epochs).
    pub rms_offset_mas: Option<f64>,
    /// Sum of Q = r^T C^-1 r with the covariance used.
    pub chi_square: f64,
    /// The same with the errors as quoted.
    pub chi_square_quoted: f64,
    /// Degrees of freedom: 2 per epoch, less the source's share of the
    /// sampled parameters (2 n_s p / N, N the number of observations).
    pub degrees_of_freedom: f64,
    /// The smallest epoch weight (1 with normal residuals).
    pub smallest_weight: f64,
}

impl Model {
    /// Residual statistics of every astrometric source at `x` (in the
    /// order of `ParameterLayout::astrometry_sources`), or `None` if `x` is
    /// outside the domain.
    pub fn astrometry_source_statistics(&self, x: &[f64]) -> Option<Vec<SourceStatistics>> {
        let residuals = self.residuals(x)?;
        let parameters_per_observation = self.dim() as f64 / self.observation_count().max(1) as f64;
        let out = self
            .layout()
            .astrometry_sources()
            .iter()
            .enumerate()
            .map(|(k, name)| {
                let mine: Vec<&AstrometryResidual> = residuals
                    .astrometry
                    .iter()
                    .filter(|r| r.source == k)
                    .collect();
                let rms = |form: ResidualForm, i: usize, scale: f64| {
                    let v: Vec<f64> = mine
                        .iter()
                        .filter(|r| r.form == form)
                        .map(|r| r.residual[i] * scale)
                        .collect();
                    (!v.is_empty())
                        .then(|| (v.iter().map(|a| a * a).sum::<f64>() / v.len() as f64).sqrt())
                };
                let offsets = {
                    let v: Vec<f64> = mine
                        .iter()
                        .filter(|r| r.form == ResidualForm::Cartesian)
                        .flat_map(|r| r.residual)
                        .collect();
                    (!v.is_empty())
                        .then(|| (v.iter().map(|a| a * a).sum::<f64>() / v.len() as f64).sqrt())
                };
                let chi_square_quoted = mine.iter().map(|r| r.quadratic_form_quoted).sum();
                SourceStatistics {
                    name: name.clone(),
                    epochs: mine.len(),
                    polar_epochs: mine
                        .iter()
                        .filter(|r| r.form == ResidualForm::Polar)
                        .count(),
                    rms_separation_mas: rms(ResidualForm::Polar, 0, 1.0),
                    rms_position_angle_deg: rms(ResidualForm::Polar, 1, 1.0f64.to_degrees()),
                    rms_offset_mas: offsets,
                    chi_square: mine.iter().map(|r| r.quadratic_form).sum(),
                    chi_square_quoted,
                    degrees_of_freedom: 2.0
                        * mine.len() as f64
                        * (1.0 - parameters_per_observation),
                    smallest_weight: mine.iter().map(|r| r.weight).fold(1.0, f64::min),
                }
            })
            .collect();
        Some(out)
    }

    pub(crate) fn orbit_of(&self, x: &[f64]) -> Option<(OrbitalParameters, Orbit)> {
        let o = self.layout().orbital(x)?;
        let orbit = Orbit::new(&o.campbell_elements()).ok()?;
        Some((o, orbit))
    }

    /// Where the secondary is relative to the primary at `t_jd` (mas), or
    /// `None` if `x` is outside the domain or the model has no astrometric
    /// orbit (velocities only).
    pub fn predict_position(&self, x: &[f64], t_jd: f64) -> Option<SkyOffset> {
        if !self.has_astrometry() {
            return None;
        }
        let (_, orbit) = self.orbit_of(x)?;
        Some(orbit.sky_offset(t_jd))
    }

    /// The model radial velocity (km/s) of `star` as `instrument` would
    /// measure it at `t_jd` (with that instrument's offset), or `None` if
    /// the model has no velocities, `x` is outside the domain or the
    /// instrument index is out of range.
    pub fn velocity_model(
        &self,
        x: &[f64],
        t_jd: f64,
        star: Star,
        instrument: usize,
    ) -> Option<f64> {
        if instrument >= self.layout().instrument_count() {
            return None;
        }
        let (o, orbit) = self.orbit_of(x)?;
        let (c1, c2) = o.velocity_factors();
        let shape = orbit.state(t_jd).rv_shape;
        let gamma = self.layout().offset_kms(x, instrument);
        Some(match star {
            Star::Primary => gamma + c1 * shape,
            Star::Secondary => gamma + c2 * shape,
        })
    }

    /// Residuals (observed minus model) of every measurement, or `None` if
    /// `x` is outside the domain.
    pub fn residuals(&self, x: &[f64]) -> Option<Residuals> {
        let (o, orbit) = self.orbit_of(x)?;
        let mut out = Residuals::default();
        let layout = self.layout();
        let sources = astrometry_sources(self.dataset()).1;
        let nu = layout.degrees_of_freedom(x);
        for (n, epoch) in self.dataset().astrometry.iter().enumerate() {
            let model = orbit.sky_offset(epoch.t_jd);
            let (form, residual, error, observed) = match epoch.position {
                RelativePosition::Polar {
                    sep_mas,
                    sep_err_mas,
                    pa_rad,
                    pa_err_rad,
                    ..
                } => (
                    ResidualForm::Polar,
                    [
                        sep_mas - model.separation(),
                        wrap_angle(pa_rad - model.position_angle_rad()),
                    ],
                    [sep_err_mas, pa_err_rad],
                    SkyOffset::from_polar(sep_mas, pa_rad),
                ),
                RelativePosition::Cartesian {
                    dra_mas,
                    ddec_mas,
                    dra_err_mas,
                    ddec_err_mas,
                    ..
                } => (
                    ResidualForm::Cartesian,
                    [dra_mas - model.dra, ddec_mas - model.ddec],
                    [dra_err_mas, ddec_err_mas],
                    SkyOffset {
                        dra: dra_mas,
                        ddec: ddec_mas,
                    },
                ),
            };
            let (corr, jitter_factor) = match epoch.position {
                RelativePosition::Polar { sep_mas, corr, .. } => {
                    (corr, 1.0 / (sep_mas * sep_mas).max(f64::MIN_POSITIVE))
                }
                RelativePosition::Cartesian { corr, .. } => (corr, 1.0),
            };
            let source = sources[n];
            let (s, j) = (
                layout.error_scale(x, source),
                layout.astrometric_jitter_mas(x, source),
            );
            // C = s^2 C_quoted + j^2 diag(1, g) (crate::astrometry_errors).
            let c11 = s * s * error[0] * error[0] + j * j;
            let c12 = s * s * corr * error[0] * error[1];
            let c22 = s * s * error[1] * error[1] + j * j * jitter_factor;
            let [r1, r2] = residual;
            let form_q = |c11: f64, c12: f64, c22: f64| {
                (c22 * r1 * r1 - 2.0 * c12 * r1 * r2 + c11 * r2 * r2) / (c11 * c22 - c12 * c12)
            };
            let q = form_q(c11, c12, c22);
            let q_quoted = form_q(
                error[0] * error[0],
                corr * error[0] * error[1],
                error[1] * error[1],
            );
            out.astrometry.push(AstrometryResidual {
                t_jd: epoch.t_jd,
                form,
                residual,
                error,
                source,
                error_used: [c11.sqrt(), c22.sqrt()],
                quadratic_form: q,
                quadratic_form_quoted: q_quoted,
                weight: nu.map_or(1.0, |nu| (nu + 2.0) / (nu + q)),
                observed,
                model,
            });
        }
        let (c1, c2) = o.velocity_factors();
        for v in &self.dataset().velocities {
            let shape = orbit.state(v.t_jd).rv_shape;
            let gamma = self.layout().offset_kms(x, v.instrument);
            let jitter = self.layout().jitter_kms(x, v.instrument);
            let model_kms = match v.star {
                Star::Primary => gamma + c1 * shape,
                Star::Secondary => gamma + c2 * shape,
            };
            out.velocities.push(VelocityResidual {
                t_jd: v.t_jd,
                star: v.star,
                instrument: v.instrument,
                observed_kms: v.rv_kms,
                model_kms,
                residual_kms: v.rv_kms - model_kms,
                error_kms: (v.rv_err_kms * v.rv_err_kms + jitter * jitter).sqrt(),
            });
        }
        Some(out)
    }
}
