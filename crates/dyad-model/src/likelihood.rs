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
//! (docs/DESIGN.md "Kinematics"). With velocities alone, v1 = gamma - K1 * shape
//! and v2 = gamma + K2 * shape.
//!
//! Nothing is allocated per call: inverse covariances and normalising
//! constants are computed once in [`Model::new`]. The data are stored one
//! array per quantity and evaluated [`LANES`] epochs at a time, straight
//! from the Kepler solver's arrays ([`Orbit::for_each_block`]), so the
//! arithmetic after the solve vectorises; velocities of both stars taken
//! by one instrument at one epoch share one solve.

use std::collections::HashMap;
use std::f64::consts::{LN_2, PI, TAU};

use dyad_orbit::kepler::LANES;
use dyad_orbit::{laws, velocity, BlockVisitor, Orbit};

use crate::astrometry_errors::astrometry_sources;
use crate::config::RunConfig;
use crate::data::{Dataset, RelativePosition, Star};
use crate::error::ModelError;
use crate::params::{FitMode, ModelPriors, OrbitalParameters, ParameterLayout};

/// ln(2 pi).
const LN_2PI: f64 = 1.837_877_066_409_345_5;

/// Inverse covariances (c11, 2 c12, c22) of the residual pairs of a set of
/// astrometric epochs, one array each (zero in the padding).
#[derive(Debug, Clone, Default, PartialEq)]
struct InverseCovariances {
    c11: Vec<f64>,
    c12_twice: Vec<f64>,
    c22: Vec<f64>,
}

impl InverseCovariances {
    fn push(&mut self, [c11, c12, c22]: [f64; 3]) {
        self.c11.push(c11);
        self.c12_twice.push(2.0 * c12);
        self.c22.push(c22);
    }

    fn pad(&mut self) {
        for v in [&mut self.c11, &mut self.c12_twice, &mut self.c22] {
            pad_to_lanes(v, 0.0);
        }
    }

    /// c11 r1^2 + 2 c12 r1 r2 + c22 r2^2 of epoch `k`.
    #[inline(always)]
    fn quadratic_form(&self, k: usize, r1: f64, r2: f64) -> f64 {
        self.c11[k] * r1 * r1 + self.c12_twice[k] * r1 * r2 + self.c22[k] * r2 * r2
    }
}

/// The quoted covariances of a set of astrometric epochs and what the
/// per-source error model needs to rescale and widen them
/// ([`crate::astrometry_errors`]): (v11, v12, v22) of the quoted errors,
/// the jitter's factor g on the second coordinate (1 / rho_obs^2 for a
/// position angle in radians, 1 for an offset), the epoch's source index
/// (precomputed here so that the hot loop only looks it up) and a weight
/// (1, or 0 in the padding).
#[derive(Debug, Clone, Default, PartialEq)]
struct QuotedCovariances {
    v11: Vec<f64>,
    v12: Vec<f64>,
    v22: Vec<f64>,
    jitter_factor: Vec<f64>,
    source: Vec<usize>,
    weight: Vec<f64>,
}

impl QuotedCovariances {
    fn push(&mut self, s1: f64, s2: f64, corr: f64, jitter_factor: f64, source: usize) {
        self.v11.push(s1 * s1);
        self.v12.push(corr * s1 * s2);
        self.v22.push(s2 * s2);
        self.jitter_factor.push(jitter_factor);
        self.source.push(source);
        self.weight.push(1.0);
    }

    fn pad(&mut self) {
        pad_to_lanes(&mut self.v11, 1.0);
        pad_to_lanes(&mut self.v12, 0.0);
        pad_to_lanes(&mut self.v22, 1.0);
        pad_to_lanes(&mut self.jitter_factor, 1.0);
        pad_to_lanes(&mut self.source, 0);
        pad_to_lanes(&mut self.weight, 0.0);
    }
}

