//! Convergence diagnostics for ensemble MCMC output: integrated
//! autocorrelation time, rank-normalised split R-hat and bulk/tail effective
//! sample sizes.
//!
//! Pure functions over plain slices; nothing here knows about astronomy or
//! about the sampler's storage.
//!
//! # Layout of the draws
//! For one parameter the draws are *step-major*: `draws[step * n_walkers +
//! walker]`. For several parameters ([`diagnose`]) they are
//! `samples[(step * n_walkers + walker) * n_dim + dim]`.
//!
//! # Methods
//! - Integrated autocorrelation time: the normalised autocorrelation function
//!   of each walker's series (FFT, zero-padded to a power of two of at least
//!   twice the length), averaged over walkers, summed with Sokal's automatic
//!   window: the smallest lag `M` with `M >= c * tau(M)`, `c = 5`
//!   (Sokal 1997, "Monte Carlo methods in statistical mechanics", sect. 3;
//!   Goodman & Weare 2010, CAMCoS 5, 65, sect. 3). The estimate is trusted
//!   when the chain is longer than 50 `tau` (common practice).
//! - R-hat and ESS: Vehtari, Gelman, Simpson, Carpenter & Buerkner (2021),
//!   "Rank-normalization, folding, and localization: an improved R-hat for
//!   assessing convergence of MCMC", Bayesian Analysis 16, 667. Each walker
//!   is treated as one chain, each chain is split in two halves (the middle
//!   draw of an odd-length chain is dropped). R-hat is the larger of the
//!   bulk (rank-normalised) and tail (folded, rank-normalised) values; bulk
//!   ESS is the ESS of the rank-normalised split chains; tail ESS is the
//!   smaller of the ESS of the indicators `x <= q_0.05` and `x <= q_0.95`.
//!   The autocorrelation sum uses Geyer's initial positive and initial
//!   monotone sequences (Geyer 1992, Statistical Science 7, 473).
//!   Conventions (Blom offset 3/8, average ranks for ties, type-7 quantiles,
//!   the lower bound `1/log10(N)` on the autocorrelation time) follow the
//!   paper's reference implementation choices as also used by ArviZ 0.23.4,
//!   against which the tests check agreement to 1e-9 relative.
//!
//! # Invalid input
//! The `Result`-returning functions report bad shapes or non-finite draws as
//! [`DiagnosticsError`]. The plain `f64` convenience functions return NaN in
//! those cases (as general-purpose statistics libraries do).

use std::sync::Arc;

use rustfft::num_complex::Complex;
use rustfft::{Fft, FftPlanner};
use serde::Serialize;
use thiserror::Error;

/// Sokal's window constant `c`: the window is the smallest `M >= c tau(M)`.
pub const SOKAL_WINDOW_FACTOR: f64 = 5.0;

/// A chain is long enough to trust its autocorrelation time when it has more
/// than this many autocorrelation times of steps (common practice).
pub const MIN_STEPS_PER_TAU: f64 = 50.0;

/// Fewest steps for R-hat and ESS (each split half needs two draws).
pub const MIN_STEPS_RANK: usize = 4;

/// Fewest steps for an autocorrelation time.
pub const MIN_STEPS_AUTOCORR: usize = 2;

/// Why a diagnostic could not be computed.
#[derive(Debug, Clone, PartialEq, Error)]
#[non_exhaustive]
pub enum DiagnosticsError {
    /// The slice length does not match the declared shape.
    #[error("draws hold {len} values but the shape (steps {n_steps} x walkers {n_walkers} x dims {n_dim}) needs {expected}")]
    ShapeMismatch {
        /// Length of the slice given.
        len: usize,
        /// Declared number of steps.
        n_steps: usize,
        /// Declared number of walkers.
        n_walkers: usize,
        /// Declared number of parameters.
        n_dim: usize,
        /// Length the shape needs.
        expected: usize,
    },
    /// Too few steps for this diagnostic.
    #[error("{n_steps} steps given, this diagnostic needs at least {min}")]
    TooFewSteps {
        /// Steps given.
        n_steps: usize,
        /// Steps needed.
        min: usize,
    },
    /// No walkers or no parameters.
    #[error("need at least one walker and one parameter")]
    Empty,
    /// A draw is NaN or infinite.
    #[error("draw at flat index {index} is not finite ({value})")]
    NonFinite {
        /// Flat index into the slice given.
        index: usize,
        /// The offending value.
        value: f64,
    },
}

