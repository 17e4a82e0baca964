//! Observation planning: the expected value of one more measurement.
//!
//! What it is for: given posterior draws of a fitted binary and, for each
//! draw, what a new measurement would show at a candidate date, estimate how
//! much one more measurement of a stated precision would shrink the credible
//! intervals of chosen quantities (the masses, the period), so that dates
//! can be ranked before they are observed.
//!
//! It also summarises draws' predictions over epochs into the 68, 90 and 95
//! per cent posterior-predictive bands of an ephemeris ([`ephemeris`]).
//!
//! What it is not for: fitting, reading run folders, or orbit kinematics.
//! The caller evaluates the model (see [`Observable`]); this crate only
//! reweights draws.
//!
//! # Method
//!
//! A preposterior analysis (Lindley 1956, "On a measure of the information
//! provided by an experiment", Ann. Math. Stat. 27, 986; in astronomy, the
//! "Bayesian adaptive exploration" of Loredo 2004, AIP Conf. Proc. 707, 330):
//! the value of a measurement at date t is the posterior we would have after
//! it, averaged over the outcomes the present posterior expects. Outcomes are
//! simulated by picking a draw j as the truth and adding Gaussian noise,
//! y = f_j(t) + sigma z. The posterior after the outcome is represented by
//! the present draws reweighted by the new measurement's likelihood,
//! w_i = N(y; f_i(t), sigma^2 + s_i^2) (importance reweighting, the
//! "sampling-importance-resampling" identity of Smith & Gelfand 1992, Am.
//! Stat. 46, 84), and its equal-tailed 68 per cent interval is read from the
//! weighted draws. Averaging the interval width over outcomes gives the
//! expected width after the measurement.
//!
//! The same simulated outcomes (truth draw and noise) are used at every date
//! and for every kind of measurement (common random numbers), so that the
//! differences between dates are not Monte-Carlo noise; results depend on
//! the seed only, never on the number of threads.
//!
//! Reweighting is reliable only while many draws keep appreciable weight:
//! the smallest Kish (1965) effective number of draws, (sum w)^2 / sum w^2,
//! is reported for every date so that a caller can flag dates where one
//! measurement would teach more than the draws can resolve.

#![deny(missing_docs)]

mod calendar;
pub mod ephemeris;

use rand::{Rng, SeedableRng};
use rand_distr::StandardNormal;
use rand_xoshiro::Xoshiro256PlusPlus;
use rayon::prelude::*;

pub use calendar::{calendar_month, MonthRange};
pub use ephemeris::{predictive_bands, EpochBands, PairSpread, PredictiveBand, Quantities};

/// Errors of the planning computation.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum PlanError {
    /// Not enough draws to reweight.
    #[error("{0} posterior draws are too few to plan from (need at least {MIN_DRAWS})")]
    TooFewDraws(usize),
    /// A target quantity has the wrong number of values.
    #[error("target '{name}' has {got} values for {want} draws")]
    TargetLength {
        /// Target name.
        name: String,
        /// Values given.
        got: usize,
        /// Draws.
        want: usize,
    },
    /// A bad setting (measurement error, number of outcomes, ...).
    #[error("{0}")]
    Setting(String),
    /// No candidate dates.
    #[error("no candidate dates to rank")]
    NoDates,
    /// No posterior draw predicts some quantity at an epoch.
    #[error("no posterior draw gives a prediction at JD {t_jd}")]
    NoPrediction {
        /// The epoch, JD.
        t_jd: f64,
    },
}

/// Fewest draws the reweighting works with.
pub const MIN_DRAWS: usize = 100;

/// What a new measurement at a date would show for each posterior draw.
///
/// Implementations must be pure functions of (draw, date): they are called
/// from several threads.
pub trait Observable: Sync {
    /// Number of measured components (2 for a relative position, 1 for a
    /// velocity).
    fn components(&self) -> usize;

    /// Writes the predicted measurement of draw `draw` at `t_jd` into `out`
    /// (`components()` values, in the unit of the measurement error);
    /// returns `false` if the draw predicts nothing there.
    fn predict(&self, draw: usize, t_jd: f64, out: &mut [f64]) -> bool;

    /// Variance added to the measurement error of draw `draw` (a jitter
    /// squared, in the same unit), 0 by default.
    fn extra_variance(&self, _draw: usize) -> f64 {
        0.0
    }
}

/// A quantity whose interval the planner tries to shrink, one value per draw.
#[derive(Debug, Clone, Copy)]
pub struct Target<'a> {
    /// Name, for errors and reports.
    pub name: &'a str,
    /// Its value in each draw.
    pub values: &'a [f64],
}

