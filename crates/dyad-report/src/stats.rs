//! Summary statistics of posterior draws.
//!
//! Quantiles follow Hyndman & Fan (1996), "Sample quantiles in statistical
//! packages", The American Statistician 50, 361, definition 7 (linear
//! interpolation between order statistics, h = (n - 1) p; the default of R
//! and NumPy). Angles are summarised on the circle: the draws are wrapped
//! into the period centred on their circular mean (Mardia & Jupp 2000,
//! "Directional Statistics", sect. 2.2) before any statistic is taken, then
//! the whole set is shifted by a whole number of periods so that the median
//! lies in [0, period). Interval ends may therefore fall below 0 or above the
//! period (e.g. omega = 2 -4/+5 deg is reported as median 2, 68 % interval
//! [-2, 7]), which keeps a posterior straddling 0/360 contiguous.

use crate::error::ReportError;
use crate::input::{ParameterInfo, ParameterKind, PosteriorDraws};
use serde::Serialize;

/// Quantile rule used everywhere in this crate, as written into summaries.
pub const QUANTILE_RULE: &str =
    "Hyndman & Fan (1996) definition 7: linear interpolation between order statistics, h = (n-1)p";

/// Quantile `p` in [0, 1] of already sorted finite values (Hyndman & Fan
/// 1996, definition 7; NaN for an empty slice): the one implementation in
/// `dyad-common`.
pub use dyad_common::quantile::quantile_sorted;

/// Circular mean of values with period `period` (Mardia & Jupp 2000,
/// sect. 2.2.1), in [0, period). NaN if the mean resultant length is zero.
pub fn circular_mean(values: &[f64], period: f64) -> f64 {
    let scale = std::f64::consts::TAU / period;
    let (s, c) = values.iter().fold((0.0, 0.0), |(s, c), &v| {
        let (sv, cv) = (v * scale).sin_cos();
        (s + sv, c + cv)
    });
    if s == 0.0 && c == 0.0 {
        return f64::NAN;
    }
    (s.atan2(c) / scale).rem_euclid(period)
}

/// Wraps `v` into [centre - period/2, centre + period/2).
pub fn wrap_around(v: f64, centre: f64, period: f64) -> f64 {
    centre + (v - centre + 0.5 * period).rem_euclid(period) - 0.5 * period
}

/// Summary of one parameter.
#[derive(Debug, Clone, Serialize)]
pub struct ParameterSummary {
    /// Name, unit, label and kind.
    #[serde(flatten)]
    pub info: ParameterInfo,
    /// Number of finite draws used (non-finite draws are skipped).
    pub n_finite: usize,
    /// Median (0.5 quantile).
    pub median: f64,
    /// Mean.
    pub mean: f64,
    /// Sample standard deviation (divisor n - 1; 0 for a single draw).
    pub sd: f64,
    /// Equal-tailed 68 per cent interval: 0.16 and 0.84 quantiles.
    pub q68: [f64; 2],
    /// Equal-tailed 95 per cent interval: 0.025 and 0.975 quantiles.
    pub q95: [f64; 2],
    /// Value at the draw with the highest log-posterior (for angles, in the
    /// same window as the other statistics).
    pub map: f64,
}

impl ParameterSummary {
    /// Distance from the median down to the 68 % lower end.
    pub fn minus68(&self) -> f64 {
        self.median - self.q68[0]
    }
    /// Distance from the median up to the 68 % upper end.
    pub fn plus68(&self) -> f64 {
        self.q68[1] - self.median
    }
}

/// Summary of all parameters.
#[derive(Debug, Clone, Serialize)]
pub struct PosteriorSummary {
    /// Number of draws.
    pub n_draws: usize,
    /// Index of the draw with the highest log-posterior.
    pub map_draw: usize,
    /// Its log-posterior.
    pub map_log_posterior: f64,
    /// Quantile rule, for the record.
    pub quantile_rule: &'static str,
    /// One entry per parameter, in column order.
    pub parameters: Vec<ParameterSummary>,
}

