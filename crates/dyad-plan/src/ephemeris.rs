//! Posterior-predictive bands over a set of epochs: for each epoch and each
//! predicted quantity, the median and the equal-tailed 68, 90 and 95 per
//! cent intervals of the draws' predictions.
//!
//! The caller evaluates the model (one closure call per draw and epoch);
//! this module only gathers and summarises. Quantiles are those of
//! `dyad_report::stats` (Hyndman & Fan 1996, definition 7). Angles are
//! summarised on the circle: the draws are wrapped into the turn centred on
//! their circular mean (Mardia & Jupp 2000, sect. 2.2), and the band is then
//! shifted by whole turns so that its median lies in [0, period) (interval
//! ends may fall outside it). Epochs are summarised in parallel, each from
//! the draws in their given order, so results never depend on the number of
//! threads.

use dyad_report::stats::{circular_mean, quantile_sorted, wrap_around};
use rayon::prelude::*;

use crate::PlanError;

/// Tail probabilities of the bands: the median, then the lower and upper
/// ends of the 68, 90 and 95 per cent equal-tailed intervals (the 68 per
/// cent ends are the conventional 16th and 84th percentiles).
pub const BAND_PROBABILITIES: [f64; 7] = [0.5, 0.16, 0.84, 0.05, 0.95, 0.025, 0.975];

/// The posterior-predictive distribution of one quantity at one epoch.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PredictiveBand {
    /// Median.
    pub median: f64,
    /// 16th and 84th percentiles.
    pub q68: [f64; 2],
    /// 5th and 95th percentiles.
    pub q90: [f64; 2],
    /// 2.5th and 97.5th percentiles.
    pub q95: [f64; 2],
}

impl PredictiveBand {
    /// The band of `values` (reordered in place). `period` is `Some(turn)`
    /// for an angle (e.g. 360 for degrees), `None` for a plain quantity.
    /// NaN in every field for an empty slice.
    pub fn of_values(values: &mut [f64], period: Option<f64>) -> Self {
        if let Some(turn) = period {
            let centre = circular_mean(values, turn);
            let centre = if centre.is_finite() {
                centre
            } else {
                0.5 * turn
            };
            for v in values.iter_mut() {
                *v = wrap_around(*v, centre, turn);
            }
        }
        values.sort_by(f64::total_cmp);
        let mut q = BAND_PROBABILITIES.map(|p| quantile_sorted(values, p));
        if let Some(turn) = period {
            if q[0].is_finite() {
                let shift = q[0].rem_euclid(turn) - q[0];
                for v in q.iter_mut() {
                    *v += shift;
                }
            }
        }
        Self {
            median: q[0],
            q68: [q[1], q[2]],
            q90: [q[3], q[4]],
            q95: [q[5], q[6]],
        }
    }

    /// The values in the order of [`BAND_PROBABILITIES`].
    pub fn as_array(&self) -> [f64; 7] {
        [
            self.median,
            self.q68[0],
            self.q68[1],
            self.q90[0],
            self.q90[1],
            self.q95[0],
            self.q95[1],
        ]
    }
}

/// Mean and covariance of a pair of predicted quantities (e.g. the two sky
/// offsets), for an error ellipse.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PairSpread {
    /// Means of the two quantities.
    pub mean: [f64; 2],
    /// Their covariance (divisor n).
    pub cov: [[f64; 2]; 2],
}

impl PairSpread {
    /// The spread of `points`; `None` if there are none.
    pub fn of_points(points: &[[f64; 2]]) -> Option<Self> {
        if points.is_empty() {
            return None;
        }
        let m = points.len() as f64;
        let mean = points
            .iter()
            .fold([0.0; 2], |a, p| [a[0] + p[0] / m, a[1] + p[1] / m]);
        let mut cov = [[0.0; 2]; 2];
        for p in points {
            let d = [p[0] - mean[0], p[1] - mean[1]];
            cov[0][0] += d[0] * d[0] / m;
            cov[0][1] += d[0] * d[1] / m;
            cov[1][1] += d[1] * d[1] / m;
        }
        cov[1][0] = cov[0][1];
        Some(Self { mean, cov })
    }
}

/// The bands of every quantity at one epoch.
#[derive(Debug, Clone, PartialEq)]
pub struct EpochBands {
    /// One band per quantity, in the caller's order.
    pub bands: Vec<PredictiveBand>,
    /// Spread of the pair of quantities asked for, if any.
    pub pair: Option<PairSpread>,
}

/// The predicted quantities: how many, which are angles, which pair to
/// summarise jointly.
#[derive(Debug, Clone, Copy)]
pub struct Quantities<'a> {
    /// `periods[k]` is `Some(turn)` if quantity k is an angle with that
    /// period, `None` otherwise; its length is the number of quantities.
    pub periods: &'a [Option<f64>],
    /// Two quantity indices whose joint mean and covariance are wanted.
    pub pair: Option<[usize; 2]>,
}

