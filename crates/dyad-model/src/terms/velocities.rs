//! Radial velocities: line-of-sight velocities of either star, each
//! instrument with its own offset (the systemic velocity as it measures it)
//! and jitter (extra scatter added in quadrature).
//!
//! With sigma^2 = err^2 + s_k^2 and s_k the jitter of instrument k,
//! ln L = -0.5 (v_obs - v_model)^2 / sigma^2 - 0.5 ln(2 pi sigma^2), fully
//! normalised. The model velocities v_star = gamma_k + c_star * shape(t)
//! take their factors from the orbit
//! ([`OrbitalParameters::velocity_factors`]: the relative semi-amplitude
//! and q with the sky projection, the sampled K1 and K2 without). Both
//! stars' velocities taken by one instrument at one instant share one
//! Kepler solve; the sum of ln sigma^2 is kept by mantissa and exponent
//! ([`LogSum`]).

use std::collections::HashMap;

use rand::RngCore;

use dyad_orbit::kepler::LANES;
use dyad_orbit::{BlockVisitor, Orbit};

use super::lanes::{pad_to_lanes, LogSum, LN_2PI};
use super::{DataTerm, OrbitCoverage};
use crate::data::{Dataset, Star};
use crate::error::ModelError;
use crate::params::{
    check_domain, Coord, LayoutBuilder, ModelPriors, OrbitalParameters, PhysicalParameters,
    ScaledPrior,
};

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

/// The radial-velocity term.
#[derive(Debug, Clone)]
pub struct RadialVelocities {
    data: VelocityEpochs,
    instruments: Vec<String>,
    has_primary: bool,
    has_secondary: bool,
    /// Per instrument: priors of the offset and of the jitter.
    offset_priors: Vec<ScaledPrior>,
    jitter_priors: Vec<ScaledPrior>,
    offsets: Vec<Coord>,
    jitters: Vec<Coord>,
}

impl RadialVelocities {
    /// The velocities of a data set, with the offset and jitter priors of
    /// `priors` (one per instrument of the data set).
    pub fn new(dataset: &Dataset, priors: &ModelPriors) -> Result<Self, ModelError> {
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
            data: velocities,
            instruments: dataset.instruments.clone(),
            has_primary: dataset.velocities.iter().any(|v| v.star == Star::Primary),
            has_secondary: dataset.velocities.iter().any(|v| v.star == Star::Secondary),
            offset_priors: priors.offset_kms.clone(),
            jitter_priors: priors.jitter_kms.clone(),
            offsets: Vec::new(),
            jitters: Vec::new(),
        })
    }

    /// Number of instruments (each with an offset and a jitter).
    pub fn instrument_count(&self) -> usize {
        self.offsets.len()
    }

    /// Offset of instrument `k`, km/s.
    #[inline]
    pub fn offset_kms(&self, x: &[f64], k: usize) -> f64 {
        self.offsets[k].value(x)
    }

    /// Jitter of instrument `k`, km/s.
    #[inline]
    pub fn jitter_kms(&self, x: &[f64], k: usize) -> f64 {
        self.jitters[k].value(x)
    }
}

impl DataTerm for RadialVelocities {
    fn name(&self) -> &'static str {
        "radial velocities"
    }

    fn coverage(&self) -> OrbitCoverage {
        OrbitCoverage {
            sky_projection: false,
            ascending_node: true,
            primary_velocity: self.has_primary,
            secondary_velocity: self.has_secondary,
        }
    }

    fn observation_count(&self) -> usize {
        self.data.count
    }

    fn declare_parameters(&mut self, b: &mut LayoutBuilder) -> Result<(), ModelError> {
        for p in &self.jitter_priors {
            check_domain(p, "a jitter", 0.0, f64::INFINITY, false)?;
        }
        self.offsets.clear();
        self.jitters.clear();
        for (k, name) in self.instruments.iter().enumerate() {
            self.offsets.push(b.scalar(
                &self.offset_priors[k],
                false,
                &format!("offset_kms[{name}]"),
                "km/s",
            ));
            self.jitters.push(b.scalar(
                &self.jitter_priors[k],
                true,
                &format!("ln_jitter_kms[{name}]"),
                "ln(km/s)",
            ));
        }
        Ok(())
    }

    fn for_each_prior_term(&self, x: &[f64], term: &mut dyn FnMut(&'static str, f64)) {
        for (c, p) in self.offsets.iter().zip(&self.offset_priors) {
            term("offset", c.ln_prior(x, p));
        }
        for (c, p) in self.jitters.iter().zip(&self.jitter_priors) {
            term("jitter", c.ln_prior(x, p));
        }
    }

    fn sample_prior(&self, rng: &mut dyn RngCore, x: &mut [f64]) {
        for (c, p) in self.offsets.iter().zip(&self.offset_priors) {
            c.sample_prior(rng, p, (f64::NEG_INFINITY, f64::INFINITY), x);
        }
        for (c, p) in self.jitters.iter().zip(&self.jitter_priors) {
            c.sample_prior(rng, p, (f64::MIN_POSITIVE, f64::INFINITY), x);
        }
    }

    fn set_from_physical(&self, p: &PhysicalParameters, x: &mut [f64]) -> Result<(), ModelError> {
        let need = |v: Option<&f64>, what: &str| {
            v.copied()
                .ok_or_else(|| ModelError::InvalidModel(format!("{what} is needed but not given")))
        };
        for (k, c) in self.offsets.iter().enumerate() {
            let v = need(p.offsets_kms.get(k), "an instrument offset")?;
            c.set(x, v, "an offset")?;
        }
        for (k, c) in self.jitters.iter().enumerate() {
            let v = need(p.jitters_kms.get(k), "an instrument jitter")?;
            c.set(x, v, "a jitter")?;
        }
        Ok(())
    }

    fn log_likelihood(&self, orbit: &Orbit, o: &OrbitalParameters, x: &[f64]) -> f64 {
        let (c1, c2) = o.velocity_factors();
        let mut misfit = VelocityMisfit {
            orbit,
            data: &self.data,
            amplitude: [c1, c2],
            start: 0,
            offset: 0.0,
            jitter_sq: 0.0,
            chi2: [0.0; LANES],
            ln_var: LogSum::new(),
            finite: true,
        };
        let v = &self.data;
        for seg in &v.segments {
            misfit.start = seg.start;
            misfit.offset = self.offset_kms(x, seg.instrument);
            let s = self.jitter_kms(x, seg.instrument);
            misfit.jitter_sq = s * s;
            orbit.for_each_block(&v.t[seg.start..seg.start + seg.len], &mut misfit);
        }
        -0.5 * misfit.total()
    }

    fn derived_names_units(&self) -> Vec<(String, String)> {
        self.instruments
            .iter()
            .flat_map(|name| {
                [
                    (format!("offset_kms[{name}]"), "km/s".to_owned()),
                    (format!("jitter_kms[{name}]"), "km/s".to_owned()),
                ]
            })
            .collect()
    }

    fn derived(&self, _: &OrbitalParameters, x: &[f64], out: &mut [f64]) {
        for (k, pair) in out.chunks_exact_mut(2).enumerate() {
            pair[0] = self.offset_kms(x, k);
            pair[1] = self.jitter_kms(x, k);
        }
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