/// Integrated autocorrelation time of one parameter, with its window.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct AutocorrTime {
    /// Integrated autocorrelation time in steps, `1 + 2 sum_{t=1}^{M} rho(t)`.
    /// Infinite when some walker never moved (its autocorrelation is
    /// undefined and the chain has certainly not mixed).
    pub tau: f64,
    /// Sokal window `M` (lags summed).
    pub window: usize,
    /// Whether a window with `M >= c tau(M)` was found within the chain.
    pub window_found: bool,
    /// Steps in the chain.
    pub n_steps: usize,
    /// Whether `n_steps > 50 tau` and the window was found: only then is
    /// `tau` a trustworthy estimate.
    pub long_enough: bool,
}

/// Diagnostics of one parameter.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ParameterDiagnostics {
    /// Integrated autocorrelation time (steps).
    pub tau: f64,
    /// Sokal window used for `tau`.
    pub tau_window: usize,
    /// `n_steps > 50 tau` (and a window was found).
    pub tau_long_enough: bool,
    /// Rank-normalised split R-hat, max of bulk and folded.
    pub rhat: f64,
    /// Bulk effective sample size (draws, all walkers together).
    #[serde(rename = "effective_draws_bulk")]
    pub ess_bulk: f64,
    /// Tail effective sample size (5 and 95 per cent quantiles).
    #[serde(rename = "effective_draws_tail")]
    pub ess_tail: f64,
}

/// Diagnostics of every parameter of a run, in parameter order.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Diagnostics {
    /// Steps used.
    pub n_steps: usize,
    /// Walkers (each treated as a chain).
    pub n_walkers: usize,
    /// One entry per parameter.
    pub parameters: Vec<ParameterDiagnostics>,
}

impl Diagnostics {
    /// Largest R-hat over parameters (NaN entries ignored; NaN if all are).
    pub fn max_rhat(&self) -> f64 {
        fold_finite(self.parameters.iter().map(|p| p.rhat), f64::max)
    }
    /// Smallest bulk ESS over parameters.
    pub fn min_ess_bulk(&self) -> f64 {
        fold_finite(self.parameters.iter().map(|p| p.ess_bulk), f64::min)
    }
    /// Smallest tail ESS over parameters.
    pub fn min_ess_tail(&self) -> f64 {
        fold_finite(self.parameters.iter().map(|p| p.ess_tail), f64::min)
    }
    /// Largest autocorrelation time over parameters (infinite if any walker
    /// never moved).
    pub fn max_tau(&self) -> f64 {
        fold_finite(self.parameters.iter().map(|p| p.tau), f64::max)
    }
    /// Whether every parameter's chain is longer than 50 autocorrelation times.
    pub fn all_long_enough(&self) -> bool {
        self.parameters.iter().all(|p| p.tau_long_enough)
    }
}

fn fold_finite(values: impl Iterator<Item = f64>, f: fn(f64, f64) -> f64) -> f64 {
    values.filter(|v| !v.is_nan()).reduce(f).unwrap_or(f64::NAN)
}

/// Reusable FFT plans and buffers for autocorrelation estimates: call it
/// every few hundred steps without re-planning or reallocating (plans are
/// rebuilt only when the padded length changes, i.e. when the chain doubles).
pub struct AutocorrEstimator {
    window_factor: f64,
    fft_len: usize,
    forward: Option<Arc<dyn Fft<f64>>>,
    inverse: Option<Arc<dyn Fft<f64>>>,
    buffer: Vec<Complex<f64>>,
    scratch: Vec<Complex<f64>>,
    power: Vec<f64>,
    lags: Vec<f64>,
    chain_means: Vec<f64>,
    series: Vec<f64>,
    rho: Vec<f64>,
}

impl std::fmt::Debug for AutocorrEstimator {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("AutocorrEstimator")
            .field("window_factor", &self.window_factor)
            .field("fft_len", &self.fft_len)
            .finish_non_exhaustive()
    }
}

impl Default for AutocorrEstimator {
    fn default() -> Self {
        Self::new()
    }
}

/// How the per-chain autocovariances are combined.
#[derive(Clone, Copy, PartialEq)]
enum Combine {
    /// Mean over chains of the normalised autocorrelation `rho_c(t)`.
    MeanAutocorrelation,
    /// Mean over chains of the biased autocovariance `(1/n) sum y_i y_{i+t}`.
    MeanAutocovariance,
}

impl AutocorrEstimator {
    /// Estimator with Sokal's `c = 5`.
    pub fn new() -> Self {
        Self::with_window_factor(SOKAL_WINDOW_FACTOR)
    }

    /// Estimator with another window constant `c` (Sokal suggests 4 to 10;
    /// non-finite or non-positive values fall back to 5).
    pub fn with_window_factor(window_factor: f64) -> Self {
        let window_factor = if window_factor.is_finite() && window_factor > 0.0 {
            window_factor
        } else {
            SOKAL_WINDOW_FACTOR
        };
        Self {
            window_factor,
            fft_len: 0,
            forward: None,
            inverse: None,
            buffer: Vec::new(),
            scratch: Vec::new(),
            power: Vec::new(),
            lags: Vec::new(),
            chain_means: Vec::new(),
            series: Vec::new(),
            rho: Vec::new(),
        }
    }

