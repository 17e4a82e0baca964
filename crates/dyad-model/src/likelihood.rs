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

use dyad_orbit::kepler::{EccentricAnomaly, KeplerSolver, LANES};
use dyad_orbit::{laws, velocity, CampbellElements, ThieleInnes};

use crate::config::RunConfig;
use crate::data::{Dataset, RelativePosition, Star};
use crate::error::ModelError;
use crate::params::{FitMode, ModelPriors, OrbitalParameters, ParameterLayout};

/// ln(2 pi).
const LN_2PI: f64 = 1.837_877_066_409_345_5;

/// What an astrometric epoch measured.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Measured {
    /// Separation (mas) and the sine and cosine of the position angle.
    Polar {
        sep_mas: f64,
        sin_pa: f64,
        cos_pa: f64,
    },
    /// dRA* and dDec (mas).
    Cartesian { dra_mas: f64, ddec_mas: f64 },
}

/// One astrometric epoch ready for evaluation (its epoch is in
/// `Model::astrometry_times`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct AstrometryTerm {
    pub measured: Measured,
    /// Inverse covariance (c11, c12, c22) of the residual pair.
    pub inv: [f64; 3],
}

/// One velocity ready for evaluation (its epoch is in `Model::velocity_times`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct VelocityTerm {
    pub rv_kms: f64,
    pub err_sq: f64,
    /// ln(2 pi err^2), used when the jitter is zero.
    pub ln_2pi_err_sq: f64,
    pub instrument: usize,
    pub star: Star,
}

/// The velocities of one star from one instrument: they share an offset,
/// a jitter and an amplitude, computed once per evaluation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct VelocityGroup {
    pub instrument: usize,
    pub star: Star,
    /// Range of this group in `velocities` and `velocity_times`.
    pub start: usize,
    pub end: usize,
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
    astrometry: Vec<AstrometryTerm>,
    /// Epochs of `astrometry`, contiguous for the batched orbit solver.
    astrometry_times: Vec<f64>,
    /// Velocities sorted by (instrument, star).
    velocities: Vec<VelocityTerm>,
    velocity_times: Vec<f64>,
    velocity_groups: Vec<VelocityGroup>,
    /// Sum over epochs of -0.5 ln det(2 pi C).
    astrometry_ln_norm: f64,
}

