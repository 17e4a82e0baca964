//! Separate period modes of a posterior: finding them, labelling every draw
//! with its mode, the weight of each mode with its uncertainty, and the
//! draws of one mode on their own (for per-mode summaries, plots and
//! predictions, so that nothing is ever averaged across modes).
//!
//! Modes are numbered from 1 in order of increasing period.

use dyad_common::quantile::median_of_finite as median;
use dyad_model::likelihood::Model;
use dyad_report::PosteriorDraws;
use dyad_sampler::diagnostics::DiagnosticsWorkspace;
use dyad_sampler::{KeptDraws, Watch, WatchedDiagnostics, WatchedSeries};

use crate::posterior::Draws;

/// One separated period mode of the posterior.
#[derive(Debug, Clone, serde::Serialize)]
pub struct PeriodMode {
    /// Mode number (1-based, in order of increasing period).
    pub number: usize,
    /// Posterior weight: the fraction of draws labelled with this mode.
    pub weight: f64,
    /// Monte Carlo standard error of the weight, from the series of the
    /// share of walkers in the mode record by record: its spread times the
    /// square root of its integrated autocorrelation time over the number
    /// of records (Sokal 1997, sect. 3). Under tempering the share can
    /// drift as a whole while each walker hops between modes often, so the
    /// spread of per-walker shares (the error quoted before) can be several
    /// times too small. Infinite when the share never changes although
    /// walkers differ (each walker kept to its own mode: nothing mixes).
    pub weight_error: f64,
    /// Median period, days.
    pub period_days: f64,
    /// Range of the mode's draws, days.
    pub range_days: [f64; 2],
    /// Median total mass in the mode, when the model has one.
    pub total_mass_msun: Option<f64>,
}

/// The modes and the mode of every draw.
#[derive(Debug, Clone)]
pub struct ModeSplit {
    /// Modes in order of increasing period (one mode when unimodal).
    pub modes: Vec<PeriodMode>,
    /// 1-based mode number of each draw, in draw order.
    pub labels: Vec<usize>,
}

impl ModeSplit {
    /// Whether the posterior has more than one separate period mode.
    pub fn is_multimodal(&self) -> bool {
        self.modes.len() > 1
    }
}

/// Groups of ln P (as [lo, hi] ranges) separated by empty stretches of a
/// histogram, in increasing order. A bin holding under 0.05 per cent of the
/// draws counts as empty; two groups are separate when at least two empty
/// bins lie between them; a group holding under 0.5 per cent of the draws is
/// dropped (its draws join the nearest group).
fn ln_period_groups(ln_p: &[f64]) -> Vec<[f64; 2]> {
    let finite: Vec<f64> = ln_p.iter().copied().filter(|l| l.is_finite()).collect();
    if finite.is_empty() {
        return Vec::new();
    }
    let lo = finite.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = finite.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    const BINS: usize = 200;
    let width = ((hi - lo) / BINS as f64).max(1e-12);
    let bin = |l: f64| (((l - lo) / width) as usize).min(BINS - 1);
    let mut counts = [0usize; BINS];
    for &l in &finite {
        counts[bin(l)] += 1;
    }
    let total = finite.len() as f64;
    let empty = |c: usize| (c as f64) < 5e-4 * total;
    let mut groups: Vec<(usize, usize)> = Vec::new();
    let mut b = 0;
    while b < BINS {
        if empty(counts[b]) {
            b += 1;
            continue;
        }
        let start = b;
        let mut end = b;
        let mut gap = 0;
        while b < BINS {
            if empty(counts[b]) {
                gap += 1;
                if gap >= 2 {
                    break;
                }
            } else {
                gap = 0;
                end = b;
            }
            b += 1;
        }
        groups.push((start, end));
    }
    groups
        .into_iter()
        .filter(|&(s, e)| counts[s..=e].iter().sum::<usize>() as f64 >= 0.005 * total)
        .map(|(s, e)| [lo + s as f64 * width, lo + (e + 1) as f64 * width])
        .collect()
}

/// Monte Carlo error of the weight of mode `k` (1-based) from the share of
/// walkers in it record by record (`labels[record * walkers + walker]`);
/// see [`PeriodMode::weight_error`]. NaN with fewer than two whole records.
fn weight_error(labels: &[usize], k: usize, walkers: usize) -> f64 {
    let records = labels.len() / walkers;
    if records < 2 {
        return f64::NAN;
    }
    // The same error the stopping rule judges: of the indicator's
    // ensemble-mean series, i.e. of the share of walkers in the mode.
    let indicator = WatchedSeries {
        name: String::new(),
        values: labels[..records * walkers]
            .iter()
            .map(|&l| if l == k { 1.0 } else { 0.0 })
            .collect(),
    };
    WatchedDiagnostics::measure(
        &indicator,
        (records, walkers, 1),
        &mut DiagnosticsWorkspace::new(),
    )
    .standard_error
}