/// Polar astrometric epochs (separation and position angle), one array per
/// quantity; all but `t` padded with zero-weight entries to a whole number
/// of blocks of [`LANES`].
#[derive(Debug, Clone, Default, PartialEq)]
struct PolarEpochs {
    t: Vec<f64>,
    sep_mas: Vec<f64>,
    sin_pa: Vec<f64>,
    cos_pa: Vec<f64>,
    inv: InverseCovariances,
    quoted: QuotedCovariances,
}

/// Cartesian astrometric epochs (dRA*, dDec), stored as [`PolarEpochs`].
#[derive(Debug, Clone, Default, PartialEq)]
struct CartesianEpochs {
    t: Vec<f64>,
    dra_mas: Vec<f64>,
    ddec_mas: Vec<f64>,
    inv: InverseCovariances,
    quoted: QuotedCovariances,
}

/// Velocity epochs: the velocities one instrument took at one instant, of
/// the primary (slot 0), the secondary (slot 1) or both, so that a
/// double-lined spectrum costs one Kepler solve. An empty slot has weight 0
/// (and error 1 so that its variance stays a normal number). The epochs of
/// each instrument form one segment, padded to a whole number of blocks of
/// [`LANES`].
#[derive(Debug, Clone, Default, PartialEq)]
struct VelocityEpochs {
    segments: Vec<InstrumentSegment>,
    t: Vec<f64>,
    rv_kms: [Vec<f64>; 2],
    err_sq: [Vec<f64>; 2],
    weight: [Vec<f64>; 2],
    /// Number of velocities (filled slots).
    count: usize,
}

/// The epochs of one instrument in [`VelocityEpochs`]: `len` epochs from
/// index `start`.
#[derive(Debug, Clone, Copy, PartialEq)]
struct InstrumentSegment {
    instrument: usize,
    start: usize,
    len: usize,
}

/// Pads `v` with `value` to a whole number of blocks of [`LANES`].
fn pad_to_lanes<T: Copy>(v: &mut Vec<T>, value: T) {
    let n = v.len().div_ceil(LANES) * LANES;
    v.resize(n, value);
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
    polar: PolarEpochs,
    cartesian: CartesianEpochs,
    velocities: VelocityEpochs,
    /// Sum over epochs of -0.5 ln det(2 pi C).
    astrometry_ln_norm: f64,
    /// Whether the astrometric errors are used as quoted (the precomputed
    /// inverse covariances), or rescaled, widened or t-distributed per
    /// source on every call.
    errors_as_given: bool,
}