    /// Integrated autocorrelation time of one parameter, step-major draws
    /// `draws[step * n_walkers + walker]`.
    pub fn estimate(
        &mut self,
        draws: &[f64],
        n_steps: usize,
        n_walkers: usize,
    ) -> Result<AutocorrTime, DiagnosticsError> {
        check_shape(draws, n_steps, n_walkers, 1, MIN_STEPS_AUTOCORR)?;
        let mut series = std::mem::take(&mut self.series);
        series.clear();
        series.resize(n_steps * n_walkers, 0.0);
        transpose_to_chains(draws, n_steps, n_walkers, 1, 0, &mut series);
        let result = self.estimate_chain_major(&series, n_steps, n_walkers);
        self.series = series;
        Ok(result)
    }

    /// Same, for draws already laid out chain-major `series[walker * n_steps + step]`.
    fn estimate_chain_major(
        &mut self,
        series: &[f64],
        n_steps: usize,
        n_walkers: usize,
    ) -> AutocorrTime {
        let any_constant =
            self.mean_autocov(series, n_walkers, n_steps, Combine::MeanAutocorrelation);
        if any_constant {
            return AutocorrTime {
                tau: f64::INFINITY,
                window: n_steps - 1,
                window_found: false,
                n_steps,
                long_enough: false,
            };
        }
        // Sokal's automatic window: tau(M) = 1 + 2 sum_{t=1}^{M} rho(t), take the
        // smallest M with M >= c tau(M) (Sokal 1997, sect. 3).
        let mut tau = 1.0;
        let mut window = n_steps - 1;
        let mut window_found = false;
        for m in 1..n_steps {
            tau += 2.0 * self.lags[m];
            if m as f64 >= self.window_factor * tau {
                window = m;
                window_found = true;
                break;
            }
        }
        let long_enough = window_found && (n_steps as f64) > MIN_STEPS_PER_TAU * tau;
        AutocorrTime {
            tau,
            window,
            window_found,
            n_steps,
            long_enough,
        }
    }

    fn prepare_fft(&mut self, n: usize) {
        // Zero-pad to a power of two >= 2n so the circular correlation equals
        // the linear one for all lags < n.
        let len = (2 * n).next_power_of_two();
        if len != self.fft_len || self.forward.is_none() {
            let mut planner = FftPlanner::<f64>::new();
            let forward = planner.plan_fft_forward(len);
            let inverse = planner.plan_fft_inverse(len);
            let scratch_len = forward
                .get_inplace_scratch_len()
                .max(inverse.get_inplace_scratch_len());
            self.scratch.resize(scratch_len, Complex::new(0.0, 0.0));
            self.forward = Some(forward);
            self.inverse = Some(inverse);
            self.fft_len = len;
        }
        self.buffer.resize(len, Complex::new(0.0, 0.0));
        self.power.resize(len, 0.0);
        self.lags.resize(n, 0.0);
    }