/// Bands of `quantities` at each of `times_jd` over `draws` posterior draws.
///
/// `predict(draw, t_jd, out)` writes the draw's prediction of every quantity
/// at `t_jd` into `out` (NaN where the draw predicts nothing); it is called
/// from several threads. An epoch at which some quantity has no finite
/// prediction in any draw is an error.
pub fn predictive_bands<F>(
    draws: usize,
    times_jd: &[f64],
    quantities: Quantities<'_>,
    predict: F,
) -> Result<Vec<EpochBands>, PlanError>
where
    F: Fn(usize, f64, &mut [f64]) + Sync,
{
    let n_q = quantities.periods.len();
    if let Some(pair) = quantities.pair {
        if pair.iter().any(|&k| k >= n_q) {
            return Err(PlanError::Setting(format!(
                "pair {pair:?} of {n_q} quantities"
            )));
        }
    }
    times_jd
        .par_iter()
        .map(|&t_jd| {
            let mut columns: Vec<Vec<f64>> = vec![Vec::with_capacity(draws); n_q];
            let mut pairs = Vec::new();
            let mut out = vec![f64::NAN; n_q];
            for d in 0..draws {
                out.fill(f64::NAN);
                predict(d, t_jd, &mut out);
                for (column, v) in columns.iter_mut().zip(&out) {
                    if v.is_finite() {
                        column.push(*v);
                    }
                }
                if let Some([a, b]) = quantities.pair {
                    if out[a].is_finite() && out[b].is_finite() {
                        pairs.push([out[a], out[b]]);
                    }
                }
            }
            if columns.iter().any(Vec::is_empty) {
                return Err(PlanError::NoPrediction { t_jd });
            }
            let bands = columns
                .iter_mut()
                .zip(quantities.periods)
                .map(|(c, &period)| PredictiveBand::of_values(c, period))
                .collect();
            Ok(EpochBands {
                bands,
                pair: PairSpread::of_points(&pairs),
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bands_of_a_uniform_grid_are_its_quantiles() {
        // 0, 1, ..., 1000: the p quantile of definition 7 is 1000 p
        // (Hyndman & Fan 1996).
        let mut v: Vec<f64> = (0..=1000).rev().map(f64::from).collect();
        let b = PredictiveBand::of_values(&mut v, None);
        assert_eq!(b.median, 500.0);
        assert_eq!(b.q68, [160.0, 840.0]);
        assert_eq!(b.q90, [50.0, 950.0]);
        assert_eq!(b.q95, [25.0, 975.0]);
        assert_eq!(b.as_array()[4], 950.0);
    }

    #[test]
    fn angles_straddling_north_give_one_contiguous_band() {
        // Position angles 350..=370 deg, written as 350..359 and 0..10: the
        // band runs across 0/360 with its median at 0 (= 360).
        let mut v: Vec<f64> = (350..=370).map(|a| f64::from(a) % 360.0).collect();
        let b = PredictiveBand::of_values(&mut v, Some(360.0));
        let from_north = (b.median + 180.0).rem_euclid(360.0) - 180.0;
        assert!(from_north.abs() < 1e-9, "{b:?}");
        assert!((0.0..360.0).contains(&b.median), "{b:?}");
        let (lo, hi) = (b.q95[0] - b.median, b.q95[1] - b.median);
        assert!((lo + 9.5).abs() < 1e-9 && (hi - 9.5).abs() < 1e-9, "{b:?}");
        // The same draws read as plain numbers would span nearly a turn.
        let mut v: Vec<f64> = (350..=370).map(|a| f64::from(a) % 360.0).collect();
        let plain = PredictiveBand::of_values(&mut v, None);
        assert!(plain.q95[1] - plain.q95[0] > 300.0);
    }

    #[test]
    fn pair_spread_is_the_sample_covariance() {
        let s = PairSpread::of_points(&[[1.0, 2.0], [3.0, 6.0]]).unwrap();
        assert_eq!(s.mean, [2.0, 4.0]);
        assert_eq!(s.cov, [[1.0, 2.0], [2.0, 4.0]]);
        assert_eq!(PairSpread::of_points(&[]), None);
    }

    #[test]
    fn bands_over_epochs_skip_undefined_draws_and_do_not_depend_on_threads() {
        // Quantity 0: t + draw; quantity 1: undefined for odd draws.
        let predict = |d: usize, t: f64, out: &mut [f64]| {
            out[0] = t + d as f64;
            if d.is_multiple_of(2) {
                out[1] = d as f64;
            }
        };
        let q = Quantities {
            periods: &[None, None],
            pair: Some([0, 1]),
        };
        let times: Vec<f64> = (0..20).map(f64::from).collect();
        let run = |threads| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| predictive_bands(101, &times, q, predict))
                .unwrap()
        };
        let one = run(1);
        assert_eq!(one, run(2));
        assert_eq!(one[3].bands[0].median, 53.0);
        // Even draws 0..=100: 51 values, median 50.
        assert_eq!(one[3].bands[1].median, 50.0);
        let mean = one[3].pair.unwrap().mean;
        assert!((mean[0] - 53.0).abs() < 1e-12 && (mean[1] - 50.0).abs() < 1e-12);
        let none = |_: usize, _: f64, _: &mut [f64]| {};
        assert_eq!(
            predictive_bands(10, &[7.0], q, none),
            Err(PlanError::NoPrediction { t_jd: 7.0 })
        );
    }
}
