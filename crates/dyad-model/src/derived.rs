//! Derived quantities of one parameter vector, predictions and residuals.
//!
//! Which quantities exist depends on the data ([`FitMode`]); the list is
//! fixed per model, so a table of samples has the same columns throughout.
//! Relations: Kepler's third law and the spectroscopic-binary relations of
//! `dyad_orbit::laws` (Hilditch, An Introduction to Close Binary Stars,
//! 2001, ch. 2); M1 = M / (1 + q), M2 = q M / (1 + q); the primary's
//! spectroscopic argument of periastron is omega + 180 deg (docs/DESIGN.md).

use dyad_orbit::constants::JULIAN_YEAR_DAYS;
use dyad_orbit::{laws, Orbit, SkyOffset, TimeScale};

use crate::astrometry_errors::{astrometry_sources, ResidualDistribution};
use crate::data::{RelativePosition, Star};
use crate::likelihood::{wrap_angle, Model};
use crate::params::{FitMode, OrbitalParameters};

/// One derived quantity.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Quantity {
    PeriastronJd,
    PeriastronJyear,
    PeriodDays,
    PeriodYears,
    Eccentricity,
    OmegaSecondary,
    OmegaPrimary,
    Inclination,
    Node,
    AxisMas,
    AxisAu,
    TotalMass,
    Parallax,
    MassRatio,
    MassPrimary,
    MassSecondary,
    K1,
    K2,
    M1Sin3i,
    M2Sin3i,
    MassFunction,
    OrbitalParallax,
    ASiniAu,
    Offset(usize),
    Jitter(usize),
    ErrorScale(usize),
    AstrometricJitter(usize),
    DegreesOfFreedom,
}

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

    fn quantities(&self) -> Vec<Quantity> {
        use Quantity::*;
        let mode = self.mode();
        let layout = self.layout();
        let primary = layout.has_velocities_of(Star::Primary);
        let secondary = layout.has_velocities_of(Star::Secondary);
        let mut q = vec![
            PeriastronJd,
            PeriastronJyear,
            PeriodDays,
            PeriodYears,
            Eccentricity,
            OmegaSecondary,
            OmegaPrimary,
        ];
        match mode {
            FitMode::AstrometryOnly | FitMode::Joint => {
                q.extend([Inclination, Node, AxisMas, AxisAu, TotalMass, Parallax]);
                if mode == FitMode::Joint {
                    q.extend([
                        MassRatio,
                        MassPrimary,
                        MassSecondary,
                        K1,
                        K2,
                        M1Sin3i,
                        M2Sin3i,
                        MassFunction,
                    ]);
                    if primary && secondary {
                        q.push(OrbitalParallax);
                    }
                }
            }
            FitMode::VelocitiesOnly => {
                if primary {
                    q.push(K1);
                }
                if secondary {
                    q.push(K2);
                }
                let inclined = layout.has_inclination();
                if inclined {
                    q.push(Inclination);
                }
                if primary && secondary {
                    q.extend([MassRatio, M1Sin3i, M2Sin3i]);
                    if inclined {
                        q.extend([MassPrimary, MassSecondary, TotalMass, AxisAu]);
                    }
                }
                if primary {
                    q.push(MassFunction);
                }
                q.push(ASiniAu);
            }
        }
        for k in 0..layout.instrument_count() {
            q.push(Offset(k));
            q.push(Jitter(k));
        }
        // The error model's sampled parameters only (none by default).
        let errors = layout.astrometry_error_priors();
        for (k, p) in errors.scale.iter().enumerate() {
            if p.fixed_value().is_none() {
                q.push(ErrorScale(k));
            }
        }
        for (k, p) in errors.jitter_mas.iter().enumerate() {
            if p.fixed_value().is_none() {
                q.push(AstrometricJitter(k));
            }
        }
        if let ResidualDistribution::StudentT(p) = &errors.distribution {
            if p.fixed_value().is_none() && mode != FitMode::VelocitiesOnly {
                q.push(DegreesOfFreedom);
            }
        }
        q
    }

    /// Names and units of the derived quantities, in the order of
    /// [`Model::derived`].
    pub fn derived_names_units(&self) -> Vec<(String, String)> {
        let inst = &self.dataset().instruments;
        let sources = self.layout().astrometry_sources();
        self.quantities()
            .into_iter()
            .map(|q| {
                let (n, u): (String, &str) = match q {
                    Quantity::PeriastronJd => ("periastron_time_jd".into(), "d"),
                    Quantity::PeriastronJyear => ("periastron_time_jyear".into(), "yr"),
                    Quantity::PeriodDays => ("period_days".into(), "d"),
                    Quantity::PeriodYears => ("period_years".into(), "yr"),
                    Quantity::Eccentricity => ("eccentricity".into(), "1"),
                    Quantity::OmegaSecondary => ("omega_secondary_deg".into(), "deg"),
                    Quantity::OmegaPrimary => ("omega_primary_deg".into(), "deg"),
                    Quantity::Inclination => ("inclination_deg".into(), "deg"),
                    Quantity::Node => ("node_deg".into(), "deg"),
                    Quantity::AxisMas => ("semi_major_axis_mas".into(), "mas"),
                    Quantity::AxisAu => ("semi_major_axis_au".into(), "au"),
                    Quantity::TotalMass => ("total_mass_msun".into(), "M_sun"),
                    Quantity::Parallax => ("parallax_mas".into(), "mas"),
                    Quantity::MassRatio => ("mass_ratio".into(), "1"),
                    Quantity::MassPrimary => ("mass_primary_msun".into(), "M_sun"),
                    Quantity::MassSecondary => ("mass_secondary_msun".into(), "M_sun"),
                    Quantity::K1 => ("k1_kms".into(), "km/s"),
                    Quantity::K2 => ("k2_kms".into(), "km/s"),
                    Quantity::M1Sin3i => ("m1_sin3i_msun".into(), "M_sun"),
                    Quantity::M2Sin3i => ("m2_sin3i_msun".into(), "M_sun"),
                    Quantity::MassFunction => ("mass_function_msun".into(), "M_sun"),
                    Quantity::OrbitalParallax => ("orbital_parallax_mas".into(), "mas"),
                    Quantity::ASiniAu => (
                        if self.layout().has_velocities_of(Star::Secondary)
                            && self.layout().has_velocities_of(Star::Primary)
                        {
                            "a_sini_au".into()
                        } else if self.layout().has_velocities_of(Star::Primary) {
                            "a1_sini_au".into()
                        } else {
                            "a2_sini_au".into()
                        },
                        "au",
                    ),
                    Quantity::Offset(k) => (format!("offset_kms[{}]", inst[k]), "km/s"),
                    Quantity::Jitter(k) => (format!("jitter_kms[{}]", inst[k]), "km/s"),
                    Quantity::ErrorScale(k) => (format!("error_scale[{}]", sources[k]), "1"),
                    Quantity::AstrometricJitter(k) => {
                        (format!("astrometric_jitter_mas[{}]", sources[k]), "mas")
                    }
                    Quantity::DegreesOfFreedom => ("degrees_of_freedom".into(), "1"),
                };
                (n, u.to_owned())
            })
            .collect()
    }

    /// Derived quantities of `x`, in the order of
    /// [`Model::derived_names_units`]; all `NaN` if `x` is outside the domain.
    pub fn derived(&self, x: &[f64]) -> Vec<f64> {
        let quantities = self.quantities();
        let mut out = vec![f64::NAN; quantities.len()];
        let Some(o) = self.layout().orbital(x) else {
            return out;
        };
        for (slot, q) in out.iter_mut().zip(&quantities) {
            *slot = self.quantity(&o, x, *q);
        }
        out
    }

    fn quantity(&self, o: &OrbitalParameters, x: &[f64], q: Quantity) -> f64 {
        let nan = f64::NAN;
        let deg = |r: f64| r.to_degrees();
        let p = o.period_days;
        let e = o.eccentricity;
        let k1 = o.k1_kms.unwrap_or(nan);
        let k2 = o.k2_kms.unwrap_or(nan);
        let m = o.total_mass_msun.unwrap_or(nan);
        let ratio = o.mass_ratio.unwrap_or(nan);
        let sin_i = o.inclination_rad.map_or(nan, f64::sin);
        let sin3i = sin_i.powi(3);
        let velocities_only = self.mode() == FitMode::VelocitiesOnly;
        // Velocities alone give M sin^3 i and a sin i (laws::msini3_msun,
        // laws::a_sini_km); a known inclination turns them into M and a.
        let msini3 = || laws::msini3_msun(k1, k2, p, e);
        let a_sini_au = || {
            let k = match (o.k1_kms, o.k2_kms) {
                (Some(a), Some(b)) => a + b,
                (Some(a), None) => a,
                (None, Some(b)) => b,
                (None, None) => nan,
            };
            laws::a_sini_km(k, p, e) / dyad_orbit::constants::AU_KM
        };
        match q {
            Quantity::PeriastronJd => o.t_peri_jd,
            Quantity::PeriastronJyear => TimeScale::JulianYear.from_jd(o.t_peri_jd),
            Quantity::PeriodDays => p,
            Quantity::PeriodYears => p / JULIAN_YEAR_DAYS,
            Quantity::Eccentricity => e,
            Quantity::OmegaSecondary => deg(o.omega_rad),
            Quantity::OmegaPrimary => {
                deg((o.omega_rad + std::f64::consts::PI).rem_euclid(std::f64::consts::TAU))
            }
            Quantity::Inclination => o.inclination_rad.map_or(nan, deg),
            Quantity::Node => o.node_rad.map_or(nan, deg),
            Quantity::AxisMas => o.semi_major_axis_mas.unwrap_or(nan),
            Quantity::AxisAu if velocities_only => a_sini_au() / sin_i,
            Quantity::AxisAu => o.semi_major_axis_au.unwrap_or(nan),
            Quantity::TotalMass if velocities_only => {
                let (m1, m2) = msini3();
                (m1 + m2) / sin3i
            }
            Quantity::TotalMass => m,
            Quantity::Parallax => o.parallax_mas.unwrap_or(nan),
            Quantity::MassRatio => ratio,
            Quantity::MassPrimary if velocities_only => msini3().0 / sin3i,
            Quantity::MassSecondary if velocities_only => msini3().1 / sin3i,
            Quantity::MassPrimary => m / (1.0 + ratio),
            Quantity::MassSecondary => m * ratio / (1.0 + ratio),
            Quantity::K1 => k1,
            Quantity::K2 => k2,
            Quantity::M1Sin3i => match self.mode() {
                FitMode::Joint => m / (1.0 + ratio) * sin3i,
                _ => msini3().0,
            },
            Quantity::M2Sin3i => match self.mode() {
                FitMode::Joint => m * ratio / (1.0 + ratio) * sin3i,
                _ => msini3().1,
            },
            Quantity::MassFunction => laws::mass_function_msun(k1, p, e),
            Quantity::OrbitalParallax => self.velocity_implied_parallax(o, x),
            Quantity::ASiniAu => a_sini_au(),
            Quantity::Offset(k) => self.layout().offset_kms(x, k),
            Quantity::Jitter(k) => self.layout().jitter_kms(x, k),
            Quantity::ErrorScale(k) => self.layout().error_scale(x, k),
            Quantity::AstrometricJitter(k) => self.layout().astrometric_jitter_mas(x, k),
            Quantity::DegreesOfFreedom => self.layout().degrees_of_freedom(x).unwrap_or(nan),
        }
    }

    /// The parallax the orbit and the velocities imply, without the
    /// parallax prior, for one draw (joint model with both stars'
    /// velocities).
    ///
    /// In the joint model K1 and K2 follow from the parallax (through
    /// a_au = a_mas / parallax), so a_mas / a_au of the draw's own K1 + K2
    /// would be the sampled parallax again. Instead the semi-amplitudes are
    /// taken from the velocities alone: with the draw's orbit shape
    /// (P, e, omega, T) and jitters the velocities are linear in
    /// (K1, K2, offsets) (v1 = gamma_k - K1 shape, v2 = gamma_k + K2 shape),
    /// so their likelihood is Gaussian in them; (K1, K2) is drawn from it
    /// (flat prior; weighted least squares and its covariance), and then
    /// parallax = a_mas sin i / (a sin i in au), with
    /// a sin i = (K1 + K2) P sqrt(1 - e^2) / (2 pi) (K in km/s, P in s,
    /// a sin i in km, divided by the au in km; Hilditch 2001, eq. 2.46-2.47;
    /// `laws::orbital_parallax_mas`). The normal deviates come from a hash
    /// of the draw's coordinates, so the value is a function of the draw
    /// alone (the same on every thread count and every rerun). This is the
    /// conditional posterior of the parallax given the draw's geometry;
    /// the geometry itself comes mostly from the astrometry, which the
    /// catalogue prior touches only through its weak coupling.
    fn velocity_implied_parallax(&self, o: &OrbitalParameters, x: &[f64]) -> f64 {
        let (Some(a_mas), Some(inc)) = (o.semi_major_axis_mas, o.inclination_rad) else {
            return f64::NAN;
        };
        let Some((k_hat, cov)) = self.semi_amplitudes_from_velocities(o, x) else {
            return f64::NAN;
        };
        let [z1, z2] = hashed_normals(x);
        // Cholesky factor of the 2x2 covariance.
        let l11 = cov[0].sqrt();
        let l21 = cov[1] / l11;
        let l22 = (cov[2] - l21 * l21).max(0.0).sqrt();
        let k1 = k_hat[0] + l11 * z1;
        let k2 = k_hat[1] + l21 * z1 + l22 * z2;
        if (k1 + k2).is_nan() || k1 + k2 <= 0.0 {
            return f64::NAN;
        }
        laws::orbital_parallax_mas(a_mas, inc, k1, k2, o.period_days, o.eccentricity)
    }

    /// Weighted least-squares (K1, K2) from the velocities alone, with the
    /// draw's orbit shape and jitters and free offsets, and the covariance
    /// (c11, c12, c22) of the two; `None` when they are not determined.
    fn semi_amplitudes_from_velocities(
        &self,
        o: &OrbitalParameters,
        x: &[f64],
    ) -> Option<([f64; 2], [f64; 3])> {
        let orbit = Orbit::new(&o.campbell_elements()).ok()?;
        let layout = self.layout();
        let m = 2 + layout.instrument_count();
        let mut normal = vec![0.0; m * m];
        let mut rhs = vec![0.0; m];
        let mut row = vec![0.0; m];
        for v in &self.dataset().velocities {
            let shape = orbit.state(v.t_jd).rv_shape;
            let jitter = layout.jitter_kms(x, v.instrument);
            let w = 1.0 / (v.rv_err_kms * v.rv_err_kms + jitter * jitter);
            row.iter_mut().for_each(|r| *r = 0.0);
            match v.star {
                Star::Primary => row[0] = -shape,
                Star::Secondary => row[1] = shape,
            }
            row[2 + v.instrument] = 1.0;
            for a in 0..m {
                rhs[a] += w * row[a] * v.rv_kms;
                for b in 0..m {
                    normal[a * m + b] += w * row[a] * row[b];
                }
            }
        }
        let solution = solve_symmetric(&normal, &rhs, m)?;
        // The (K1, K2) block of the inverse: solve for the first two unit vectors.
        let mut unit = vec![0.0; m];
        unit[0] = 1.0;
        let col0 = solve_symmetric(&normal, &unit, m)?;
        unit[0] = 0.0;
        unit[1] = 1.0;
        let col1 = solve_symmetric(&normal, &unit, m)?;
        let cov = [col0[0], col0[1], col1[1]];
        (cov[0] > 0.0 && cov[2] > 0.0 && cov[0] * cov[2] > cov[1] * cov[1])
            .then_some(([solution[0], solution[1]], cov))
    }

    fn orbit_of(&self, x: &[f64]) -> Option<(OrbitalParameters, Orbit)> {
        let o = self.layout().orbital(x)?;
        let orbit = Orbit::new(&o.campbell_elements()).ok()?;
        Some((o, orbit))
    }

    /// Where the secondary is relative to the primary at `t_jd` (mas), or
    /// `None` if `x` is outside the domain or the model has no astrometric
    /// orbit (velocities only).
    pub fn predict_position(&self, x: &[f64], t_jd: f64) -> Option<SkyOffset> {
        if self.mode() == FitMode::VelocitiesOnly {
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
        let (c1, c2) = self.velocity_factors(&o);
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
        let (c1, c2) = self.velocity_factors(&o);
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

/// Solves the symmetric positive-definite system `a y = b` (n x n,
/// row-major) by Cholesky decomposition; `None` if `a` is not positive
/// definite (common practice, e.g. Press et al., Numerical Recipes, 2007,
/// sec. 2.9).
fn solve_symmetric(a: &[f64], b: &[f64], n: usize) -> Option<Vec<f64>> {
    let mut l = vec![0.0; n * n];
    for i in 0..n {
        for j in 0..=i {
            let mut sum = a[i * n + j];
            for k in 0..j {
                sum -= l[i * n + k] * l[j * n + k];
            }
            if i == j {
                if sum.is_nan() || sum <= 0.0 {
                    return None;
                }
                l[i * n + i] = sum.sqrt();
            } else {
                l[i * n + j] = sum / l[j * n + j];
            }
        }
    }
    let mut y = b.to_vec();
    for i in 0..n {
        for k in 0..i {
            y[i] -= l[i * n + k] * y[k];
        }
        y[i] /= l[i * n + i];
    }
    for i in (0..n).rev() {
        for k in i + 1..n {
            y[i] -= l[k * n + i] * y[k];
        }
        y[i] /= l[i * n + i];
    }
    Some(y)
}

/// Two standard normal deviates that are a function of the bits of `x`
/// alone: SplitMix64 (Steele, Lea & Flood 2014) over the coordinates, then
/// the Box-Muller transform (Box & Muller 1958).
fn hashed_normals(x: &[f64]) -> [f64; 2] {
    let mix = |mut z: u64| {
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    };
    let mut h: u64 = 0x9e37_79b9_7f4a_7c15;
    for v in x {
        h = mix(h
            .wrapping_add(v.to_bits())
            .wrapping_add(0x9e37_79b9_7f4a_7c15));
    }
    let a = mix(h.wrapping_add(1));
    let b = mix(h.wrapping_add(2));
    // Uniforms in (0, 1] and [0, 1) from the top 53 bits.
    let u1 = ((a >> 11) as f64 + 1.0) / (1u64 << 53) as f64;
    let u2 = (b >> 11) as f64 / (1u64 << 53) as f64;
    let r = (-2.0 * u1.ln()).sqrt();
    let t = std::f64::consts::TAU * u2;
    [r * t.cos(), r * t.sin()]
}