    /// Combined autocorrelation or autocovariance of `n_chain` chains of
    /// `n_draw` draws, `data[chain * n_draw + t]`, into `self.lags[0..n_draw]`;
    /// chain means into `self.chain_means`. Returns whether some chain has
    /// zero variance (its normalised autocorrelation is then undefined and
    /// is left out of the mean).
    ///
    /// Two real chains are packed into one complex FFT (real and imaginary
    /// parts) and the power spectra of all chains are summed with weights, so
    /// the cost is n_chain/2 forward transforms and one inverse transform.
    fn mean_autocov(
        &mut self,
        data: &[f64],
        n_chain: usize,
        n_draw: usize,
        combine: Combine,
    ) -> bool {
        self.prepare_fft(n_draw);
        let len = self.fft_len;
        self.chain_means.clear();
        for chain in data.chunks_exact(n_draw) {
            self.chain_means
                .push(chain.iter().sum::<f64>() / n_draw as f64);
        }
        self.power.iter_mut().for_each(|p| *p = 0.0);
        let mut any_constant = false;
        let mut n_used = 0usize;
        let (Some(forward), Some(_)) = (self.forward.clone(), self.inverse.as_ref()) else {
            return true;
        };
        let mut pair_start = 0;
        while pair_start < n_chain {
            let a = pair_start;
            let b = (pair_start + 1 < n_chain).then_some(pair_start + 1);
            let chain_a = &data[a * n_draw..(a + 1) * n_draw];
            let mean_a = self.chain_means[a];
            let mut ss_a = 0.0;
            let mut ss_b = 0.0;
            for (slot, &x) in self.buffer.iter_mut().zip(chain_a) {
                let y = x - mean_a;
                ss_a += y * y;
                *slot = Complex::new(y, 0.0);
            }
            if let Some(b) = b {
                let chain_b = &data[b * n_draw..(b + 1) * n_draw];
                let mean_b = self.chain_means[b];
                for (slot, &x) in self.buffer.iter_mut().zip(chain_b) {
                    let y = x - mean_b;
                    ss_b += y * y;
                    slot.im = y;
                }
            }
            self.buffer[n_draw..]
                .iter_mut()
                .for_each(|c| *c = Complex::new(0.0, 0.0));
            let weight = |ss: f64, any_constant: &mut bool, n_used: &mut usize| match combine {
                Combine::MeanAutocovariance => {
                    *n_used += 1;
                    1.0 / n_draw as f64
                }
                Combine::MeanAutocorrelation => {
                    if ss > 0.0 {
                        *n_used += 1;
                        1.0 / ss
                    } else {
                        *any_constant = true;
                        0.0
                    }
                }
            };
            let w_a = weight(ss_a, &mut any_constant, &mut n_used);
            let w_b = if b.is_some() {
                weight(ss_b, &mut any_constant, &mut n_used)
            } else {
                0.0
            };
            forward.process_with_scratch(&mut self.buffer, &mut self.scratch);
            // With z = a + i b: A_k = (Z_k + conj Z_{-k}) / 2 and
            // B_k = (Z_k - conj Z_{-k}) / (2i), so |A_k|^2 = |Z_k + conj Z_{-k}|^2 / 4
            // and |B_k|^2 = |Z_k - conj Z_{-k}|^2 / 4.
            for k in 0..len {
                let z = self.buffer[k];
                let zc = self.buffer[(len - k) % len].conj();
                let pa = (z + zc).norm_sqr() * 0.25;
                let pb = (z - zc).norm_sqr() * 0.25;
                self.power[k] += w_a * pa + w_b * pb;
            }
            pair_start += 2;
        }
        let Some(inverse) = self.inverse.clone() else {
            return true;
        };
        for (slot, &p) in self.buffer.iter_mut().zip(&self.power) {
            *slot = Complex::new(p, 0.0);
        }
        inverse.process_with_scratch(&mut self.buffer, &mut self.scratch);
        // rustfft does not normalise: divide by the transform length; and
        // average over the chains that contributed.
        let scale = 1.0 / (len as f64 * n_used.max(1) as f64);
        for (lag, c) in self.lags.iter_mut().zip(&self.buffer) {
            *lag = c.re * scale;
        }
        any_constant
    }
}

/// Integrated autocorrelation time (steps) of one parameter, step-major
/// draws; NaN for an invalid shape or non-finite draws, infinite when a
/// walker never moved. See [`AutocorrEstimator`] for repeated calls.
pub fn integrated_autocorr_time(draws: &[f64], n_steps: usize, n_walkers: usize) -> f64 {
    autocorr_time(draws, n_steps, n_walkers).map_or(f64::NAN, |a| a.tau)
}

/// Integrated autocorrelation time with its Sokal window and the 50-tau
/// length check.
pub fn autocorr_time(
    draws: &[f64],
    n_steps: usize,
    n_walkers: usize,
) -> Result<AutocorrTime, DiagnosticsError> {
    AutocorrEstimator::new().estimate(draws, n_steps, n_walkers)
}

/// Rank-normalised split R-hat (max of bulk and folded), each walker a
/// chain; NaN on invalid input or when all draws are equal.
pub fn split_rhat(draws: &[f64], n_steps: usize, n_walkers: usize) -> f64 {
    DiagnosticsWorkspace::new()
        .split_rhat(draws, n_steps, n_walkers)
        .unwrap_or(f64::NAN)
}

/// Bulk effective sample size (draws of all walkers together); NaN on
/// invalid input or fewer than 8 steps (split halves shorter than 4).
pub fn ess_bulk(draws: &[f64], n_steps: usize, n_walkers: usize) -> f64 {
    DiagnosticsWorkspace::new()
        .ess_bulk(draws, n_steps, n_walkers)
        .unwrap_or(f64::NAN)
}

/// Tail effective sample size (min over the 5 and 95 per cent quantile
/// indicators); NaN on invalid input or fewer than 8 steps.
pub fn ess_tail(draws: &[f64], n_steps: usize, n_walkers: usize) -> f64 {
    DiagnosticsWorkspace::new()
        .ess_tail(draws, n_steps, n_walkers)
        .unwrap_or(f64::NAN)
}