impl PosteriorSummary {
    /// The summary of the parameter called `name`.
    pub fn get(&self, name: &str) -> Option<&ParameterSummary> {
        self.parameters.iter().find(|p| p.info.name == name)
    }
}

/// Values of one parameter prepared for statistics and plots: finite draws
/// only, angles wrapped around their circular mean and shifted so the median
/// lies in [0, period). Returns the prepared values and the shift that maps
/// any raw value into the same window (`prepare(v) = wrap(v) + shift`).
pub(crate) fn prepared_values(values: &[f64], kind: ParameterKind) -> (Vec<f64>, WindowMap) {
    let mut finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    match kind {
        ParameterKind::Linear => (finite, WindowMap::Identity),
        ParameterKind::Angle { period_deg } => {
            let mut centre = circular_mean(&finite, period_deg);
            if !centre.is_finite() {
                // Uniform on the circle: any window is as good; use [0, period).
                centre = 0.5 * period_deg;
            }
            for v in finite.iter_mut() {
                *v = wrap_around(*v, centre, period_deg);
            }
            let mut sorted = finite.clone();
            sorted.sort_by(f64::total_cmp);
            let median = quantile_sorted(&sorted, 0.5);
            let shift = if median.is_finite() {
                median.rem_euclid(period_deg) - median
            } else {
                0.0
            };
            for v in finite.iter_mut() {
                *v += shift;
            }
            (
                finite,
                WindowMap::Wrap {
                    centre,
                    period: period_deg,
                    shift,
                },
            )
        }
    }
}

/// Maps a raw value into the window used for a parameter's statistics.
#[derive(Debug, Clone, Copy)]
pub(crate) enum WindowMap {
    Identity,
    Wrap {
        centre: f64,
        period: f64,
        shift: f64,
    },
}

impl WindowMap {
    pub(crate) fn apply(&self, v: f64) -> f64 {
        match *self {
            WindowMap::Identity => v,
            WindowMap::Wrap {
                centre,
                period,
                shift,
            } => wrap_around(v, centre, period) + shift,
        }
    }
}

/// Summarises one parameter's values; `map_value` is its raw value at the
/// MAP draw.
pub fn summarise_values(
    info: &ParameterInfo,
    values: &[f64],
    map_value: f64,
) -> Result<ParameterSummary, ReportError> {
    let (prepared, window) = prepared_values(values, info.kind);
    let n = prepared.len();
    if n == 0 {
        return Err(ReportError::InvalidInput(format!(
            "parameter {} has no finite draws",
            info.name
        )));
    }
    let mean = prepared.iter().sum::<f64>() / n as f64;
    let sd = if n > 1 {
        (prepared.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1) as f64).sqrt()
    } else {
        0.0
    };
    let mut sorted = prepared;
    sorted.sort_by(f64::total_cmp);
    let q = |p: f64| quantile_sorted(&sorted, p);
    Ok(ParameterSummary {
        info: info.clone(),
        n_finite: n,
        median: q(0.5),
        mean,
        sd,
        q68: [q(0.16), q(0.84)],
        q95: [q(0.025), q(0.975)],
        map: window.apply(map_value),
    })
}

/// Summarises every parameter of `draws`.
pub fn summarise(draws: &PosteriorDraws) -> Result<PosteriorSummary, ReportError> {
    draws.validate()?;
    let map_draw = draws
        .log_posterior
        .iter()
        .enumerate()
        .filter(|(_, lp)| !lp.is_nan())
        .max_by(|a, b| a.1.total_cmp(b.1))
        .map(|(i, _)| i)
        .ok_or_else(|| ReportError::InvalidInput("every log-posterior is NaN".into()))?;
    let n_params = draws.n_params();
    let mut parameters = Vec::with_capacity(n_params);
    for (p, info) in draws.params.iter().enumerate() {
        let column = draws.column(p);
        let map_value = draws.values[map_draw * n_params + p];
        parameters.push(summarise_values(info, &column, map_value)?);
    }
    Ok(PosteriorSummary {
        n_draws: draws.n_draws(),
        map_draw,
        map_log_posterior: draws.log_posterior[map_draw],
        quantile_rule: QUANTILE_RULE,
        parameters,
    })
}