impl Model {
    /// Builds the model of a data set under the given priors.
    pub fn new(dataset: Dataset, priors: &ModelPriors) -> Result<Self, ModelError> {
        let layout = ParameterLayout::new(&dataset, priors)?;
        let source_of_epoch = astrometry_sources(&dataset).1;
        let mut polar = PolarEpochs::default();
        let mut cartesian = CartesianEpochs::default();
        let mut astrometry_ln_norm = 0.0;
        for (n, epoch) in dataset.astrometry.iter().enumerate() {
            let invalid =
                |m: String| ModelError::InvalidModel(format!("astrometric epoch {}: {m}", n + 1));
            match epoch.position {
                RelativePosition::Polar {
                    sep_mas,
                    sep_err_mas,
                    pa_rad,
                    pa_err_rad,
                    corr,
                } => {
                    let (inv, ln_det) =
                        inverse_covariance(sep_err_mas, pa_err_rad, corr).map_err(invalid)?;
                    astrometry_ln_norm -= 0.5 * ln_det;
                    polar.t.push(epoch.t_jd);
                    polar.sep_mas.push(sep_mas);
                    polar.sin_pa.push(pa_rad.sin());
                    polar.cos_pa.push(pa_rad.cos());
                    polar.inv.push(inv);
                    // A jitter j mas on the sky is j / rho radians of position angle.
                    let factor = if sep_mas > 0.0 {
                        1.0 / (sep_mas * sep_mas)
                    } else {
                        1.0
                    };
                    polar
                        .quoted
                        .push(sep_err_mas, pa_err_rad, corr, factor, source_of_epoch[n]);
                }
                RelativePosition::Cartesian {
                    dra_mas,
                    ddec_mas,
                    dra_err_mas,
                    ddec_err_mas,
                    corr,
                } => {
                    let (inv, ln_det) =
                        inverse_covariance(dra_err_mas, ddec_err_mas, corr).map_err(invalid)?;
                    astrometry_ln_norm -= 0.5 * ln_det;
                    cartesian.t.push(epoch.t_jd);
                    cartesian.dra_mas.push(dra_mas);
                    cartesian.ddec_mas.push(ddec_mas);
                    cartesian.inv.push(inv);
                    cartesian
                        .quoted
                        .push(dra_err_mas, ddec_err_mas, corr, 1.0, source_of_epoch[n]);
                }
            }
        }
        // Padding: zero weight, and values that keep every residual finite.
        pad_to_lanes(&mut polar.sep_mas, 0.0);
        pad_to_lanes(&mut polar.sin_pa, 0.0);
        pad_to_lanes(&mut polar.cos_pa, 1.0);
        polar.inv.pad();
        polar.quoted.pad();
        pad_to_lanes(&mut cartesian.dra_mas, 0.0);
        pad_to_lanes(&mut cartesian.ddec_mas, 0.0);
        cartesian.inv.pad();
        cartesian.quoted.pad();

        // One list of epochs per instrument: (t, [rv, err^2, weight] by slot).
        type Epoch = (f64, [[f64; 3]; 2]);
        let mut by_instrument: Vec<Vec<Epoch>> = vec![Vec::new(); dataset.instruments.len()];
        // Epoch of each (instrument, instant), open for the other star.
        let mut open: HashMap<(usize, u64), usize> = HashMap::new();
        for (n, v) in dataset.velocities.iter().enumerate() {
            let err_sq = v.rv_err_kms * v.rv_err_kms;
            // The variance must stay a normal number: its logarithm is taken
            // by exponent and mantissa (`LogSum`).
            if !(err_sq.is_normal() && err_sq < 1e300) || v.instrument >= dataset.instruments.len()
            {
                return Err(ModelError::InvalidModel(format!(
                    "velocity {}: error must be between 1e-150 and 1e150 km/s and the \
                     instrument known",
                    n + 1
                )));
            }
            let slot = match v.star {
                Star::Primary => 0,
                Star::Secondary => 1,
            };
            let epochs = &mut by_instrument[v.instrument];
            let key = (v.instrument, v.t_jd.to_bits());
            let k = match open.get(&key) {
                Some(&k) if epochs[k].1[slot][2] == 0.0 => k,
                _ => {
                    epochs.push((v.t_jd, [[0.0, 1.0, 0.0]; 2]));
                    open.insert(key, epochs.len() - 1);
                    epochs.len() - 1
                }
            };
            epochs[k].1[slot] = [v.rv_kms, err_sq, 1.0];
        }
        let mut velocities = VelocityEpochs {
            count: dataset.velocities.len(),
            ..VelocityEpochs::default()
        };
        for (instrument, epochs) in by_instrument.iter().enumerate() {
            if epochs.is_empty() {
                continue;
            }
            velocities.segments.push(InstrumentSegment {
                instrument,
                start: velocities.t.len(),
                len: epochs.len(),
            });
            for (t, slots) in epochs {
                velocities.t.push(*t);
                for (s, &[rv, err_sq, weight]) in slots.iter().enumerate() {
                    velocities.rv_kms[s].push(rv);
                    velocities.err_sq[s].push(err_sq);
                    velocities.weight[s].push(weight);
                }
            }
            pad_to_lanes(&mut velocities.t, 0.0);
            for s in 0..2 {
                pad_to_lanes(&mut velocities.rv_kms[s], 0.0);
                pad_to_lanes(&mut velocities.err_sq[s], 1.0);
                pad_to_lanes(&mut velocities.weight[s], 0.0);
            }
        }
        Ok(Self {
            errors_as_given: priors.astrometry_errors.is_as_given(),
            layout,
            dataset,
            polar,
            cartesian,
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
        2 * (self.polar.t.len() + self.cartesian.t.len()) + self.velocities.count
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
        // Borrowed in place: moving the orbit (its solver holds about 6 KB
        // of tables) out of the Result would copy it.
        let built = Orbit::new(&o.campbell_elements());
        let Ok(orbit) = &built else {
            return f64::NEG_INFINITY;
        };
        let mut ll = if self.errors_as_given {
            let mut polar = PolarMisfit {
                orbit,
                data: &self.polar,
                sink: GivenErrors {
                    inv: &self.polar.inv,
                    chi2: [0.0; LANES],
                },
            };
            orbit.for_each_block(&self.polar.t, &mut polar);
            let mut cartesian = CartesianMisfit {
                orbit,
                data: &self.cartesian,
                sink: GivenErrors {
                    inv: &self.cartesian.inv,
                    chi2: polar.sink.chi2,
                },
            };
            orbit.for_each_block(&self.cartesian.t, &mut cartesian);
            self.astrometry_ln_norm - 0.5 * cartesian.sink.chi2.iter().sum::<f64>()
        } else {
            self.astrometry_log_likelihood(orbit, x)
        };
        if self.velocities.count > 0 {
            let (c1, c2) = self.velocity_factors(o);
            let mut misfit = VelocityMisfit {
                orbit,
                data: &self.velocities,
                amplitude: [c1, c2],
                start: 0,
                offset: 0.0,
                jitter_sq: 0.0,
                chi2: [0.0; LANES],
                ln_var: LogSum::new(),
                finite: true,
            };
            let v = &self.velocities;
            for seg in &v.segments {
                misfit.start = seg.start;
                misfit.offset = self.layout.offset_kms(x, seg.instrument);
                let s = self.layout.jitter_kms(x, seg.instrument);
                misfit.jitter_sq = s * s;
                orbit.for_each_block(&v.t[seg.start..seg.start + seg.len], &mut misfit);
            }
            ll -= 0.5 * misfit.total();
        }
        if ll.is_nan() {
            f64::NEG_INFINITY
        } else {
            ll
        }
    }
}

impl Model {
    /// The astrometric ln likelihood under the per-source error model
    /// (module docs of [`crate::astrometry_errors`]).
    fn astrometry_log_likelihood(&self, orbit: &Orbit, x: &[f64]) -> f64 {
        let mut polar = PolarMisfit {
            orbit,
            data: &self.polar,
            sink: ScaledErrors::new(&self.polar.quoted, &self.layout, x),
        };
        orbit.for_each_block(&self.polar.t, &mut polar);
        let mut cartesian = CartesianMisfit {
            orbit,
            data: &self.cartesian,
            sink: polar.sink.continue_with(&self.cartesian.quoted),
        };
        orbit.for_each_block(&self.cartesian.t, &mut cartesian);
        let sums = &cartesian.sink;
        if !sums.finite {
            return f64::NEG_INFINITY;
        }
        let n = (self.polar.t.len() + self.cartesian.t.len()) as f64;
        let misfit = match sums.nu {
            None => 0.5 * sums.chi2.iter().sum::<f64>(),
            Some(nu) => 0.5 * (nu + 2.0) * sums.ln_t.value(),
        };
        -n * LN_2PI - 0.5 * sums.ln_det.value() - misfit
    }
}

/// Where the astrometric residual pairs of a block go.
trait PairSink {
    /// Adds the residual pairs (r1[i], r2[i]) of epochs `first + i`.
    fn add(&mut self, first: usize, r1: &[f64; LANES], r2: &[f64; LANES]);
}

/// Errors as quoted: per-lane sums of the quadratic forms with the
/// precomputed inverse covariances. The lanes' sums are added up in a
/// fixed order at the end (the same on every processor and thread count).
struct GivenErrors<'a> {
    inv: &'a InverseCovariances,
    chi2: [f64; LANES],
}

impl PairSink for GivenErrors<'_> {
    #[inline(always)]
    fn add(&mut self, first: usize, r1: &[f64; LANES], r2: &[f64; LANES]) {
        for i in 0..LANES {
            self.chi2[i] += self.inv.quadratic_form(first + i, r1[i], r2[i]);
        }
    }
}