impl Model {
    /// Builds the model of a data set under the given priors.
    pub fn new(dataset: Dataset, priors: &ModelPriors) -> Result<Self, ModelError> {
        let layout = ParameterLayout::new(&dataset, priors)?;
        let mut astrometry: Vec<AstrometryTerm> = Vec::with_capacity(dataset.astrometry.len());
        let mut astrometry_times = Vec::with_capacity(dataset.astrometry.len());
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
                    Measured::Polar {
                        sep_mas,
                        sin_pa: pa_rad.sin(),
                        cos_pa: pa_rad.cos(),
                    },
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
            astrometry.push(AstrometryTerm { measured, inv });
            astrometry_times.push(epoch.t_jd);
        }
        // Polar epochs first, then Cartesian: the inner loop then branches
        // predictably (the sum does not depend on the order).
        let mut order: Vec<usize> = (0..astrometry.len()).collect();
        order.sort_by_key(|&i| {
            (
                matches!(astrometry[i].measured, Measured::Cartesian { .. }),
                i,
            )
        });
        let astrometry: Vec<AstrometryTerm> = order.iter().map(|&i| astrometry[i]).collect();
        let astrometry_times: Vec<f64> = order.iter().map(|&i| astrometry_times[i]).collect();
        for (n, v) in dataset.velocities.iter().enumerate() {
            if !(v.rv_err_kms > 0.0 && v.rv_err_kms.is_finite())
                || v.instrument >= dataset.instruments.len()
            {
                return Err(ModelError::InvalidModel(format!(
                    "velocity {}: error must be positive and the instrument known",
                    n + 1
                )));
            }
        }
        // Group by (instrument, star), keeping file order within a group.
        let star_rank = |s: Star| match s {
            Star::Primary => 0,
            Star::Secondary => 1,
        };
        let mut order: Vec<usize> = (0..dataset.velocities.len()).collect();
        order.sort_by_key(|&i| {
            let v = &dataset.velocities[i];
            (v.instrument, star_rank(v.star), i)
        });
        let mut velocities = Vec::with_capacity(order.len());
        let mut velocity_times = Vec::with_capacity(order.len());
        let mut velocity_groups: Vec<VelocityGroup> = Vec::new();
        for (k, &i) in order.iter().enumerate() {
            let v = &dataset.velocities[i];
            let err_sq = v.rv_err_kms * v.rv_err_kms;
            velocities.push(VelocityTerm {
                rv_kms: v.rv_kms,
                err_sq,
                ln_2pi_err_sq: LN_2PI + err_sq.ln(),
                instrument: v.instrument,
                star: v.star,
            });
            velocity_times.push(v.t_jd);
            match velocity_groups.last_mut() {
                Some(g) if g.instrument == v.instrument && g.star == v.star => g.end = k + 1,
                _ => velocity_groups.push(VelocityGroup {
                    instrument: v.instrument,
                    star: v.star,
                    start: k,
                    end: k + 1,
                }),
            }
        }
        Ok(Self {
            layout,
            dataset,
            astrometry,
            astrometry_times,
            velocities,
            velocity_times,
            velocity_groups,
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
        let Some(kin) = Kinematics::new(&o.campbell_elements()) else {
            return f64::NEG_INFINITY;
        };
        // Epochs are solved LANES at a time into a stack buffer (the batched
        // solver of dyad-orbit; no allocation).
        let mut anomalies = [EccentricAnomaly {
            e_anom: 0.0,
            sin_e: 0.0,
            cos_e: 1.0,
        }; LANES];
        let mut chi2 = 0.0;
        for (terms, times) in self
            .astrometry
            .chunks(LANES)
            .zip(self.astrometry_times.chunks(LANES))
        {
            let anomalies = &mut anomalies[..times.len()];
            kin.solve(times, anomalies);
            for (term, ea) in terms.iter().zip(anomalies.iter()) {
                let (dra, ddec) = kin.position(ea);
                let (r1, r2) = match term.measured {
                    Measured::Polar {
                        sep_mas,
                        sin_pa,
                        cos_pa,
                    } => {
                        let sep = (dra * dra + ddec * ddec).sqrt();
                        // theta_obs - theta_model in (-pi, pi] from the sine
                        // and cosine of the difference (the model's are
                        // dRA*/rho and dDec/rho; rho cancels in atan2).
                        let d_pa = residual_angle(
                            sin_pa * ddec - cos_pa * dra,
                            cos_pa * ddec + sin_pa * dra,
                        );
                        (sep_mas - sep, d_pa)
                    }
                    Measured::Cartesian { dra_mas, ddec_mas } => (dra_mas - dra, ddec_mas - ddec),
                };
                let [c11, c12, c22] = term.inv;
                chi2 += c11 * r1 * r1 + 2.0 * c12 * r1 * r2 + c22 * r2 * r2;
            }
        }
        let mut ll = self.astrometry_ln_norm - 0.5 * chi2;
        if !self.velocities.is_empty() {
            let (c1, c2) = self.velocity_factors(o);
            let n_inst = self.layout.instrument_count();
            if n_inst <= CACHED_INSTRUMENTS {
                // One pass over all velocities (full solver lanes), with
                // each instrument's offset and squared jitter computed once.
                let mut gamma = [0.0; CACHED_INSTRUMENTS];
                let mut jitter_sq = [0.0; CACHED_INSTRUMENTS];
                for k in 0..n_inst {
                    gamma[k] = self.layout.offset_kms(x, k);
                    let s = self.layout.jitter_kms(x, k);
                    jitter_sq[k] = s * s;
                }
                let mut memo = VarianceMemo::new();
                let mut sum = 0.0;
                for (terms, times) in self
                    .velocities
                    .chunks(LANES)
                    .zip(self.velocity_times.chunks(LANES))
                {
                    let anomalies = &mut anomalies[..times.len()];
                    kin.solve(times, anomalies);
                    for (term, ea) in terms.iter().zip(anomalies.iter()) {
                        let k = term.instrument;
                        let amplitude = match term.star {
                            Star::Primary => c1,
                            Star::Secondary => c2,
                        };
                        let r = term.rv_kms - (gamma[k] + amplitude * kin.rv_shape(ea));
                        let (inv_var, ln_norm) = memo.get(term, k, jitter_sq[k]);
                        sum += r * r * inv_var + ln_norm;
                    }
                }
                ll -= 0.5 * sum;
            } else {
                for g in &self.velocity_groups {
                    let gamma = self.layout.offset_kms(x, g.instrument);
                    let jitter = self.layout.jitter_kms(x, g.instrument);
                    let jitter_sq = jitter * jitter;
                    let amplitude = match g.star {
                        Star::Primary => c1,
                        Star::Secondary => c2,
                    };
                    let terms = &self.velocities[g.start..g.end];
                    let times = &self.velocity_times[g.start..g.end];
                    let mut memo = VarianceMemo::new();
                    let mut sum = 0.0;
                    for (terms, times) in terms.chunks(LANES).zip(times.chunks(LANES)) {
                        let anomalies = &mut anomalies[..times.len()];
                        kin.solve(times, anomalies);
                        for (term, ea) in terms.iter().zip(anomalies.iter()) {
                            let r = term.rv_kms - (gamma + amplitude * kin.rv_shape(ea));
                            let (inv_var, ln_norm) = memo.get(term, g.instrument, jitter_sq);
                            sum += r * r * inv_var + ln_norm;
                        }
                    }
                    ll -= 0.5 * sum;
                }
            }
        }
        if ll.is_nan() {
            f64::NEG_INFINITY
        } else {
            ll
        }
    }
}

/// atan2(y, x), the position-angle residual: when it is small (x > 0 and
/// |y| <= 7/16 x, |residual| < 0.41 rad, as for every epoch near the
/// posterior) from the arctangent polynomial below, about three times
/// cheaper than the platform's atan2; elsewhere the platform's atan2.
#[inline(always)]
fn residual_angle(y: f64, x: f64) -> f64 {
    if x > 0.0 && x < f64::INFINITY && y.abs() <= 0.4375 * x {
        atan_small(y / x)
    } else {
        y.atan2(x)
    }
}

/// arctan(a) for |a| <= 7/16: the odd minimax polynomial of fdlibm's
/// s_atan.c (Sun Microsystems 1993, coefficients aT[0..10], from memory;
/// each checked against its hexadecimal form there, and the result against
/// the platform's atan to 1 ulp in this module's tests), split into even
/// and odd parts as fdlibm does.
#[inline(always)]
// The digits as published in fdlibm.
#[allow(clippy::excessive_precision)]
fn atan_small(a: f64) -> f64 {
    const AT: [f64; 11] = [
        3.333_333_333_333_293_180_27e-1,
        -1.999_999_999_987_648_324_76e-1,
        1.428_571_427_250_346_637_11e-1,
        -1.111_111_040_546_235_578_80e-1,
        9.090_887_133_436_506_561_96e-2,
        -7.691_876_205_044_829_994_95e-2,
        6.661_073_137_387_531_206_69e-2,
        -5.833_570_133_790_573_486_45e-2,
        4.976_877_994_615_932_360_17e-2,
        -3.653_157_274_421_691_552_70e-2,
        1.628_582_011_536_578_236_23e-2,
    ];
    let z = a * a;
    let w = z * z;
    let s1 = z * (AT[0] + w * (AT[2] + w * (AT[4] + w * (AT[6] + w * (AT[8] + w * AT[10])))));
    let s2 = w * (AT[1] + w * (AT[3] + w * (AT[5] + w * (AT[7] + w * AT[9]))));
    a - a * (s1 + s2)
}

/// Instruments up to this number have their offsets and jitters cached on
/// the stack for a single pass over all velocities.
const CACHED_INSTRUMENTS: usize = 16;

/// 1/(err^2 + s^2) and ln(2 pi (err^2 + s^2)), reused while consecutive
/// velocities have the same error and instrument (common: one quoted
/// precision per instrument); otherwise one division and one log per point.
struct VarianceMemo {
    err_sq: f64,
    instrument: usize,
    inv_var: f64,
    ln_norm: f64,
}

impl VarianceMemo {
    #[inline(always)]
    fn new() -> Self {
        Self {
            err_sq: f64::NAN,
            instrument: usize::MAX,
            inv_var: 0.0,
            ln_norm: 0.0,
        }
    }