/// Diagnostics of every parameter from `samples[(step * n_walkers + walker) *
/// n_dim + dim]`.
pub fn diagnose(
    samples: &[f64],
    n_steps: usize,
    n_walkers: usize,
    n_dim: usize,
) -> Result<Diagnostics, DiagnosticsError> {
    DiagnosticsWorkspace::new().diagnose(samples, n_steps, n_walkers, n_dim)
}

/// Reusable buffers for all diagnostics (an [`AutocorrEstimator`] plus the
/// sorting and rank buffers of R-hat and ESS).
#[derive(Debug, Default)]
pub struct DiagnosticsWorkspace {
    autocorr: AutocorrEstimator,
    /// Loaded parameter, chain-major.
    chains: Vec<f64>,
    /// Its split halves, chain-major.
    split: Vec<f64>,
    /// Rank-normalised split draws, valid when `bulk_ready`.
    bulk_z: Vec<f64>,
    /// Split draws in ascending order, valid when `bulk_ready`.
    sorted: Vec<f64>,
    bulk_ready: bool,
    transformed: Vec<f64>,
    folded: Vec<f64>,
    /// (value, index) pairs sorted by value (sorting pairs beats sorting
    /// indices through the values: no indirection in the comparisons).
    order: Vec<(f64, usize)>,
    sorted_all: Vec<f64>,
    /// Normal quantiles of the Blom scores, indexed by twice the rank
    /// (ties give half-integer ranks), for `z_cache_n` draws; NaN = not yet
    /// computed. Shared by all parameters of equal length.
    z_cache: Vec<f64>,
    z_cache_n: usize,
}

impl DiagnosticsWorkspace {
    /// Empty workspace; buffers grow on first use.
    pub fn new() -> Self {
        Self::default()
    }

    /// Diagnostics of every parameter, `samples[(step * n_walkers + walker) * n_dim + dim]`.
    pub fn diagnose(
        &mut self,
        samples: &[f64],
        n_steps: usize,
        n_walkers: usize,
        n_dim: usize,
    ) -> Result<Diagnostics, DiagnosticsError> {
        check_shape(samples, n_steps, n_walkers, n_dim, MIN_STEPS_RANK)?;
        let mut parameters = Vec::with_capacity(n_dim);
        for dim in 0..n_dim {
            self.load(samples, n_steps, n_walkers, n_dim, dim);
            let chains = std::mem::take(&mut self.chains);
            let tau = self
                .autocorr
                .estimate_chain_major(&chains, n_steps, n_walkers);
            self.chains = chains;
            parameters.push(ParameterDiagnostics {
                tau: tau.tau,
                tau_window: tau.window,
                tau_long_enough: tau.long_enough,
                rhat: self.rhat_loaded(n_steps, n_walkers),
                ess_bulk: self.ess_bulk_loaded(n_steps, n_walkers),
                ess_tail: self.ess_tail_loaded(n_steps, n_walkers),
            });
        }
        Ok(Diagnostics {
            n_steps,
            n_walkers,
            parameters,
        })
    }

    /// Integrated autocorrelation time of one parameter (step-major draws).
    pub fn autocorr_time(
        &mut self,
        draws: &[f64],
        n_steps: usize,
        n_walkers: usize,
    ) -> Result<AutocorrTime, DiagnosticsError> {
        self.autocorr.estimate(draws, n_steps, n_walkers)
    }

    /// Rank-normalised split R-hat of one parameter (step-major draws).
    pub fn split_rhat(
        &mut self,
        draws: &[f64],
        n_steps: usize,
        n_walkers: usize,
    ) -> Result<f64, DiagnosticsError> {
        check_shape(draws, n_steps, n_walkers, 1, MIN_STEPS_RANK)?;
        self.load(draws, n_steps, n_walkers, 1, 0);
        Ok(self.rhat_loaded(n_steps, n_walkers))
    }

    /// Bulk ESS of one parameter (step-major draws).
    pub fn ess_bulk(
        &mut self,
        draws: &[f64],
        n_steps: usize,
        n_walkers: usize,
    ) -> Result<f64, DiagnosticsError> {
        check_shape(draws, n_steps, n_walkers, 1, MIN_STEPS_RANK)?;
        self.load(draws, n_steps, n_walkers, 1, 0);
        Ok(self.ess_bulk_loaded(n_steps, n_walkers))
    }

    /// Tail ESS of one parameter (step-major draws).
    pub fn ess_tail(
        &mut self,
        draws: &[f64],
        n_steps: usize,
        n_walkers: usize,
    ) -> Result<f64, DiagnosticsError> {
        check_shape(draws, n_steps, n_walkers, 1, MIN_STEPS_RANK)?;
        self.load(draws, n_steps, n_walkers, 1, 0);
        Ok(self.ess_tail_loaded(n_steps, n_walkers))
    }