/// Errors rescaled and widened per source: C = s^2 C_quoted + j^2 diag(1, g)
/// built on every call, with per-lane sums of the quadratic forms (normal),
/// of ln det C and of ln(1 + Q / nu) (Student t), the logarithms kept as
/// mantissas and exponents ([`LogSum`]).
struct ScaledErrors<'a> {
    quoted: &'a QuotedCovariances,
    layout: &'a ParameterLayout,
    x: &'a [f64],
    nu: Option<f64>,
    chi2: [f64; LANES],
    ln_det: LogSum,
    ln_t: LogSum,
    /// False once a covariance was singular or overflowed.
    finite: bool,
}

impl<'a> ScaledErrors<'a> {
    fn new(quoted: &'a QuotedCovariances, layout: &'a ParameterLayout, x: &'a [f64]) -> Self {
        Self {
            quoted,
            layout,
            x,
            nu: layout.degrees_of_freedom(x),
            chi2: [0.0; LANES],
            ln_det: LogSum::new(),
            ln_t: LogSum::new(),
            finite: true,
        }
    }

    /// The same sums, continued over another set of epochs.
    fn continue_with(self, quoted: &'a QuotedCovariances) -> Self {
        Self { quoted, ..self }
    }
}

impl PairSink for ScaledErrors<'_> {
    #[inline(always)]
    fn add(&mut self, first: usize, r1: &[f64; LANES], r2: &[f64; LANES]) {
        let c = self.quoted;
        let mut det = [1.0; LANES];
        let mut t = [1.0; LANES];
        let inv_nu = self.nu.map_or(0.0, |nu| 1.0 / nu);
        for i in 0..LANES {
            let k = first + i;
            let source = c.source[k];
            let s = self.layout.error_scale(self.x, source);
            let j = self.layout.astrometric_jitter_mas(self.x, source);
            let (s2, j2) = (s * s, j * j);
            let c11 = s2 * c.v11[k] + j2;
            let c12 = s2 * c.v12[k];
            let c22 = s2 * c.v22[k] + j2 * c.jitter_factor[k];
            let d = c11 * c22 - c12 * c12;
            let q = (c22 * r1[i] * r1[i] - 2.0 * c12 * r1[i] * r2[i] + c11 * r2[i] * r2[i]) / d;
            let w = c.weight[k];
            self.finite &= w == 0.0 || (d.is_normal() && d > 0.0 && d < 1e300 && q < 1e300);
            self.chi2[i] += w * q;
            // 1 in the padding (w = 0), exactly det C or 1 + Q / nu otherwise.
            det[i] = w * d + (1.0 - w);
            t[i] = w * (1.0 + q * inv_nu) + (1.0 - w);
        }
        self.ln_det.add_products(&det, &[1.0; LANES]);
        if self.nu.is_some() {
            self.ln_t.add_products(&t, &[1.0; LANES]);
        }
    }
}