/// Settings of the planning computation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PlanSettings {
    /// One-sigma error of the new measurement (each component), in the
    /// observable's unit.
    pub error: f64,
    /// Simulated outcomes per date.
    pub outcomes: usize,
    /// Seed of the simulated outcomes.
    pub seed: u64,
}

/// The expected effect of one measurement at one date.
#[derive(Debug, Clone, PartialEq)]
pub struct DateValue {
    /// Candidate date, JD.
    pub t_jd: f64,
    /// Expected 68 per cent interval width of each target after the
    /// measurement (the targets' order).
    pub expected_width: Vec<f64>,
    /// Smallest effective number of draws over the simulated outcomes.
    pub min_effective_draws: f64,
}

impl DateValue {
    /// Expected fractional shrinkage of each target's interval, given the
    /// widths now: 1 - expected / now.
    pub fn shrinkage(&self, width_now: &[f64]) -> Vec<f64> {
        self.expected_width
            .iter()
            .zip(width_now)
            .map(|(after, now)| 1.0 - after / now)
            .collect()
    }
}

/// Lower and upper tail probabilities of the equal-tailed 68 per cent interval.
const TAILS: (f64, f64) = (0.158_655_253_931_457, 0.841_344_746_068_543);

/// The 68 per cent interval width of each target with every draw weighted
/// equally, read as [`expected_widths`] reads the reweighted ones (so that
/// shrinkages compare like with like).
pub fn widths_now(targets: &[Target<'_>]) -> Vec<f64> {
    targets
        .iter()
        .map(|t| {
            let order = sorted_order(t.values);
            let w = vec![1.0; t.values.len()];
            weighted_width(t.values, &order, &w, t.values.len() as f64)
        })
        .collect()
}

/// Expected 68 per cent interval widths of `targets` after one measurement
/// of `observable` at each of `dates_jd` (see the crate docs for the
/// method), in the order of the dates.
pub fn expected_widths<O: Observable>(
    observable: &O,
    draws: usize,
    targets: &[Target<'_>],
    dates_jd: &[f64],
    settings: PlanSettings,
) -> Result<Vec<DateValue>, PlanError> {
    if draws < MIN_DRAWS {
        return Err(PlanError::TooFewDraws(draws));
    }
    if dates_jd.is_empty() {
        return Err(PlanError::NoDates);
    }
    if !(settings.error > 0.0 && settings.error.is_finite()) {
        return Err(PlanError::Setting(format!(
            "the measurement error must be a positive number, got {}",
            settings.error
        )));
    }
    if settings.outcomes == 0 {
        return Err(PlanError::Setting(
            "at least one simulated outcome per date is needed".into(),
        ));
    }
    for t in targets {
        if t.values.len() != draws {
            return Err(PlanError::TargetLength {
                name: t.name.to_owned(),
                got: t.values.len(),
                want: draws,
            });
        }
    }
    let dim = observable.components();
    let outcomes = simulated_outcomes(draws, dim, settings);
    let orders: Vec<Vec<usize>> = targets.iter().map(|t| sorted_order(t.values)).collect();
    let error_sq = settings.error * settings.error;
    let variance: Vec<f64> = (0..draws)
        .map(|i| error_sq + observable.extra_variance(i))
        .collect();
    // -0.5 ln det of each draw's covariance (dim equal variances).
    let ln_norm: Vec<f64> = variance
        .iter()
        .map(|v| -0.5 * dim as f64 * v.ln())
        .collect();

    let values = dates_jd
        .par_iter()
        .map_init(
            || Scratch::new(draws, dim),
            |scratch, &t_jd| {
                value_at(
                    observable, t_jd, targets, &orders, &variance, &ln_norm, &outcomes, settings,
                    scratch,
                )
            },
        )
        .collect();
    Ok(values)
}

/// One simulated outcome: the draw taken as the truth and the noise (in
/// units of the measurement error) added to its prediction.
struct Outcome {
    truth: usize,
    noise: [f64; 2],
}

fn simulated_outcomes(draws: usize, dim: usize, settings: PlanSettings) -> Vec<Outcome> {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(settings.seed);
    (0..settings.outcomes)
        .map(|_| {
            let truth = rng.gen_range(0..draws);
            let mut noise = [0.0; 2];
            for z in noise.iter_mut().take(dim) {
                *z = rng.sample(StandardNormal);
            }
            Outcome { truth, noise }
        })
        .collect()
}

/// Buffers reused across the dates one thread handles.
struct Scratch {
    predicted: Vec<f64>,
    valid: Vec<bool>,
    ln_weight: Vec<f64>,
    weight: Vec<f64>,
    one: Vec<f64>,
}

impl Scratch {
    fn new(draws: usize, dim: usize) -> Self {
        Self {
            predicted: vec![0.0; draws * dim],
            valid: vec![false; draws],
            ln_weight: vec![0.0; draws],
            weight: vec![0.0; draws],
            one: vec![0.0; dim],
        }
    }
}

#[allow(clippy::too_many_arguments)]
fn value_at<O: Observable>(
    observable: &O,
    t_jd: f64,
    targets: &[Target<'_>],
    orders: &[Vec<usize>],
    variance: &[f64],
    ln_norm: &[f64],
    outcomes: &[Outcome],
    settings: PlanSettings,
    s: &mut Scratch,
) -> DateValue {
    let dim = observable.components();
    let draws = variance.len();
    for i in 0..draws {
        s.valid[i] = observable.predict(i, t_jd, &mut s.predicted[i * dim..(i + 1) * dim]);
    }
    let mut width_sum = vec![0.0; targets.len()];
    let mut min_effective = f64::INFINITY;
    let mut used = 0usize;
    for outcome in outcomes {
        if !s.valid[outcome.truth] {
            continue;
        }
        used += 1;
        let truth = &s.predicted[outcome.truth * dim..(outcome.truth + 1) * dim];
        for (c, y) in s.one.iter_mut().enumerate() {
            *y = truth[c] + settings.error * outcome.noise[c];
        }
        // ln N(y; f_i, v_i) up to a constant shared by all draws.
        let mut max_ln = f64::NEG_INFINITY;
        let rows = s.predicted.chunks_exact(dim).zip(&s.valid);
        for (((f, &valid), v), (ln_w, norm)) in
            rows.zip(variance).zip(s.ln_weight.iter_mut().zip(ln_norm))
        {
            *ln_w = if valid {
                let chi_sq: f64 = f.iter().zip(&s.one).map(|(a, b)| (b - a).powi(2)).sum();
                -0.5 * chi_sq / v + norm
            } else {
                f64::NEG_INFINITY
            };
            max_ln = max_ln.max(*ln_w);
        }
        let (mut total, mut total_sq) = (0.0, 0.0);
        for (w, ln_w) in s.weight.iter_mut().zip(&s.ln_weight) {
            *w = (ln_w - max_ln).exp();
            let w = *w;
            total += w;
            total_sq += w * w;
        }
        min_effective = min_effective.min(total * total / total_sq);
        for ((target, order), sum) in targets.iter().zip(orders).zip(&mut width_sum) {
            *sum += weighted_width(target.values, order, &s.weight, total);
        }
    }
    let used = used.max(1) as f64;
    DateValue {
        t_jd,
        expected_width: width_sum.into_iter().map(|w| w / used).collect(),
        min_effective_draws: if min_effective.is_finite() {
            min_effective
        } else {
            0.0
        },
    }
}

/// Indices of `values` in increasing order (NaNs last).
fn sorted_order(values: &[f64]) -> Vec<usize> {
    let mut order: Vec<usize> = (0..values.len()).collect();
    order.sort_by(|&a, &b| values[a].total_cmp(&values[b]));
    order
}

/// Width of the weighted equal-tailed 68 per cent interval: the values at
/// which the cumulative weight, in increasing order of value, first reaches
/// each tail probability. NaN values (a quantity a draw does not define)
/// carry no weight.
fn weighted_width(values: &[f64], order: &[usize], weight: &[f64], total: f64) -> f64 {
    let defined: f64 = total
        - order
            .iter()
            .rev()
            .take_while(|&&i| values[i].is_nan())
            .map(|&i| weight[i])
            .sum::<f64>();
    let (lo_mass, hi_mass) = (TAILS.0 * defined, TAILS.1 * defined);
    let (mut cum, mut lo) = (0.0, f64::NAN);
    for &i in order {
        if values[i].is_nan() {
            break;
        }
        cum += weight[i];
        if lo.is_nan() && cum >= lo_mass {
            lo = values[i];
        }
        if cum >= hi_mass {
            return values[i] - lo;
        }
    }
    f64::NAN
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A linear-Gaussian toy: theta ~ N(0, 1) in the draws, a measurement
    /// at date t sees y = t * theta with error sigma.
    struct Linear {
        theta: Vec<f64>,
    }

    impl Observable for Linear {
        fn components(&self) -> usize {
            1
        }
        fn predict(&self, draw: usize, t: f64, out: &mut [f64]) -> bool {
            out[0] = t * self.theta[draw];
            true
        }
    }

    fn normal_draws(n: usize, seed: u64) -> Vec<f64> {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
        (0..n).map(|_| rng.sample(StandardNormal)).collect()
    }

    #[test]
    fn reweighting_reproduces_the_conjugate_normal_update() {
        // Prior N(0, 1), one measurement y = a theta + N(0, sigma^2): the
        // posterior variance is 1 / (1 + a^2 / sigma^2) whatever y is
        // (conjugate normal update, common practice; e.g. Gelman et al.,
        // Bayesian Data Analysis, 3rd ed., 2013, section 2.5), so its 68 per
        // cent interval is 2 sqrt(var) wide.
        let theta = normal_draws(40_000, 3);
        let obs = Linear {
            theta: theta.clone(),
        };
        let targets = [Target {
            name: "theta",
            values: &theta,
        }];
        let settings = PlanSettings {
            error: 1.0,
            outcomes: 64,
            seed: 9,
        };
        let dates = [0.0, 0.5, 1.0, 2.0];
        let values = expected_widths(&obs, theta.len(), &targets, &dates, settings).unwrap();
        let now = widths_now(&targets)[0];
        assert!((now - 2.0).abs() < 0.03, "width now {now}");
        for v in &values {
            let a: f64 = v.t_jd;
            let want = 2.0 / (1.0 + a * a).sqrt();
            let got = v.expected_width[0];
            assert!((got / want - 1.0).abs() < 0.03, "a = {a}: {got} vs {want}");
        }
        // More informative dates rank higher, and the effective number of
        // draws falls as the measurement teaches more (analytic: about
        // N / sqrt(1 + 2 a^2) for this toy).
        assert!(values
            .windows(2)
            .all(|w| w[1].expected_width[0] < w[0].expected_width[0]));
        assert!(values[3].min_effective_draws < values[1].min_effective_draws);
    }

    #[test]
    fn results_do_not_depend_on_the_number_of_threads() {
        let theta = normal_draws(2_000, 5);
        let obs = Linear {
            theta: theta.clone(),
        };
        let targets = [Target {
            name: "theta",
            values: &theta,
        }];
        let settings = PlanSettings {
            error: 0.7,
            outcomes: 16,
            seed: 1,
        };
        let dates: Vec<f64> = (0..37).map(|k| k as f64 * 0.1).collect();
        let run = |threads| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| expected_widths(&obs, theta.len(), &targets, &dates, settings))
                .unwrap()
        };
        assert_eq!(run(1), run(2));
    }

    #[test]
    fn bad_settings_are_refused_with_a_reason() {
        let theta = normal_draws(500, 1);
        let obs = Linear {
            theta: theta.clone(),
        };
        let good = PlanSettings {
            error: 1.0,
            outcomes: 4,
            seed: 0,
        };
        let t = [Target {
            name: "theta",
            values: &theta,
        }];
        let short = [Target {
            name: "m1",
            values: &theta[..10],
        }];
        let bad_error = PlanSettings {
            error: -1.0,
            ..good
        };
        assert!(matches!(
            expected_widths(&obs, 500, &t, &[1.0], bad_error),
            Err(PlanError::Setting(_))
        ));
        assert_eq!(
            expected_widths(&obs, 500, &t, &[], good),
            Err(PlanError::NoDates)
        );
        assert!(matches!(
            expected_widths(&obs, 500, &short, &[1.0], good),
            Err(PlanError::TargetLength { .. })
        ));
        assert_eq!(
            expected_widths(&obs, 50, &t, &[1.0], good),
            Err(PlanError::TooFewDraws(50))
        );
    }

    #[test]
    fn weighted_width_matches_the_plain_quantiles_and_skips_undefined_values() {
        // 1..=100 equally weighted: the 15.87 and 84.13 per cent points are
        // the 16th and 85th values (first to reach the tail mass).
        let mut v: Vec<f64> = (1..=100).map(f64::from).collect();
        let order = sorted_order(&v);
        let w = vec![1.0; 100];
        assert_eq!(weighted_width(&v, &order, &w, 100.0), 85.0 - 16.0);
        v.push(f64::NAN);
        let order = sorted_order(&v);
        let w = vec![1.0; 101];
        assert_eq!(weighted_width(&v, &order, &w, 101.0), 85.0 - 16.0);
    }
}