    /// Effective sample size of the mean of one parameter (step-major
    /// draws): the ESS of the split chains of the draws themselves, not of
    /// their ranks, as the Monte Carlo standard error of a mean,
    /// `sd / sqrt(ESS)`, needs (Vehtari et al. 2021, sect. 3.2). For a 0/1
    /// indicator it equals the bulk ESS (ranks of two values are an affine
    /// map of them).
    pub fn ess_mean(
        &mut self,
        draws: &[f64],
        n_steps: usize,
        n_walkers: usize,
    ) -> Result<f64, DiagnosticsError> {
        check_shape(draws, n_steps, n_walkers, 1, MIN_STEPS_RANK)?;
        self.load(draws, n_steps, n_walkers, 1, 0);
        Ok(ess_basic(
            &mut self.autocorr,
            &self.split,
            2 * n_walkers,
            n_steps / 2,
        ))
    }

    /// Copy parameter `dim` into `self.chains`, chain-major, and its split
    /// halves into `self.split` (chain-major, 2 n_walkers chains of n_steps/2).
    fn load(
        &mut self,
        samples: &[f64],
        n_steps: usize,
        n_walkers: usize,
        n_dim: usize,
        dim: usize,
    ) {
        self.chains.clear();
        self.chains.resize(n_steps * n_walkers, 0.0);
        transpose_to_chains(samples, n_steps, n_walkers, n_dim, dim, &mut self.chains);
        self.bulk_ready = false;
        let half = n_steps / 2;
        self.split.clear();
        for chain in self.chains.chunks_exact(n_steps) {
            self.split.extend_from_slice(&chain[..half]);
            self.split.extend_from_slice(&chain[n_steps - half..]);
        }
    }

    /// Rank-normalise the split draws once per loaded parameter (shared by
    /// R-hat and bulk ESS) and keep them sorted (for the median and the
    /// quantiles).
    fn ensure_bulk(&mut self) {
        if self.bulk_ready {
            return;
        }
        let split = std::mem::take(&mut self.split);
        let mut z = std::mem::take(&mut self.bulk_z);
        self.z_scale_into(&split, &mut z);
        self.sorted.clear();
        self.sorted.extend(self.order.iter().map(|&(x, _)| x));
        self.split = split;
        self.bulk_z = z;
        self.bulk_ready = true;
    }

    fn rhat_loaded(&mut self, n_steps: usize, n_walkers: usize) -> f64 {
        let half = n_steps / 2;
        let n_chain = 2 * n_walkers;
        // Bulk: rank-normalised split chains (Vehtari et al. 2021, eq. 14).
        self.ensure_bulk();
        let bulk = rhat_basic(&self.bulk_z, n_chain, half);
        // Tail: fold about the median of the split draws, then rank-normalise
        // (Vehtari et al. 2021, sect. 4.2).
        let n = self.sorted.len();
        let median = if n % 2 == 1 {
            self.sorted[n / 2]
        } else {
            0.5 * (self.sorted[n / 2 - 1] + self.sorted[n / 2])
        };
        let mut abs_dev = std::mem::take(&mut self.transformed);
        abs_dev.clear();
        abs_dev.extend(self.split.iter().map(|x| (x - median).abs()));
        let mut folded = std::mem::take(&mut self.folded);
        self.z_scale_into(&abs_dev, &mut folded);
        let tail = rhat_basic(&folded, n_chain, half);
        self.folded = folded;
        self.transformed = abs_dev;
        if bulk.is_nan() || tail.is_nan() {
            f64::NAN
        } else {
            bulk.max(tail)
        }
    }

    fn ess_bulk_loaded(&mut self, n_steps: usize, n_walkers: usize) -> f64 {
        self.ensure_bulk();
        ess_basic(&mut self.autocorr, &self.bulk_z, 2 * n_walkers, n_steps / 2)
    }

    fn ess_tail_loaded(&mut self, n_steps: usize, n_walkers: usize) -> f64 {
        let half = n_steps / 2;
        // Quantiles of all draws; for an even chain length the split halves
        // are all the draws.
        let quantiles = if n_steps.is_multiple_of(2) {
            self.ensure_bulk();
            [0.05, 0.95].map(|p| quantile_type7_sorted(&self.sorted, p))
        } else {
            self.sorted_all.clear();
            self.sorted_all.extend_from_slice(&self.chains);
            self.sorted_all.sort_unstable_by(f64::total_cmp);
            [0.05, 0.95].map(|p| quantile_type7_sorted(&self.sorted_all, p))
        };
        let mut worst = f64::INFINITY;
        for q in quantiles {
            let mut ind = std::mem::take(&mut self.transformed);
            ind.clear();
            for chain in self.chains.chunks_exact(n_steps) {
                let below = |x: &f64| if *x <= q { 1.0 } else { 0.0 };
                ind.extend(chain[..half].iter().map(below));
                ind.extend(chain[n_steps - half..].iter().map(below));
            }
            let ess = ess_basic(&mut self.autocorr, &ind, 2 * n_walkers, half);
            self.transformed = ind;
            if ess.is_nan() {
                return f64::NAN;
            }
            worst = worst.min(ess);
        }
        worst
    }