/// The polar epochs' residual pairs (separation, position angle), block by
/// block, into a [`PairSink`].
struct PolarMisfit<'a, S> {
    orbit: &'a Orbit,
    data: &'a PolarEpochs,
    sink: S,
}

impl<S: PairSink> BlockVisitor for PolarMisfit<'_, S> {
    #[inline(always)]
    fn visit(&mut self, first: usize, sin_e: &[f64; LANES], cos_e: &[f64; LANES]) {
        let p = self.data;
        let mut sep = [0.0; LANES];
        let mut num = [0.0; LANES];
        let mut den = [0.0; LANES];
        let mut d_pa = [0.0; LANES];
        // Padding lanes (past the last epoch) get a zero residual.
        let valid = p.t.len() - first;
        let mut all_small = true;
        for i in 0..LANES {
            let k = first + i;
            let at = self.orbit.sky_offset_from_sin_cos(sin_e[i], cos_e[i]);
            sep[i] = (at.dra * at.dra + at.ddec * at.ddec).sqrt();
            // theta_obs - theta_model from the sine and cosine of the
            // difference (the model's are dRA*/rho and dDec/rho; rho cancels
            // in atan2).
            num[i] = p.sin_pa[k] * at.ddec - p.cos_pa[k] * at.dra;
            den[i] = p.cos_pa[k] * at.ddec + p.sin_pa[k] * at.dra;
            all_small &= is_small_angle(num[i], den[i]) || i >= valid;
            d_pa[i] = if i < valid {
                atan_small(num[i] / den[i])
            } else {
                0.0
            };
        }
        if !all_small {
            for i in 0..valid.min(LANES) {
                d_pa[i] = residual_angle(num[i], den[i]);
            }
        }
        let d_sep: [f64; LANES] = std::array::from_fn(|i| p.sep_mas[first + i] - sep[i]);
        self.sink.add(first, &d_sep, &d_pa);
    }
}

