//! Integrated autocorrelation time by FFT with Sokal's automatic window
//! (the methods are in the parent module's documentation).

use std::sync::Arc;

use rustfft::num_complex::Complex;
use rustfft::{Fft, FftPlanner};

use super::{
    check_shape, transpose_to_chains, AutocorrTime, DiagnosticsError, MIN_STEPS_AUTOCORR,
    MIN_STEPS_PER_TAU, SOKAL_WINDOW_FACTOR,
};

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
    pub(super) lags: Vec<f64>,
    pub(super) chain_means: Vec<f64>,
    series: Vec<f64>,
    pub(super) rho: Vec<f64>,
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
pub(super) enum Combine {
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
    pub(super) fn estimate_chain_major(
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
    pub(super) fn mean_autocov(
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
