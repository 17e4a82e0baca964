//! Parallel tempering: a ladder of tempered ensembles with swaps between
//! neighbouring temperatures and an adaptive ladder (Vousden, Farr & Mandel
//! 2016, MNRAS 455, 1919).
//!
//! Rung k samples log_prior + beta_k * log_likelihood, with betas descending
//! from beta_0 = 1 (the cold chain, whose samples are the posterior). The
//! ladder adapts only during the burn-in phase, with a hyperbolically decaying
//! rate, and is frozen afterwards so that evidence estimates use one fixed
//! ladder.

use rand::seq::SliceRandom;
use rand::Rng;
use serde::{Deserialize, Serialize};

use crate::ensemble::Rung;
use crate::error::SamplerError;
use crate::rng::StreamRng;

/// Log-likelihoods of every walker at every thinned step after burn-in, per
/// temperature: the input of the evidence estimators.
#[derive(Clone, Debug, PartialEq)]
pub struct TemperedLogLikelihoods {
    /// Inverse temperatures, descending: `betas[0] = 1.0` (cold), last is the hottest, may be 0.
    pub betas: Vec<f64>,
    /// Walkers per temperature.
    pub n_walkers: usize,
    /// Per temperature, step-major: `[step * n_walkers + walker]`.
    pub log_likelihoods: Vec<Vec<f64>>,
}

/// Settings of a tempered run.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct TemperingConfig {
    /// Number of temperatures (>= 2).
    pub n_temperatures: usize,
    /// Temperature of the hottest rung of the initial geometric ladder;
    /// `f64::INFINITY` makes the hottest rung sample the prior (beta = 0).
    pub max_temperature: f64,
    /// Adapt the ladder during burn-in (needs >= 3 temperatures).
    pub adapt: bool,
    /// Steps of burn-in during which the ladder adapts; the ladder is frozen
    /// afterwards and tempered log-likelihoods are recorded from then on.
    pub burn_in_steps: u64,
    /// Adaptation lag t0 of Vousden et al. (2016, eq. 12): the rate decays as t0 / (t + t0).
    pub adaptation_lag: f64,
    /// Adaptation time scale nu of Vousden et al. (2016, eq. 12).
    pub adaptation_time: f64,
}

impl Default for TemperingConfig {
    fn default() -> Self {
        Self {
            n_temperatures: 8,
            max_temperature: f64::INFINITY,
            adapt: true,
            burn_in_steps: 2000,
            // Values used by the authors' reference implementation.
            adaptation_lag: 10_000.0,
            adaptation_time: 100.0,
        }
    }
}

impl TemperingConfig {
    pub(crate) fn validate(&self) -> Result<(), SamplerError> {
        if self.n_temperatures < 2 {
            return Err(SamplerError::Config(
                "parallel tempering needs at least 2 temperatures".into(),
            ));
        }
        if self.max_temperature.is_nan() || self.max_temperature <= 1.0 {
            return Err(SamplerError::Config(format!(
                "the hottest temperature must exceed 1, got {}",
                self.max_temperature
            )));
        }
        if !(self.adaptation_lag > 0.0 && self.adaptation_time > 0.0) {
            return Err(SamplerError::Config(
                "adaptation lag and time must be positive".into(),
            ));
        }
        Ok(())
    }

    /// The initial ladder, descending in beta: geometric in temperature from 1
    /// to `max_temperature`; with an infinite maximum the finite rungs grow by
    /// a factor sqrt(10) in temperature each (T_k = 10^(k/2), a common default)
    /// and the hottest rung is beta = 0. Adaptation then moves the inner rungs.
    pub fn initial_betas(&self) -> Vec<f64> {
        let n = self.n_temperatures;
        if self.max_temperature.is_infinite() {
            let mut b: Vec<f64> = (0..n - 1).map(|k| 10f64.powf(-0.5 * k as f64)).collect();
            b.push(0.0);
            b
        } else {
            let ln_tmax = self.max_temperature.ln();
            (0..n)
                .map(|k| (-ln_tmax * k as f64 / (n - 1) as f64).exp())
                .collect()
        }
    }
}

