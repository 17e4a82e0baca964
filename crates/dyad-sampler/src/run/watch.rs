//! Quantities the caller watches beside the sampled parameters.
//!
//! The stopping rule judges every sampled coordinate; some things a caller
//! reports are not coordinates and can settle more slowly than any of them
//! (the share of draws in each of several separate modes, which under
//! tempering changes only when a swap carries a walker across). A [`Watch`]
//! turns the kept draws at each check into scalar series, one value per
//! draw; the rule then asks of each series a mean known to a stated Monte
//! Carlo error (from the ensemble-mean series, long enough to believe) and
//! walkers that agree (split R-hat) before it stops. The sampler knows
//! nothing of what the series mean: it sees names and numbers.

use serde::{Deserialize, Serialize};

use crate::diagnostics::DiagnosticsWorkspace;
use crate::history::History;

/// Largest |z| of the drift test ([`WatchedDiagnostics::drift_z`]) a
/// settled quantity may have: two standard errors (common practice for
/// Geweke's diagnostic).
pub const MAX_DRIFT_Z: f64 = 2.0;

/// The cold chain's kept draws at a check of the stopping rule (the
/// history after the rule's burn-in), as a [`Watch`] reads them.
#[derive(Clone, Copy)]
pub struct KeptDraws<'a> {
    history: &'a History,
    first: usize,
}

impl<'a> KeptDraws<'a> {
    pub(crate) fn new(history: &'a History, first: usize) -> Self {
        Self { history, first }
    }

    /// Kept snapshots (steps of the thinned history).
    pub fn n_steps(&self) -> usize {
        self.history.len - self.first
    }

    /// Walkers per snapshot.
    pub fn n_walkers(&self) -> usize {
        self.history.n_walkers
    }

    /// Sampled coordinates per draw.
    pub fn dim(&self) -> usize {
        self.history.dim
    }

    /// Draws of coordinate `p`, step-major: `[step * n_walkers + walker]`,
    /// the layout a watched series must have too.
    pub fn parameter(&self, p: usize) -> &'a [f64] {
        self.history.draws(p, self.first)
    }

    /// Draw `(step, walker)` copied into `out` (length [`Self::dim`]).
    pub fn position_into(&self, step: usize, walker: usize, out: &mut [f64]) {
        let i = step * self.n_walkers() + walker;
        for (p, x) in out.iter_mut().enumerate() {
            *x = self.parameter(p)[i];
        }
    }
}

/// One watched quantity: a name for people and a value per kept draw,
/// step-major like [`KeptDraws::parameter`].
#[derive(Clone, Debug, PartialEq)]
pub struct WatchedSeries {
    /// What the quantity is ("share of draws in period mode 1", ...).
    pub name: String,
    /// One value per kept draw.
    pub values: Vec<f64>,
}

/// Derives watched quantities from the kept draws at each check of the
/// stopping rule and once more for the final diagnostics. A watch that has
/// nothing to watch (e.g. a posterior with one mode) returns no series; the
/// rule is then the rule on the coordinates alone.
pub trait Watch {
    /// The watched series of `draws` (each as long as
    /// `draws.n_steps() * draws.n_walkers()`).
    fn watch(&mut self, draws: &KeptDraws<'_>) -> Vec<WatchedSeries>;
}

/// What a check found of the watched quantities (the worst of each kind).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct WatchedCheck {
    /// Quantities watched.
    pub count: usize,
    /// Largest Monte Carlo standard error of a quantity's mean.
    #[serde(deserialize_with = "crate::serde_float::infinity_if_null")]
    pub largest_error: f64,
    /// Whether every quantity's ensemble-mean series is long enough (more
    /// than 50 of its autocorrelation times) for its error to be believed.
    pub long_enough: bool,
    /// Largest autocorrelation time of an ensemble-mean series, steps.
    #[serde(deserialize_with = "crate::serde_float::infinity_if_null")]
    pub largest_tau: f64,
    /// Largest split R-hat of a quantity (walkers as chains).
    #[serde(deserialize_with = "crate::serde_float::infinity_if_null")]
    pub largest_rhat: f64,
    /// Largest |z| of a quantity's drift test.
    #[serde(default)]
    #[serde(deserialize_with = "crate::serde_float::infinity_if_null")]
    pub largest_drift_z: f64,
}