/// Index of the group nearest to `l` (0 inside a range).
fn nearest_group(groups: &[[f64; 2]], l: f64) -> usize {
    let distance = |g: &[f64; 2]| (g[0] - l).max(l - g[1]).max(0.0);
    groups
        .iter()
        .enumerate()
        .min_by(|a, b| distance(a.1).total_cmp(&distance(b.1)))
        .map_or(0, |(i, _)| i)
}

/// What the stopping rule watches of the period modes: at each check the
/// kept draws' ln P are grouped as [`split_modes`] groups them, and every
/// mode gives one series, 1 for a draw in it and 0 otherwise (so its mean
/// is the mode's weight). The sampler then waits until each weight's Monte
/// Carlo error (from the share of walkers in the mode, step by step) is
/// within `[sampler] mode_weight_error`, that share does not drift, and the
/// indicator's split R-hat is within the parameters' bound
/// ([`WatchedDiagnostics::settled`]). With one mode there is nothing to
/// watch.
pub struct ModeWatch {
    /// Index of the period coordinate and whether it is ln P (else P).
    period: Option<(usize, bool)>,
    ln_p: Vec<f64>,
    labels: Vec<usize>,
}

impl ModeWatch {
    /// The watch for the posterior of `model`.
    pub fn new(model: &Model) -> Self {
        let period = model
            .layout()
            .period_index()
            .map(|i| (i, model.layout().names()[i].starts_with("ln_")));
        Self {
            period,
            ln_p: Vec::new(),
            labels: Vec::new(),
        }
    }
}

impl Watch for ModeWatch {
    fn watch(&mut self, draws: &KeptDraws<'_>) -> Vec<WatchedSeries> {
        let Some((index, is_log)) = self.period else {
            return Vec::new();
        };
        self.ln_p.clear();
        self.ln_p.extend(
            draws
                .parameter(index)
                .iter()
                .map(|&x| if is_log { x } else { x.ln() }),
        );
        let groups = ln_period_groups(&self.ln_p);
        if groups.len() < 2 {
            return Vec::new();
        }
        self.labels.clear();
        self.labels
            .extend(self.ln_p.iter().map(|&l| nearest_group(&groups, l)));
        groups
            .iter()
            .enumerate()
            .map(|(k, g)| WatchedSeries {
                name: format!(
                    "share of draws in period mode {} ({:.4} to {:.4} d)",
                    k + 1,
                    g[0].exp(),
                    g[1].exp()
                ),
                values: self
                    .labels
                    .iter()
                    .map(|&m| if m == k { 1.0 } else { 0.0 })
                    .collect(),
            })
            .collect()
    }
}

/// Splits the draws into period modes and labels every draw. `walkers` is
/// the number of walkers per record (draw `d` came from walker
/// `d % walkers`), used for the weights' errors. A model without a period
/// column (there is always one in dyad) gives one mode.
pub fn split_modes(table: &PosteriorDraws, walkers: usize) -> ModeSplit {
    let n = table.n_draws();
    let ln_p: Vec<f64> = table
        .index_of("period_days")
        .map(|i| table.column(i).iter().map(|p| p.ln()).collect())
        .unwrap_or_else(|| vec![f64::NAN; n]);
    let mut groups = ln_period_groups(&ln_p);
    if groups.is_empty() {
        groups.push([f64::NEG_INFINITY, f64::INFINITY]);
    }
    let labels: Vec<usize> = ln_p
        .iter()
        .map(|&l| {
            if l.is_finite() {
                nearest_group(&groups, l) + 1
            } else {
                1
            }
        })
        .collect();
    let mass = table.index_of("total_mass_msun").map(|i| table.column(i));
    let walkers = walkers.max(1);
    let modes = (1..=groups.len())
        .map(|k| {
            let members: Vec<usize> = (0..n).filter(|&d| labels[d] == k).collect();
            let weight = members.len() as f64 / n.max(1) as f64;
            let weight_error = weight_error(&labels, k, walkers);
            let periods: Vec<f64> = members.iter().map(|&d| ln_p[d].exp()).collect();
            let range_days = [
                periods.iter().copied().fold(f64::INFINITY, f64::min),
                periods.iter().copied().fold(f64::NEG_INFINITY, f64::max),
            ];
            let total_mass_msun = mass.as_ref().and_then(|m| {
                let v: Vec<f64> = members
                    .iter()
                    .map(|&d| m[d])
                    .filter(|v| v.is_finite())
                    .collect();
                (!v.is_empty()).then(|| median(v))
            });
            PeriodMode {
                number: k,
                weight,
                weight_error,
                period_days: median(periods),
                range_days,
                total_mass_msun,
            }
        })
        .collect();
    ModeSplit { modes, labels }
}