/// Swap and adaptation book-keeping of the ladder.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Ladder {
    pub frozen: bool,
    /// Adaptation steps done (t in Vousden et al. 2016, eq. 12).
    pub adapt_steps: u64,
    /// Per neighbouring pair (k, k+1): swaps accepted / proposed since the freeze
    /// (or since the start while adapting).
    pub accepted: Vec<u64>,
    pub proposed: Vec<u64>,
    /// Permutation buffer, preallocated.
    pub perm: Vec<usize>,
    /// Per-step swap acceptance of each pair (scratch).
    pub step_accept: Vec<f64>,
}

impl Ladder {
    pub fn new(n_temps: usize, n_walkers: usize) -> Self {
        Self {
            frozen: n_temps < 2,
            adapt_steps: 0,
            accepted: vec![0; n_temps.saturating_sub(1)],
            proposed: vec![0; n_temps.saturating_sub(1)],
            perm: (0..n_walkers).collect(),
            step_accept: vec![0.0; n_temps.saturating_sub(1)],
        }
    }

    /// Proposes swaps between every pair of neighbouring temperatures, from
    /// the hottest pair down, each walker of rung k paired with a random walker
    /// of rung k+1; acceptance min(1, exp((beta_k - beta_{k+1}) (L_{k+1} - L_k)))
    /// (Vousden et al. 2016, eq. 4).
    pub fn swap(&mut self, rungs: &mut [Rung], rng: &mut StreamRng) {
        let n_temps = rungs.len();
        let n_walkers = self.perm.len();
        for k in (0..n_temps - 1).rev() {
            for (i, p) in self.perm.iter_mut().enumerate() {
                *p = i;
            }
            self.perm.shuffle(rng);
            let (lo, hi) = rungs.split_at_mut(k + 1);
            let (cold, hot) = (&mut lo[k], &mut hi[0]);
            let dbeta = cold.beta - hot.beta;
            let mut acc = 0u64;
            for w in 0..n_walkers {
                let h = self.perm[w];
                let (a, b) = (&mut cold.walkers[w], &mut hot.walkers[h]);
                let ln_ratio = dbeta * (b.log_likelihood - a.log_likelihood);
                let u: f64 = rng.gen();
                if u.ln() < ln_ratio {
                    std::mem::swap(&mut a.position, &mut b.position);
                    std::mem::swap(&mut a.log_prior, &mut b.log_prior);
                    std::mem::swap(&mut a.log_likelihood, &mut b.log_likelihood);
                    acc += 1;
                }
            }
            self.accepted[k] += acc;
            self.proposed[k] += n_walkers as u64;
            self.step_accept[k] = acc as f64 / n_walkers as f64;
        }
    }

    /// One adaptation step of the ladder (Vousden et al. 2016, eq. 11-13):
    /// S_k = ln(T_{k+1} - T_k) changes by kappa(t) (A_k - A_{k+1}), with
    /// kappa(t) = t0 / (nu (t + t0)). The coldest and hottest temperatures stay fixed.
    pub fn adapt(&mut self, rungs: &mut [Rung], config: &TemperingConfig) {
        let n = rungs.len();
        if n < 3 {
            return;
        }
        let t = self.adapt_steps as f64;
        let kappa = config.adaptation_lag / (config.adaptation_time * (t + config.adaptation_lag));
        // Temperatures of rungs 0..n-1 (the hottest, possibly infinite, excluded
        // from the spacing; its own spacing absorbs the change).
        let mut temp_prev = 1.0 / rungs[0].beta;
        let mut new_temp = temp_prev;
        for k in 0..n - 2 {
            let t_next = 1.0 / rungs[k + 1].beta;
            let ds = kappa * (self.step_accept[k] - self.step_accept[k + 1]);
            let spacing = (t_next - temp_prev) * ds.exp();
            temp_prev = t_next;
            new_temp += spacing;
            rungs[k + 1].beta = 1.0 / new_temp;
        }
        self.adapt_steps += 1;
    }

    /// Starts counting swaps afresh (at the freeze).
    pub fn reset_counts(&mut self) {
        self.accepted.iter_mut().for_each(|a| *a = 0);
        self.proposed.iter_mut().for_each(|a| *a = 0);
    }

    /// Swap acceptance fraction of each neighbouring pair.
    pub fn acceptance(&self) -> Vec<f64> {
        self.accepted
            .iter()
            .zip(&self.proposed)
            .map(|(&a, &p)| if p == 0 { 0.0 } else { a as f64 / p as f64 })
            .collect()
    }
}
