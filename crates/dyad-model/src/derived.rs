//! Derived quantities of one parameter vector, predictions and residuals.
//!
//! Which quantities exist depends on the data ([`FitMode`]); the list is
//! fixed per model, so a table of samples has the same columns throughout.
//! Relations: Kepler's third law and the spectroscopic-binary relations of
//! `dyad_orbit::laws` (Hilditch, An Introduction to Close Binary Stars,
//! 2001, ch. 2); M1 = M / (1 + q), M2 = q M / (1 + q); the primary's
//! spectroscopic argument of periastron is omega + 180 deg (DESIGN.md).

use dyad_orbit::constants::JULIAN_YEAR_DAYS;
use dyad_orbit::{laws, Orbit, SkyOffset, TimeScale};

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
    /// 1-sigma errors, in the form measured.
    pub error: [f64; 2],
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

impl Model {
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
        q
    }

    /// Names and units of the derived quantities, in the order of
    /// [`Model::derived`].
    pub fn derived_names_units(&self) -> Vec<(String, String)> {
        let inst = &self.dataset().instruments;
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
            Quantity::OrbitalParallax => match (o.semi_major_axis_mas, o.inclination_rad) {
                (Some(a), Some(i)) => laws::orbital_parallax_mas(a, i, k1, k2, p, e),
                _ => nan,
            },
            Quantity::ASiniAu => a_sini_au(),
            Quantity::Offset(k) => self.layout().offset_kms(x, k),
            Quantity::Jitter(k) => self.layout().jitter_kms(x, k),
        }
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
        for epoch in &self.dataset().astrometry {
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
            out.astrometry.push(AstrometryResidual {
                t_jd: epoch.t_jd,
                form,
                residual,
                error,
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
