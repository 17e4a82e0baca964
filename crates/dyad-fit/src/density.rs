//! The model's log-posterior seen through the sampler's `LogDensity` trait,
//! optionally restricted to a window of orbital periods.

use dyad_model::likelihood::Model;
use dyad_sampler::LogDensity;

/// The posterior of a model, with the period prior optionally truncated to
/// `[lo, hi]` days (used to compare period windows by evidence; the prior is
/// then the global prior restricted to the window and renormalised, which the
/// evidence needs no help with because thermodynamic integration and
/// stepping-stone sampling are indifferent to the prior's normalisation).
pub struct Posterior<'a> {
    model: &'a Model,
    ln_period_window: Option<(usize, f64, f64)>,
}

impl<'a> Posterior<'a> {
    /// The full posterior.
    pub fn new(model: &'a Model) -> Self {
        Self {
            model,
            ln_period_window: None,
        }
    }

    /// The model whose posterior this is.
    pub fn model(&self) -> &'a Model {
        self.model
    }

    /// The posterior restricted to periods in `[lo_days, hi_days]`; `None` if
    /// the model samples no period (it always does) or the window is empty.
    pub fn in_period_window(model: &'a Model, lo_days: f64, hi_days: f64) -> Option<Self> {
        let index = model.layout().period_index()?;
        (lo_days > 0.0 && hi_days > lo_days).then_some(Self {
            model,
            ln_period_window: Some((index, lo_days.ln(), hi_days.ln())),
        })
    }
}

impl LogDensity for Posterior<'_> {
    fn dim(&self) -> usize {
        self.model.dim()
    }

    fn log_prior(&self, x: &[f64]) -> f64 {
        if let Some((i, lo, hi)) = self.ln_period_window {
            if !(x[i] >= lo && x[i] <= hi) {
                return f64::NEG_INFINITY;
            }
        }
        self.model.log_prior(x)
    }

    fn log_likelihood(&self, x: &[f64]) -> f64 {
        self.model.log_likelihood(x)
    }
}