/// The Cartesian epochs' residual pairs (dRA*, dDec) into a [`PairSink`].
struct CartesianMisfit<'a, S> {
    orbit: &'a Orbit,
    data: &'a CartesianEpochs,
    sink: S,
}

impl<S: PairSink> BlockVisitor for CartesianMisfit<'_, S> {
    #[inline(always)]
    fn visit(&mut self, first: usize, sin_e: &[f64; LANES], cos_e: &[f64; LANES]) {
        let c = self.data;
        let mut r1 = [0.0; LANES];
        let mut r2 = [0.0; LANES];
        for i in 0..LANES {
            let k = first + i;
            let at = self.orbit.sky_offset_from_sin_cos(sin_e[i], cos_e[i]);
            r1[i] = c.dra_mas[k] - at.dra;
            r2[i] = c.ddec_mas[k] - at.ddec;
        }
        self.sink.add(first, &r1, &r2);
    }
}

/// Per-lane sums over velocities of r^2 / sigma^2 and ln sigma^2, with
/// sigma^2 = err^2 + s^2 and s the jitter of the velocity's instrument.
struct VelocityMisfit<'a> {
    orbit: &'a Orbit,
    data: &'a VelocityEpochs,
    /// (c1, c2): v_star = offset + c_star * rv_shape.
    amplitude: [f64; 2],
    /// The instrument segment being visited: its first epoch, offset and
    /// squared jitter.
    start: usize,
    offset: f64,
    jitter_sq: f64,
    chi2: [f64; LANES],
    ln_var: LogSum,
    /// False once a variance overflowed (the likelihood is then zero).
    finite: bool,
}

impl VelocityMisfit<'_> {
    /// Sum of r^2 / sigma^2 + ln(2 pi sigma^2) over the velocities; +inf if
    /// a variance overflowed.
    fn total(&self) -> f64 {
        if !self.finite {
            return f64::INFINITY;
        }
        self.chi2.iter().sum::<f64>() + self.data.count as f64 * LN_2PI + self.ln_var.value()
    }
}

impl BlockVisitor for VelocityMisfit<'_> {
    #[inline(always)]
    fn visit(&mut self, first: usize, sin_e: &[f64; LANES], cos_e: &[f64; LANES]) {
        let v = self.data;
        let mut var = [[1.0; LANES]; 2];
        for i in 0..LANES {
            let k = self.start + first + i;
            let shape = self.orbit.rv_shape_from_sin_cos(sin_e[i], cos_e[i]);
            for (s, var_s) in var.iter_mut().enumerate() {
                let w = v.weight[s][k];
                let sigma_sq = v.err_sq[s][k] + self.jitter_sq;
                let r = v.rv_kms[s][k] - (self.offset + self.amplitude[s] * shape);
                self.chi2[i] += w * (r * r / sigma_sq);
                // 1 for an empty slot (w = 0), exactly sigma^2 otherwise.
                var_s[i] = w * sigma_sq + (1.0 - w);
                self.finite &= sigma_sq <= f64::MAX;
            }
        }
        self.ln_var.add_products(&var[0], &var[1]);
    }
}