    /// Rank-normalisation: average ranks over all draws (ties share the
    /// mean rank), Blom's offset `(r - 3/8) / (S + 1/4)`, then the normal
    /// quantile (Vehtari et al. 2021, eq. 14; Blom 1958).
    fn z_scale_into(&mut self, values: &[f64], out: &mut Vec<f64>) {
        let n = values.len();
        self.order.clear();
        self.order.extend(values.iter().copied().zip(0..n));
        self.order.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        out.clear();
        out.resize(n, 0.0);
        if self.z_cache_n != n {
            self.z_cache.clear();
            self.z_cache.resize(2 * n + 2, f64::NAN);
            self.z_cache_n = n;
        }
        let denom = n as f64 + 0.25;
        let mut start = 0;
        while start < n {
            let mut end = start + 1;
            while end < n && self.order[end].0 == self.order[start].0 {
                end += 1;
            }
            // 0-based positions start..end tie: their mean 1-based rank is
            // key / 2 with key = start + 1 + end.
            let key = start + 1 + end;
            let mut z = self.z_cache[key];
            if z.is_nan() {
                z = normal_quantile((0.5 * key as f64 - 0.375) / denom);
                self.z_cache[key] = z;
                // Blom scores are symmetric: rank r and n + 1 - r give p and
                // 1 - p (equal to rounding), hence z and -z.
                let mirror = 2 * (n + 1) - key;
                if self.z_cache[mirror].is_nan() {
                    self.z_cache[mirror] = -z;
                }
            }
            for &(_, i) in &self.order[start..end] {
                out[i] = z;
            }
            start = end;
        }
    }
}

fn check_shape(
    draws: &[f64],
    n_steps: usize,
    n_walkers: usize,
    n_dim: usize,
    min_steps: usize,
) -> Result<(), DiagnosticsError> {
    if n_walkers == 0 || n_dim == 0 {
        return Err(DiagnosticsError::Empty);
    }
    let expected = n_steps
        .checked_mul(n_walkers)
        .and_then(|x| x.checked_mul(n_dim));
    if expected != Some(draws.len()) {
        return Err(DiagnosticsError::ShapeMismatch {
            len: draws.len(),
            n_steps,
            n_walkers,
            n_dim,
            expected: expected.unwrap_or(usize::MAX),
        });
    }
    if n_steps < min_steps {
        return Err(DiagnosticsError::TooFewSteps {
            n_steps,
            min: min_steps,
        });
    }
    if let Some((index, &value)) = draws.iter().enumerate().find(|(_, x)| !x.is_finite()) {
        return Err(DiagnosticsError::NonFinite { index, value });
    }
    Ok(())
}

/// `out[walker * n_steps + step] = samples[(step * n_walkers + walker) * n_dim + dim]`.
fn transpose_to_chains(
    samples: &[f64],
    n_steps: usize,
    n_walkers: usize,
    n_dim: usize,
    dim: usize,
    out: &mut [f64],
) {
    for step in 0..n_steps {
        for walker in 0..n_walkers {
            out[walker * n_steps + step] = samples[(step * n_walkers + walker) * n_dim + dim];
        }
    }
}

/// Classic R-hat of chain-major `data` (n_chain chains of n_draw):
/// `sqrt(((n-1)/n W + B/n) / W)` with `B = n var(chain means)`, `W` the mean
/// within-chain variance (Gelman & Rubin 1992; Vehtari et al. 2021, eqs. 3-4).
fn rhat_basic(data: &[f64], n_chain: usize, n_draw: usize) -> f64 {
    if n_draw < 2 || n_chain < 2 {
        return f64::NAN;
    }
    let n = n_draw as f64;
    let mut means = 0.0;
    let mut within = 0.0;
    for chain in data.chunks_exact(n_draw) {
        let mean = chain.iter().sum::<f64>() / n;
        let var = chain.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / (n - 1.0);
        means += mean;
        within += var;
    }
    let m = n_chain as f64;
    let grand = means / m;
    // Two-pass variance of chain means for accuracy.
    let mut var_means = 0.0;
    for chain in data.chunks_exact(n_draw) {
        let mean = chain.iter().sum::<f64>() / n;
        var_means += (mean - grand) * (mean - grand);
    }
    var_means /= m - 1.0;
    let within = within / m;
    let between = n * var_means;
    ((between / within + n - 1.0) / n).sqrt()
}