/// Diagnostics of one watched quantity over the kept draws.
///
/// The Monte Carlo error of the mean comes from the *ensemble-mean series*
/// (the mean over walkers at each kept step): its variance over the steps
/// and its integrated autocorrelation time `tau` (Sokal's window) give
/// `standard_error = sd * sqrt(tau / steps)` (Sokal 1997, sect. 3). Unlike
/// per-walker effective draws, this counts what the walkers do together:
/// under tempering the share of walkers in a mode can drift as a whole,
/// slowly, while each walker hops between modes often, and walker-by-walker
/// diagnostics then look excellent while the share is still far off
/// (measured on the sparse demo: 2 690 per-walker effective draws and split
/// R-hat 1.014 for a mode share of 0.099 whose long-run value is 0.040).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct WatchedDiagnostics {
    /// The quantity's name, as the watch gave it.
    pub name: String,
    /// Mean over the kept draws (for a 0/1 indicator: the share of draws).
    #[serde(deserialize_with = "crate::serde_float::nan_if_null")]
    pub mean: f64,
    /// Monte Carlo standard error of the mean from the ensemble-mean series
    /// (infinite when that series never changes or is too short).
    #[serde(deserialize_with = "crate::serde_float::infinity_if_null")]
    pub standard_error: f64,
    /// Integrated autocorrelation time of the ensemble-mean series, steps.
    #[serde(deserialize_with = "crate::serde_float::infinity_if_null")]
    pub ensemble_tau: f64,
    /// Whether the series is more than 50 `ensemble_tau` long (and Sokal's
    /// window was found), i.e. whether `standard_error` can be believed.
    pub long_enough: bool,
    /// Drift test of the ensemble-mean series: the mean of its first tenth
    /// minus that of its last half, over the standard error of the
    /// difference (Geweke 1992, "Evaluating the accuracy of sampling-based
    /// approaches to the calculation of posterior moments", Bayesian
    /// Statistics 4; the errors from the whole series' autocorrelation
    /// time). A share still relaxing after the ladder's freeze drifts more
    /// slowly than the autocorrelation of a short span shows; this is what
    /// sees it.
    #[serde(deserialize_with = "crate::serde_float::infinity_if_null")]
    pub drift_z: f64,
    /// Bulk effective draws, walker by walker (for comparison; the rule
    /// does not use them).
    #[serde(deserialize_with = "crate::serde_float::nan_if_null")]
    pub effective_draws_bulk: f64,
    /// Rank-normalised split R-hat (walkers as chains).
    #[serde(deserialize_with = "crate::serde_float::infinity_if_null")]
    pub split_rhat: f64,
}

impl WatchedDiagnostics {
    /// Measures one series of `n_steps` x `n_walkers` draws (step-major),
    /// `thin` steps apart. A series of the wrong length or with a non-finite
    /// value has an infinite error and R-hat: a rule that watches it never
    /// stops on it.
    pub fn measure(
        series: &WatchedSeries,
        (n_steps, n_walkers, thin): (usize, usize, u64),
        workspace: &mut DiagnosticsWorkspace,
    ) -> Self {
        let v = &series.values;
        let finite = |r: Result<f64, _>| r.ok().filter(|x: &f64| x.is_finite());
        let bulk = finite(workspace.ess_bulk(v, n_steps, n_walkers)).unwrap_or(0.0);
        let rhat = match finite(workspace.split_rhat(v, n_steps, n_walkers)) {
            Some(r) => r,
            // All draws equal (one value throughout): every walker agrees.
            None if constant(v) => 1.0,
            None => f64::INFINITY,
        };
        let mut d = Self {
            name: series.name.clone(),
            mean: f64::NAN,
            standard_error: f64::INFINITY,
            ensemble_tau: f64::INFINITY,
            long_enough: false,
            drift_z: f64::INFINITY,
            effective_draws_bulk: bulk,
            split_rhat: rhat,
        };
        if v.len() != n_steps * n_walkers || n_steps < 2 || v.iter().any(|x| !x.is_finite()) {
            return d;
        }
        let ensemble_mean: Vec<f64> = v
            .chunks_exact(n_walkers)
            .map(|step| step.iter().sum::<f64>() / n_walkers as f64)
            .collect();
        let n = n_steps as f64;
        d.mean = ensemble_mean.iter().sum::<f64>() / n;
        if constant(v) {
            // Nothing varies: the mean is exact.
            d.standard_error = 0.0;
            d.ensemble_tau = 1.0;
            d.long_enough = true;
            d.drift_z = 0.0;
            return d;
        }
        let var = ensemble_mean
            .iter()
            .map(|x| (x - d.mean).powi(2))
            .sum::<f64>()
            / n;
        // A series that never changes while the draws do (every walker kept
        // to its own value) has an infinite autocorrelation time.
        if let Ok(tau) = workspace.autocorr_time(&ensemble_mean, n_steps, 1) {
            if tau.tau.is_finite() {
                let tau_steps = tau.tau.max(1.0);
                d.standard_error = (var * tau_steps / n).sqrt();
                d.ensemble_tau = tau.tau * thin as f64;
                d.long_enough = tau.long_enough;
                d.drift_z = drift_z(&ensemble_mean, var, tau_steps);
            }
        }
        d
    }