/// Sum of the logarithms of many positive normal numbers with one
/// logarithm at the end: each lane keeps a product of mantissas in [1, 2)
/// and a sum of binary exponents, which is exact.
struct LogSum {
    mantissa: [f64; LANES],
    exponent: [i64; LANES],
}

impl LogSum {
    #[inline(always)]
    fn new() -> Self {
        Self {
            mantissa: [1.0; LANES],
            exponent: [0; LANES],
        }
    }

    /// Adds ln a[i] + ln b[i] to lane i (a, b positive normal numbers).
    #[inline(always)]
    fn add_products(&mut self, a: &[f64; LANES], b: &[f64; LANES]) {
        for i in 0..LANES {
            let (ma, ea) = split_exponent(a[i]);
            let (mb, eb) = split_exponent(b[i]);
            // In [1, 8): no overflow, and one more split renormalises it.
            let (m, e) = split_exponent(self.mantissa[i] * ma * mb);
            self.mantissa[i] = m;
            self.exponent[i] += ea + eb + e;
        }
    }

    fn value(&self) -> f64 {
        // The lanes' mantissas are in [1, 2), so their product is below
        // 2^LANES: one logarithm for all of them.
        let mantissas: f64 = self.mantissa.iter().product();
        let exponents: i64 = self.exponent.iter().sum();
        mantissas.ln() + exponents as f64 * LN_2
    }
}

/// (m, e) with v = m 2^e and m in [1, 2), for a positive normal v (the
/// fields of the IEEE 754 binary64 format).
#[inline(always)]
fn split_exponent(v: f64) -> (f64, i64) {
    const MANTISSA_BITS: u64 = (1 << 52) - 1;
    const ONE_BITS: u64 = 1023 << 52;
    let bits = v.to_bits();
    let e = (bits >> 52) as i64 - 1023;
    (f64::from_bits((bits & MANTISSA_BITS) | ONE_BITS), e)
}

/// atan2(y, x), the position-angle residual: when it is small (x > 0 and
/// |y| <= 7/16 x, |residual| < 0.41 rad, as for every epoch near the
/// posterior) from the arctangent polynomial below, about three times
/// cheaper than the platform's atan2; elsewhere the platform's atan2.
#[inline(always)]
fn residual_angle(y: f64, x: f64) -> f64 {
    if is_small_angle(y, x) {
        atan_small(y / x)
    } else {
        y.atan2(x)
    }
}

/// Whether atan2(y, x) is within the range of [`atan_small`] (x > 0 and
/// |y| <= 7/16 x).
#[inline(always)]
fn is_small_angle(y: f64, x: f64) -> bool {
    x > 0.0 && x < f64::INFINITY && y.abs() <= 0.4375 * x
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

#[cfg(test)]
mod tests {
    use super::{atan_small, residual_angle, LogSum, LANES};

    /// Reference: the sum of the platform's ln, over values from 1e-300 to
    /// 1e300 (and exact powers of two, whose mantissa is 1).
    #[test]
    fn log_sum_by_exponent_and_mantissa_matches_the_sum_of_logs() {
        let mut sum = LogSum::new();
        let mut reference = 0.0;
        for block in 0..200 {
            let a: [f64; LANES] = std::array::from_fn(|i| {
                let k = (block * LANES + i) as f64;
                10f64.powf(-300.0 + 600.0 * ((k * 0.618_034) % 1.0))
            });
            let b: [f64; LANES] = std::array::from_fn(|i| 2f64.powi(i as i32 - 4) * 1.75);
            sum.add_products(&a, &b);
            reference += a.iter().chain(&b).map(|v| v.ln()).sum::<f64>();
        }
        let got = sum.value();
        assert!(
            (got - reference).abs() <= 1e-13 * reference.abs(),
            "{got} vs {reference}"
        );
    }

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