/// Effective sample size of chain-major `data` (n_chain chains of n_draw),
/// Vehtari et al. (2021), eqs. 10-13, with Geyer's (1992) initial positive
/// sequence (pairs of autocorrelations summed while positive) and initial
/// monotone sequence.
fn ess_basic(est: &mut AutocorrEstimator, data: &[f64], n_chain: usize, n_draw: usize) -> f64 {
    let size = (n_chain * n_draw) as f64;
    let (lo, hi) = data
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &x| {
            (lo.min(x), hi.max(x))
        });
    // All draws equal (to double resolution): each draw is independent
    // information in the sense that there is nothing to estimate (same
    // convention as ArviZ).
    if hi - lo < 1e-15 {
        return size;
    }
    if n_draw < 4 {
        return f64::NAN;
    }
    est.mean_autocov(data, n_chain, n_draw, Combine::MeanAutocovariance);
    let acov = &est.lags;
    let n = n_draw as f64;
    let mean_var = acov[0] * n / (n - 1.0);
    let mut var_plus = mean_var * (n - 1.0) / n;
    if n_chain > 1 {
        let means = &est.chain_means;
        let grand = means.iter().sum::<f64>() / n_chain as f64;
        let var_means =
            means.iter().map(|m| (m - grand) * (m - grand)).sum::<f64>() / (n_chain as f64 - 1.0);
        var_plus += var_means;
    }
    let rho = |t: usize| 1.0 - (mean_var - acov[t]) / var_plus;
    let rho_hat = &mut est.rho;
    rho_hat.clear();
    rho_hat.resize(n_draw, 0.0);
    let mut rho_even = 1.0;
    let mut rho_odd = rho(1);
    rho_hat[0] = rho_even;
    rho_hat[1] = rho_odd;
    // Initial positive sequence: sum pairs (rho_{2k}, rho_{2k+1}) while the
    // pair sum is positive.
    let mut t = 1;
    while t < n_draw - 3 && rho_even + rho_odd > 0.0 {
        rho_even = rho(t + 1);
        rho_odd = rho(t + 2);
        if rho_even + rho_odd >= 0.0 {
            rho_hat[t + 1] = rho_even;
            rho_hat[t + 2] = rho_odd;
        }
        t += 2;
    }
    let max_t = t - 2;
    // The first even lag of the truncated pair still carries information
    // when positive.
    if rho_even > 0.0 {
        rho_hat[max_t + 1] = rho_even;
    }
    // Initial monotone sequence: pair sums must not increase.
    let mut t = 1;
    while t + 2 <= max_t {
        if rho_hat[t + 1] + rho_hat[t + 2] > rho_hat[t - 1] + rho_hat[t] {
            rho_hat[t + 1] = 0.5 * (rho_hat[t - 1] + rho_hat[t]);
            rho_hat[t + 2] = rho_hat[t + 1];
        }
        t += 2;
    }
    let tau = -1.0 + 2.0 * rho_hat[..=max_t].iter().sum::<f64>() + rho_hat[max_t + 1];
    // Cap the ESS at N log10(N) for antithetic chains (Vehtari et al. 2021, sect. 3.2).
    let tau = tau.max(1.0 / size.log10());
    if rho_hat.iter().any(|r| r.is_nan()) {
        return f64::NAN;
    }
    size / tau
}

// Type-7 sample quantile of sorted values (Hyndman & Fan 1996, Am. Stat.
// 50, 361).
use dyad_common::quantile::quantile_sorted as quantile_type7_sorted;

// Standard normal quantile, accurate in both tails.
use dyad_common::normal::quantile as normal_quantile;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bad_shapes_are_errors() {
        let d = vec![0.0; 10];
        assert!(matches!(
            autocorr_time(&d, 3, 3),
            Err(DiagnosticsError::ShapeMismatch { .. })
        ));
        assert!(matches!(
            DiagnosticsWorkspace::new().split_rhat(&d, 2, 5),
            Err(DiagnosticsError::TooFewSteps { .. })
        ));
        let mut e = vec![0.0; 12];
        e[7] = f64::NAN;
        assert!(matches!(
            diagnose(&e, 4, 3, 1),
            Err(DiagnosticsError::NonFinite { index: 7, .. })
        ));
        assert!(split_rhat(&d, 3, 3).is_nan());
    }

    #[test]
    fn stuck_walker_gives_infinite_tau() {
        let mut d: Vec<f64> = (0..200).map(|i| ((i * 7919) % 101) as f64).collect();
        for step in 0..100 {
            d[step * 2 + 1] = 3.0;
        }
        let a = autocorr_time(&d, 100, 2).unwrap();
        assert!(a.tau.is_infinite() && !a.long_enough);
    }
}
