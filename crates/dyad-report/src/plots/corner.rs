//! Corner plot: 1-D histograms on the diagonal, smoothed 2-D densities with
//! 1 and 2 sigma contours below it.

use super::density::{
    contour_segments, fill_runs, mass_levels, smoothed_histogram, SIGMA_MASS_FRACTIONS,
};
use super::{
    dashed_vertical, font, padded_range, render, tick_formatter, tint, Figure, PlotFiles,
    PlotResultExt, BLUE, GREY, INK, SKY_BLUE,
};
use crate::error::ReportError;
use crate::input::PosteriorDraws;
use crate::stats::{prepared_values, summarise_values};
use crate::summary::{decimals_for, fmt_value};
use plotters::coord::Shift;
use plotters::prelude::*;
use std::path::Path;

const NAME: &str = "corner";
const BINS_1D: usize = 40;
const BINS_2D: usize = 40;
const SMOOTH_BINS: f64 = 1.2;
const MAX_OUTLIER_DOTS: usize = 2000;
const FILL_SUBDIVISION: usize = 4;

struct Column {
    /// Axis text; names the offset when one was subtracted.
    axis_label: String,
    values: Vec<f64>,
    range: (f64, f64),
    headline: String,
}

struct CornerFigure {
    title: String,
    columns: Vec<Column>,
    panel: u32,
    left: u32,
    bottom: u32,
    top: u32,
}

const TITLE_H: u32 = 56;
const LEFT_PAD: u32 = 18;

/// Corner plot of the parameters named in `names` (in that order, at least
/// one), written as `<stem>.png` and `<stem>.svg`. Angles are unwrapped
/// around their circular mean, as in the summaries.
pub fn plot_corner(
    stem: &Path,
    title: &str,
    draws: &PosteriorDraws,
    names: &[&str],
) -> Result<PlotFiles, ReportError> {
    draws.validate()?;
    if names.is_empty() {
        return Err(ReportError::InvalidInput(
            "corner plot needs at least one parameter".into(),
        ));
    }
    let mut columns = Vec::with_capacity(names.len());
    for name in names {
        let p = draws.index_of(name).ok_or_else(|| {
            ReportError::InvalidInput(format!("corner plot: no parameter called {name}"))
        })?;
        let info = draws.params[p].clone();
        let raw = draws.column(p);
        let (_, window) = prepared_values(&raw, info.kind);
        let mut values: Vec<f64> = raw.iter().map(|&v| window.apply(v)).collect();
        let s = summarise_values(&info, &raw, raw[0])?;
        let mut range = padded_range(&values, 0.05);
        // A narrow posterior far from zero (e.g. a time of periastron in JD)
        // gets its ticks relative to a round offset named on the axis, so
        // tick labels stay short enough not to collide.
        let span = range.1 - range.0;
        let mut axis_label = info.axis_label();
        if span > 0.0 && s.median.abs() > 1000.0 * span {
            let step = 10f64.powf(span.log10().floor());
            let offset = (s.median / step).round() * step;
            let decimals = (-step.log10()).max(0.0) as usize;
            for v in values.iter_mut() {
                *v -= offset;
            }
            range = (range.0 - offset, range.1 - offset);
            axis_label = if info.unit.is_empty() {
                format!("{} − {offset:.decimals$}", info.label)
            } else {
                format!("{} − {offset:.decimals$} [{}]", info.label, info.unit)
            };
        }
        let d = decimals_for(&s);
        let f = |v: f64| fmt_value(v, d);
        let unit = if info.unit.is_empty() {
            String::new()
        } else {
            format!(" {}", info.unit)
        };
        let headline = format!(
            "{} = {} −{} +{}{}",
            info.label,
            f(s.median),
            f(s.minus68()),
            f(s.plus68()),
            unit
        );
        columns.push(Column {
            axis_label,
            values,
            range,
            headline,
        });
    }
    let k = columns.len() as u32;
    let panel = (1500 / k).clamp(200, 380);
    let fig = CornerFigure {
        title: title.to_string(),
        columns,
        panel,
        left: 96,
        bottom: 86,
        top: 30,
    };
    render(&fig, stem)
}

impl Figure for CornerFigure {
    const NAME: &'static str = NAME;

