//! Rank histograms for simulation-based calibration (Talts, Betancourt,
//! Simpson, Vehtari & Gelman 2018, "Validating Bayesian inference
//! algorithms with simulation-based calibration", arXiv:1804.06788): for a
//! calibrated sampler the rank of the true value among L posterior draws is
//! uniform on 0..=L, so each bin's count is binomial.

use super::{
    dashed_vertical, font, render, tint, Figure, PlotFiles, PlotResultExt, BLUE, GREY, INK,
};
use crate::error::ReportError;
use plotters::coord::Shift;
use plotters::prelude::*;
use std::path::Path;

const NAME: &str = "ranks";
/// Probability covered by the expected-count band.
pub const RANK_BAND_PROBABILITY: f64 = 0.99;

/// The ranks of one parameter across simulations.
#[derive(Debug, Clone, PartialEq)]
pub struct RankHistogramInput {
    /// Parameter label, e.g. "ln P".
    pub label: String,
    /// One rank per simulation, each in 0..=max_rank.
    pub ranks: Vec<usize>,
}

/// Smallest k with P(X <= k) >= prob for X ~ Binomial(n, p), by summing the
/// probability mass function in log space (exact; no normal approximation).
pub fn binomial_quantile(n: usize, p: f64, prob: f64) -> usize {
    if p <= 0.0 {
        return 0;
    }
    if p >= 1.0 {
        return n;
    }
    let (lp, lq) = (p.ln(), (1.0 - p).ln());
    let mut log_pmf = n as f64 * lq;
    let mut cdf = 0.0;
    for k in 0..=n {
        cdf += log_pmf.exp();
        if cdf >= prob {
            return k;
        }
        if k < n {
            log_pmf += ((n - k) as f64).ln() - ((k + 1) as f64).ln() + lp - lq;
        }
    }
    n
}

/// First rank of bin `b` when ranks 0..=max_rank go into `n_bins` bins by
/// `bin = rank * n_bins / (max_rank + 1)`.
fn bin_start(b: usize, n_bins: usize, max_rank: usize) -> usize {
    (b * (max_rank + 1)).div_ceil(n_bins)
}

struct RankFigure<'a> {
    title: &'a str,
    inputs: &'a [RankHistogramInput],
    max_rank: usize,
    n_bins: usize,
    cols: usize,
    rows: usize,
}

/// Writes rank histograms (one panel per parameter, three per row) as
/// `<stem>.png` and `<stem>.svg`. Ranks lie in 0..=max_rank (max_rank =
/// number of posterior draws per simulation); `n_bins` must be in
/// 1..=max_rank+1. The grey band is the central 99 % range of each bin's
/// count under uniformity, the dashed line its expectation.
pub fn plot_rank_histograms(
    stem: &Path,
    title: &str,
    inputs: &[RankHistogramInput],
    max_rank: usize,
    n_bins: usize,
) -> Result<PlotFiles, ReportError> {
    if inputs.is_empty() {
        return Err(ReportError::InvalidInput(
            "rank plot needs a parameter".into(),
        ));
    }
    if n_bins == 0 || n_bins > max_rank + 1 {
        return Err(ReportError::InvalidInput(format!(
            "rank plot: {n_bins} bins for ranks 0..={max_rank}"
        )));
    }
    for inp in inputs {
        if let Some(r) = inp.ranks.iter().find(|&&r| r > max_rank) {
            return Err(ReportError::InvalidInput(format!(
                "rank plot: {} has rank {r} > {max_rank}",
                inp.label
            )));
        }
    }
    let cols = inputs.len().min(3);
    let rows = inputs.len().div_ceil(cols);
    render(
        &RankFigure {
            title,
            inputs,
            max_rank,
            n_bins,
            cols,
            rows,
        },
        stem,
    )
}

impl Figure for RankFigure<'_> {
    const NAME: &'static str = NAME;

    fn size(&self) -> (u32, u32) {
        (
            (460 * self.cols as u32).max(900),
            96 + 360 * self.rows as u32,
        )
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ReportError> {
        let area = root
            .titled(self.title, font(28.0))
            .ctx(NAME)?
            .titled(
                "grey band: central 99 % range of a bin's count if the ranks are uniform; dashed: expected count",
                font(16.0).color(&GREY),
            )
            .ctx(NAME)?;
        let cells = area.split_evenly((self.rows, self.cols));
        for (inp, cell) in self.inputs.iter().zip(cells.iter()) {
            self.draw_panel(cell, inp)?;
        }
        Ok(())
    }
}