    #[inline(always)]
    fn get(&mut self, term: &VelocityTerm, instrument: usize, jitter_sq: f64) -> (f64, f64) {
        if term.err_sq != self.err_sq || instrument != self.instrument {
            let var = term.err_sq + jitter_sq;
            self.err_sq = term.err_sq;
            self.instrument = instrument;
            self.inv_var = 1.0 / var;
            self.ln_norm = if jitter_sq == 0.0 {
                term.ln_2pi_err_sq
            } else {
                LN_2PI + var.ln()
            };
        }
        (self.inv_var, self.ln_norm)
    }
}

/// The parts of an orbit the likelihood needs, evaluated without the
/// pieces it does not (positions at velocity epochs and velocities at
/// astrometric epochs). Same formulas as `dyad_orbit::Orbit` (DESIGN.md
/// "Kinematics"): X = cos E - e, Y = sqrt(1 - e^2) sin E,
/// dDec = A X + F Y, dRA* = B X + G Y, and the velocity shape
/// cos(nu + omega) + e cos omega = (X cos w - Y sin w) / (1 - e cos E) + e cos w.
struct Kinematics {
    solver: KeplerSolver,
    ti: ThieleInnes,
    t_peri: f64,
    inv_period: f64,
    e: f64,
    sqrt_1me2: f64,
    cos_w: f64,
    sin_w: f64,
    e_cos_w: f64,
}

/// 1.5 * 2^52: adding and subtracting it rounds to the nearest integer.
const ROUND_MAGIC: f64 = 6_755_399_441_055_744.0;

impl Kinematics {
    #[inline]
    fn new(el: &CampbellElements) -> Option<Self> {
        el.validate().ok()?;
        let (sin_w, cos_w) = el.omega_rad.sin_cos();
        Some(Self {
            solver: KeplerSolver::new(el.e).ok()?,
            ti: el.thiele_innes(),
            t_peri: el.t_peri_jd,
            inv_period: 1.0 / el.period_days,
            e: el.e,
            sqrt_1me2: ((1.0 - el.e) * (1.0 + el.e)).sqrt(),
            cos_w,
            sin_w,
            e_cos_w: el.e * cos_w,
        })
    }