    fn size(&self) -> (u32, u32) {
        let k = self.columns.len() as u32;
        (
            LEFT_PAD + self.left + k * self.panel + 20,
            TITLE_H + k * (self.panel + self.top) + self.bottom,
        )
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ReportError> {
        let area = root
            .titled(&self.title, font(30.0))
            .ctx(NAME)?
            .margin(0, 0, LEFT_PAD, 0);
        let k = self.columns.len();
        let (p, top) = (self.panel as i32, self.top as i32);
        let xs: Vec<i32> = (1..=k).map(|c| self.left as i32 + c as i32 * p).collect();
        let ys: Vec<i32> = (1..k).map(|r| r as i32 * (p + top)).collect();
        let cells = area.split_by_breakpoints(&xs, &ys);
        // Columns: k + 1 (the last is the right-hand spare strip).
        for row in 0..k {
            for col in 0..=k {
                if col > row {
                    continue;
                }
                let cell = &cells[row * (k + 1) + col];
                self.draw_panel(cell, row, col)?;
            }
        }
        Ok(())
    }
}

impl CornerFigure {
    fn draw_panel<DB: DrawingBackend>(
        &self,
        cell: &DrawingArea<DB, Shift>,
        row: usize,
        col: usize,
    ) -> Result<(), ReportError> {
        let k = self.columns.len();
        let bottom_row = row + 1 == k;
        let left_col = col == 0;
        let cx = &self.columns[col];
        let x_fmt = tick_formatter(cx.range.1 - cx.range.0, 4);
        if row == col {
            // 1-D histogram (normalised to its peak).
            let (lo, hi) = cx.range;
            let w = (hi - lo) / BINS_1D as f64;
            let mut counts = vec![0.0; BINS_1D];
            for &v in &cx.values {
                if v.is_finite() && v >= lo && v < hi {
                    counts[((v - lo) / w) as usize % BINS_1D] += 1.0;
                }
            }
            let peak = counts.iter().cloned().fold(0.0, f64::max).max(1.0);
            let mut chart = ChartBuilder::on(cell)
                .margin_top(self.top)
                .margin_right(6)
                .x_label_area_size(if bottom_row { self.bottom } else { 0 })
                .y_label_area_size(if left_col { self.left } else { 0 })
                .build_cartesian_2d(lo..hi, 0.0..1.12)
                .ctx(NAME)?;
            configure(
                &mut chart,
                bottom_row,
                false,
                &cx.axis_label,
                None,
                &x_fmt,
                &x_fmt,
            )?;
            chart
                .draw_series(counts.iter().enumerate().map(|(i, c)| {
                    let x0 = lo + i as f64 * w;
                    Rectangle::new(
                        [(x0, 0.0), (x0 + w, c / peak)],
                        tint(SKY_BLUE, 0.55).filled(),
                    )
                }))
                .ctx(NAME)?;
            let mut outline = Vec::with_capacity(2 * BINS_1D + 2);
            outline.push((lo, 0.0));
            for (i, c) in counts.iter().enumerate() {
                let x0 = lo + i as f64 * w;
                outline.push((x0, c / peak));
                outline.push((x0 + w, c / peak));
            }
            outline.push((hi, 0.0));
            chart
                .draw_series(std::iter::once(PathElement::new(
                    outline,
                    BLUE.stroke_width(2),
                )))
                .ctx(NAME)?;
            let mut sorted: Vec<f64> = cx
                .values
                .iter()
                .copied()
                .filter(|v| v.is_finite())
                .collect();
            sorted.sort_by(f64::total_cmp);
            let q = |p| crate::stats::quantile_sorted(&sorted, p);
            chart
                .draw_series(std::iter::once(PathElement::new(
                    vec![(q(0.5), 0.0), (q(0.5), 1.12)],
                    INK.stroke_width(2),
                )))
                .ctx(NAME)?;
            for x in [q(0.16), q(0.84)] {
                chart
                    .draw_series(
                        dashed_vertical(x, 0.0, 1.12, 12)
                            .into_iter()
                            .map(|s| PathElement::new(s, INK.stroke_width(1))),
                    )
                    .ctx(NAME)?;
            }
            frame(&chart)?;
            // Headline above the panel.
            let (pw, _) = chart.plotting_area().dim_in_pixel();
            let x_off = if left_col { self.left as i32 } else { 0 };
            cell.draw(&Text::new(
                cx.headline.clone(),
                (x_off + pw as i32 / 2, self.top as i32 / 2),
                font(15.0).pos(plotters::style::text_anchor::Pos::new(
                    plotters::style::text_anchor::HPos::Center,
                    plotters::style::text_anchor::VPos::Center,
                )),
            ))
            .ctx(NAME)?;
            return Ok(());
        }

        // 2-D panel: x = column parameter, y = row parameter.
        let cy = &self.columns[row];
        let y_fmt = tick_formatter(cy.range.1 - cy.range.0, 4);
        let grid = smoothed_histogram(
            &cx.values,
            &cy.values,
            cx.range,
            cy.range,
            BINS_2D,
            SMOOTH_BINS,
        );
        let levels = mass_levels(&grid.z, &SIGMA_MASS_FRACTIONS);
        let mut chart = ChartBuilder::on(cell)
            .margin_top(self.top)
            .margin_right(6)
            .x_label_area_size(if bottom_row { self.bottom } else { 0 })
            .y_label_area_size(if left_col { self.left } else { 0 })
            .build_cartesian_2d(cx.range.0..cx.range.1, cy.range.0..cy.range.1)
            .ctx(NAME)?;
        configure(
            &mut chart,
            bottom_row,
            left_col,
            &cx.axis_label,
            Some(&cy.axis_label),
            &x_fmt,
            &y_fmt,
        )?;
        // Draws outside the 2-sigma region as faint dots.
        let n = cx.values.len();
        let stride = (n / MAX_OUTLIER_DOTS).max(1);
        let outside = (0..n).step_by(stride).filter_map(|i| {
            let (a, b) = (cx.values[i], cy.values[i]);
            match grid.bin_of(a, b) {
                Some((ix, iy)) if grid.at(ix, iy) >= levels[1] => None,
                Some(_) => Some((a, b)),
                None => None,
            }
        });
        chart
            .draw_series(outside.map(|pt| Circle::new(pt, 1, GREY.mix(0.6).filled())))
            .ctx(NAME)?;
        let shades = [tint(BLUE, 0.55), tint(SKY_BLUE, 0.4)];
        let bins =
            fill_runs(&grid, &levels, FILL_SUBDIVISION)
                .into_iter()
                .map(|(x0, x1, y0, y1, k)| {
                    Rectangle::new([(x0, y0), (x1, y1)], shades[k.min(1)].filled())
                });
        chart.draw_series(bins).ctx(NAME)?;
        for (level, width) in levels.iter().zip([2, 1]) {
            if level.is_finite() {
                chart
                    .draw_series(
                        contour_segments(&grid, *level)
                            .into_iter()
                            .map(|s| PathElement::new(s.to_vec(), BLUE.stroke_width(width))),
                    )
                    .ctx(NAME)?;
            }
        }
        frame(&chart)?;
        Ok(())
    }
}

type Chart<'a, DB> = ChartContext<
    'a,
    DB,
    plotters::coord::cartesian::Cartesian2d<
        plotters::coord::types::RangedCoordf64,
        plotters::coord::types::RangedCoordf64,
    >,
>;

fn configure<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    x_labels: bool,
    y_labels: bool,
    x_desc: &str,
    y_desc: Option<&str>,
    x_fmt: &dyn Fn(&f64) -> String,
    y_fmt: &dyn Fn(&f64) -> String,
) -> Result<(), ReportError> {
    let mut mesh = chart.configure_mesh();
    mesh.disable_mesh()
        .x_labels(if x_labels { 4 } else { 0 })
        .y_labels(if y_labels { 4 } else { 0 })
        .x_label_formatter(x_fmt)
        .y_label_formatter(y_fmt)
        .label_style(font(15.0))
        .axis_desc_style(font(18.0))
        .axis_style(GREY.stroke_width(1));
    if x_labels {
        mesh.x_desc(x_desc);
    }
    if let (true, Some(y)) = (y_labels, y_desc) {
        mesh.y_desc(y);
    }
    mesh.draw().ctx(NAME)
}

fn frame<DB: DrawingBackend>(chart: &Chart<'_, DB>) -> Result<(), ReportError> {
    let (xr, yr) = (chart.x_range(), chart.y_range());
    chart
        .plotting_area()
        .draw(&Rectangle::new(
            [(xr.start, yr.start), (xr.end, yr.end)],
            GREY.stroke_width(1),
        ))
        .ctx(NAME)
}