/// The separate period modes (ranges and weights), for choosing period
/// windows.
pub fn period_modes(draws: &Draws) -> Vec<PeriodMode> {
    split_modes(&draws.table, draws.walkers).modes
}

impl Draws {
    /// The draws labelled `mode` (1-based) in `labels`, in draw order.
    pub fn of_mode(&self, labels: &[usize], mode: usize) -> crate::Result<Draws> {
        let dim = self.sampled.len() / self.table.n_draws().max(1);
        let np = self.table.n_params();
        let keep: Vec<usize> = (0..labels.len()).filter(|&d| labels[d] == mode).collect();
        let mut sampled = Vec::with_capacity(keep.len() * dim);
        let mut values = Vec::with_capacity(keep.len() * np);
        let mut log_posterior = Vec::with_capacity(keep.len());
        for &d in &keep {
            sampled.extend_from_slice(&self.sampled[d * dim..(d + 1) * dim]);
            values.extend_from_slice(&self.table.values[d * np..(d + 1) * np]);
            log_posterior.push(self.table.log_posterior[d]);
        }
        let table = PosteriorDraws::new(self.table.params.clone(), values, log_posterior)?;
        Ok(Draws {
            // A mode's draws no longer come in whole records.
            walkers: 1,
            sampled,
            table,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use dyad_report::ParameterInfo;

    fn table(periods: &[f64]) -> PosteriorDraws {
        PosteriorDraws::new(
            vec![ParameterInfo::linear("period_days", "d", "P")],
            periods.to_vec(),
            vec![0.0; periods.len()],
        )
        .unwrap()
    }

    #[test]
    fn two_separate_period_groups_are_two_labelled_modes() {
        // 3000 draws near 100 d and 1000 near 300 d, 4 walkers; walker 3
        // holds all of the long-period draws.
        let mut p = Vec::new();
        for d in 0..4000 {
            let jitter = 1.0 + 0.01 * ((d * 7919 % 101) as f64 / 101.0 - 0.5);
            p.push(if d % 4 == 3 { 300.0 } else { 100.0 } * jitter);
        }
        let split = split_modes(&table(&p), 4);
        assert_eq!(split.modes.len(), 2);
        assert!((split.modes[0].weight - 0.75).abs() < 1e-12);
        assert!((split.modes[1].weight - 0.25).abs() < 1e-12);
        // Every record holds one draw of the long-period mode: the share
        // never changes while the walkers differ, so nothing mixes and the
        // weight's error is infinite.
        assert!(split.modes[1].weight_error.is_infinite());
        for (d, &l) in split.labels.iter().enumerate() {
            assert_eq!(l, if d % 4 == 3 { 2 } else { 1 });
        }
        assert!((split.modes[1].period_days - 300.0).abs() < 2.0);
    }

    #[test]
    fn independent_labels_give_the_binomial_error_of_the_weight() {
        // Each draw in mode 2 with probability 1/4 on its own (SplitMix64
        // bits), so the weight's error is sqrt(p (1 - p) / N) (binomial;
        // common practice) = 0.00108 for N = 160 000.
        let (records, walkers) = (10_000, 16);
        let mut state = 7u64;
        let labels: Vec<usize> = (0..records * walkers)
            .map(|_| {
                state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
                let mut z = state;
                z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
                z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
                if (z ^ (z >> 31)).is_multiple_of(4) {
                    2
                } else {
                    1
                }
            })
            .collect();
        let binomial = (0.25f64 * 0.75 / (records * walkers) as f64).sqrt();
        let got = weight_error(&labels, 2, walkers);
        assert!((got / binomial - 1.0).abs() < 0.15, "{got} vs {binomial}");
    }

    #[test]
    fn a_single_group_is_one_mode_with_every_draw_labelled_1() {
        let p: Vec<f64> = (0..1000).map(|d| 50.0 + d as f64 * 0.01).collect();
        let split = split_modes(&table(&p), 10);
        assert_eq!(split.modes.len(), 1);
        assert!(split.labels.iter().all(|&l| l == 1));
        assert_eq!(split.modes[0].weight, 1.0);
        // Every draw is in the one mode: the weight is exact.
        assert_eq!(split.modes[0].weight_error, 0.0);
    }
}