impl RankFigure<'_> {
    fn draw_panel<DB: DrawingBackend>(
        &self,
        cell: &DrawingArea<DB, Shift>,
        inp: &RankHistogramInput,
    ) -> Result<(), ReportError> {
        let (b_n, l) = (self.n_bins, self.max_rank);
        let n = inp.ranks.len();
        let mut counts = vec![0usize; b_n];
        for &r in &inp.ranks {
            counts[r * b_n / (l + 1)] += 1;
        }
        let mut bands = Vec::with_capacity(b_n);
        for b in 0..b_n {
            let width = bin_start(b + 1, b_n, l) - bin_start(b, b_n, l);
            let p = width as f64 / (l + 1) as f64;
            let tail = 0.5 * (1.0 - RANK_BAND_PROBABILITY);
            bands.push((
                binomial_quantile(n, p, tail),
                binomial_quantile(n, p, 1.0 - tail),
                n as f64 * p,
            ));
        }
        let y_max = counts
            .iter()
            .copied()
            .chain(bands.iter().map(|b| b.1))
            .max()
            .unwrap_or(1)
            .max(1) as f64
            * 1.15;
        let x_hi = (l + 1) as f64;
        let mut chart = ChartBuilder::on(cell)
            .caption(format!("{}  ({} simulations)", inp.label, n), font(19.0))
            .margin(14)
            .x_label_area_size(52)
            .y_label_area_size(64)
            .build_cartesian_2d(0.0..x_hi, 0.0..y_max)
            .ctx(NAME)?;
        let fx = |v: &f64| format!("{v:.0}");
        let fy = |v: &f64| format!("{v:.0}");
        chart
            .configure_mesh()
            .disable_mesh()
            .x_labels(5)
            .y_labels(5)
            .x_label_formatter(&fx)
            .y_label_formatter(&fy)
            .label_style(font(15.0))
            .axis_desc_style(font(17.0))
            .x_desc(format!("Rank of true value among {l} draws"))
            .y_desc("Count")
            .axis_style(GREY)
            .draw()
            .ctx(NAME)?;
        for (b, &c) in counts.iter().enumerate() {
            let (x0, x1) = (bin_start(b, b_n, l) as f64, bin_start(b + 1, b_n, l) as f64);
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(x0, 0.0), (x1, c as f64)],
                    tint(BLUE, 0.5).filled(),
                )))
                .ctx(NAME)?;
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(x0, 0.0), (x1, c as f64)],
                    BLUE.stroke_width(1),
                )))
                .ctx(NAME)?;
        }
        for (b, &(lo, hi, _)) in bands.iter().enumerate() {
            let (x0, x1) = (bin_start(b, b_n, l) as f64, bin_start(b + 1, b_n, l) as f64);
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(x0, lo as f64), (x1, hi as f64)],
                    GREY.mix(0.35).filled(),
                )))
                .ctx(NAME)?;
        }
        // Expected count (dashed, drawn as short horizontal dashes).
        for (b, &(_, _, e)) in bands.iter().enumerate() {
            let (x0, x1) = (bin_start(b, b_n, l) as f64, bin_start(b + 1, b_n, l) as f64);
            chart
                .draw_series(
                    dashed_vertical(0.0, x0, x1, 3).into_iter().map(|s| {
                        PathElement::new(vec![(s[0].1, e), (s[1].1, e)], INK.stroke_width(1))
                    }),
                )
                .ctx(NAME)?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn binomial_quantiles_by_hand() {
        // Binomial(20, 0.05): P(X<=3) = 0.9841, P(X<=4) = 0.9974 (summing
        // the pmf by hand), so the 0.995 quantile is 4 and the 0.005
        // quantile is 0 (P(X=0) = 0.3585).
        assert_eq!(binomial_quantile(20, 0.05, 0.995), 4);
        assert_eq!(binomial_quantile(20, 0.05, 0.005), 0);
        // Binomial(100, 0.5): 0.5 % and 99.5 % quantiles are 37 and 63
        // (R qbinom, from memory; normal approx. 50 -/+ 2.576*5 agrees).
        assert_eq!(binomial_quantile(100, 0.5, 0.005), 37);
        assert_eq!(binomial_quantile(100, 0.5, 0.995), 63);
        assert_eq!(binomial_quantile(7, 1.0, 0.5), 7);
    }

    #[test]
    fn bins_cover_every_rank_once() {
        for (bins, l) in [(10, 99), (7, 99), (20, 20), (1, 5)] {
            let mut covered = 0;
            for b in 0..bins {
                let (s, e) = (bin_start(b, bins, l), bin_start(b + 1, bins, l));
                for r in s..e {
                    assert_eq!(r * bins / (l + 1), b);
                }
                covered += e - s;
            }
            assert_eq!(covered, l + 1);
        }
    }
}