    /// Whether this quantity meets the rule: a believable error within
    /// `max_error`, no drift beyond [`MAX_DRIFT_Z`] and walkers that agree
    /// to `max_rhat`.
    pub fn settled(&self, max_error: f64, max_rhat: f64) -> bool {
        self.long_enough
            && self.standard_error <= max_error
            && self.drift_z.abs() <= MAX_DRIFT_Z
            && self.split_rhat <= max_rhat
    }
}

/// Geweke's z of `series` (variance `var`, autocorrelation time `tau` in
/// snapshots): first tenth against last half, each segment's error
/// `sqrt(var tau / length)`.
fn drift_z(series: &[f64], var: f64, tau: f64) -> f64 {
    let n = series.len();
    let (a, b) = ((n / 10).max(1), (n / 2).max(1));
    let mean = |s: &[f64]| s.iter().sum::<f64>() / s.len() as f64;
    let diff = mean(&series[..a]) - mean(&series[n - b..]);
    let se = (var * tau * (1.0 / a as f64 + 1.0 / b as f64)).sqrt();
    if se > 0.0 {
        diff / se
    } else {
        0.0
    }
}

fn constant(v: &[f64]) -> bool {
    !v.is_empty() && v.iter().all(|x| x.is_finite() && *x == v[0])
}

impl WatchedCheck {
    /// The worst of `diagnostics` (none when nothing is watched).
    pub(crate) fn of(diagnostics: &[WatchedDiagnostics]) -> Option<Self> {
        (!diagnostics.is_empty()).then(|| {
            diagnostics.iter().fold(
                Self {
                    count: diagnostics.len(),
                    largest_error: 0.0,
                    long_enough: true,
                    largest_tau: 0.0,
                    largest_rhat: 0.0,
                    largest_drift_z: 0.0,
                },
                |c, d| Self {
                    count: c.count,
                    largest_error: c.largest_error.max(d.standard_error),
                    long_enough: c.long_enough && d.long_enough,
                    largest_tau: c.largest_tau.max(d.ensemble_tau),
                    largest_rhat: c.largest_rhat.max(d.split_rhat),
                    largest_drift_z: c.largest_drift_z.max(d.drift_z.abs()),
                },
            )
        })
    }

    /// Whether every watched quantity meets the rule (see
    /// [`WatchedDiagnostics::settled`]).
    pub fn settled(&self, max_error: f64, max_rhat: f64) -> bool {
        self.long_enough
            && self.largest_error <= max_error
            && self.largest_drift_z <= MAX_DRIFT_Z
            && self.largest_rhat <= max_rhat
    }
}

/// Diagnostics of every series `watch` derives from `draws`.
pub(crate) fn measure_watched(
    watch: &mut (dyn Watch + '_),
    draws: &KeptDraws<'_>,
    workspace: &mut DiagnosticsWorkspace,
) -> Vec<WatchedDiagnostics> {
    let shape = (draws.n_steps(), draws.n_walkers(), draws.history.thin);
    watch
        .watch(draws)
        .iter()
        .map(|s| WatchedDiagnostics::measure(s, shape, workspace))
        .collect()
}