    /// Eccentric anomalies at up to LANES epochs. The mean anomaly is
    /// reduced on the phase (t - T)/P, where removing whole cycles is exact.
    #[inline]
    fn solve(&self, times: &[f64], out: &mut [EccentricAnomaly]) {
        let mut m = [0.0; LANES];
        let m = &mut m[..times.len()];
        for (mi, &t) in m.iter_mut().zip(times) {
            let phase = (t - self.t_peri) * self.inv_period;
            let cycles = (phase + ROUND_MAGIC) - ROUND_MAGIC;
            *mi = TAU * (phase - cycles);
        }
        self.solver.solve_many(m, out);
    }

    #[inline(always)]
    fn position(&self, ea: &EccentricAnomaly) -> (f64, f64) {
        let x = ea.cos_e - self.e;
        let y = self.sqrt_1me2 * ea.sin_e;
        (self.ti.b * x + self.ti.g * y, self.ti.a * x + self.ti.f * y)
    }

    #[inline(always)]
    fn rv_shape(&self, ea: &EccentricAnomaly) -> f64 {
        let x = ea.cos_e - self.e;
        let y = self.sqrt_1me2 * ea.sin_e;
        (x * self.cos_w - y * self.sin_w) / (1.0 - self.e * ea.cos_e) + self.e_cos_w
    }
}

#[cfg(test)]
mod tests {
    use super::{atan_small, residual_angle};

    /// Reference: the platform libm (f64::atan, f64::atan2).
    #[test]
    fn small_arctangent_matches_libm() {
        let mut worst: f64 = 0.0;
        for k in -20_000..=20_000 {
            let a = 0.4375 * k as f64 / 20_000.0;
            let err = (atan_small(a) - a.atan()).abs();
            worst = worst.max(err / a.atan().abs().max(f64::MIN_POSITIVE));
        }
        assert!(worst <= 2.3e-16, "worst relative error {worst:e}");
        // Both branches of the residual, every quadrant, the edges.
        for k in 0..=720 {
            let t = (k as f64 - 360.0).to_radians() * 0.999_999;
            for r in [1e-3, 1.0, 250.0] {
                let (y, x) = (r * t.sin(), r * t.cos());
                let d = residual_angle(y, x) - y.atan2(x);
                assert!(
                    d.abs() <= 4.0 * f64::EPSILON * t.abs().max(1e-300),
                    "{t} {r}: {d:e}"
                );
            }
        }
        assert_eq!(residual_angle(0.0, 3.0), 0.0);
        assert!(residual_angle(f64::NAN, 1.0).is_nan());
        assert_eq!(residual_angle(1.0, f64::INFINITY), 0.0);
    }
}
