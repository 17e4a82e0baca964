//! Pair plot of the main parameters: smooth 1-D densities with the 68 and
//! 95 per cent intervals shaded beneath them on the diagonal, grey-level
//! 2-D densities with the lines of the 68 and 95 per cent highest-density
//! regions below it, and the numbers in a table beside the grid (not over
//! the panels).

use super::density::{contour_segments, mass_levels, smoothed_histogram, Grid2};
use super::{
    font, padded_range, render, tick_formatter, tint, Figure, PlotFiles, PlotResultExt, BLUE, GREY,
    INK, SKY_BLUE,
};
use crate::error::ReportError;
use crate::input::PosteriorDraws;
use crate::stats::{prepared_values, summarise_values, ParameterSummary};
use crate::summary::{decimals_for, fmt_value, is_fixed};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::path::Path;

const NAME: &str = "pairs";
/// Bins of the 1-D density and its Gaussian smoothing (in bins).
const BINS_1D: usize = 64;
const SMOOTH_1D: f64 = 1.6;
/// Bins of the 2-D density and its smoothing.
const BINS_2D: usize = 48;
const SMOOTH_2D: f64 = 1.3;
/// Probability held inside the two drawn highest-density regions.
const HDR_FRACTIONS: [f64; 2] = [0.68, 0.95];
/// Darkest grey of the 2-D density (at its peak), as a fraction of black.
const GREY_DEPTH: f64 = 0.62;

struct Column {
    /// Axis text; names the offset when one was subtracted.
    axis_label: String,
    values: Vec<f64>,
    range: (f64, f64),
    /// Summary in the plotted window (offset applied).
    summary: ParameterSummary,
    /// Table cells: label, median, 68 %, 95 %, unit.
    cells: [String; 5],
}

struct PairFigure {
    title: String,
    columns: Vec<Column>,
    panel: u32,
    table_w: u32,
}

const TITLE_H: u32 = 56;
const LEFT: u32 = 96;
const BOTTOM: u32 = 86;
const GAP: u32 = 10;
/// Room left of the y-axis titles.
const LEFT_PAD: u32 = 20;
const TABLE_FONT: f64 = 17.0;

/// Pair plot of the parameters named in `names` (in that order, at least
/// one), written as `<stem>.png` and `<stem>.svg`. Angles are unwrapped
/// around their circular mean, as in the summaries.
pub fn plot_pairs(
    stem: &Path,
    title: &str,
    draws: &PosteriorDraws,
    names: &[&str],
) -> Result<PlotFiles, ReportError> {
    draws.validate()?;
    if names.is_empty() {
        return Err(ReportError::InvalidInput(
            "pair plot needs at least one parameter".into(),
        ));
    }
    let mut columns = Vec::with_capacity(names.len());
    for name in names {
        let p = draws.index_of(name).ok_or_else(|| {
            ReportError::InvalidInput(format!("pair plot: no parameter called {name}"))
        })?;
        columns.push(column_of(draws, p)?);
    }
    let k = columns.len() as u32;
    let panel = (1400 / k).clamp(190, 360);
    let fig = PairFigure {
        title: title.to_string(),
        columns,
        panel,
        table_w: 0,
    };
    let table_w = fig.table_width();
    render(&PairFigure { table_w, ..fig }, stem)
}

fn column_of(draws: &PosteriorDraws, p: usize) -> Result<Column, ReportError> {
    let info = draws.params[p].clone();
    let raw = draws.column(p);
    let (_, window) = prepared_values(&raw, info.kind);
    let mut values: Vec<f64> = raw.iter().map(|&v| window.apply(v)).collect();
    let s = summarise_values(&info, &raw, raw[0])?;
    let d = decimals_for(&s);
    let f = |v: f64| fmt_value(v, d);
    let cells = [
        info.label.clone(),
        if is_fixed(&s) {
            format!("{} (fixed)", f(s.median))
        } else {
            f(s.median)
        },
        format!("{} – {}", f(s.q68[0]), f(s.q68[1])),
        format!("{} – {}", f(s.q95[0]), f(s.q95[1])),
        info.unit.clone(),
    ];
    let mut range = padded_range(&values, 0.05);
    let mut summary = s;
    // A narrow posterior far from zero (e.g. a time of periastron in JD)
    // gets its ticks relative to a round offset named on the axis, so tick
    // labels stay short enough not to collide.
    let span = range.1 - range.0;
    let mut axis_label = info.axis_label();
    if span > 0.0 && summary.median.abs() > 1000.0 * span {
        let step = 10f64.powf(span.log10().floor());
        let offset = (summary.median / step).round() * step;
        let decimals = (-step.log10()).max(0.0) as usize;
        for v in values.iter_mut() {
            *v -= offset;
        }
        range = (range.0 - offset, range.1 - offset);
        summary.median -= offset;
        for q in [&mut summary.q68, &mut summary.q95] {
            q[0] -= offset;
            q[1] -= offset;
        }
        axis_label = if info.unit.is_empty() {
            format!("{} − {offset:.decimals$}", info.label)
        } else {
            format!("{} − {offset:.decimals$} [{}]", info.label, info.unit)
        };
    }
    Ok(Column {
        axis_label,
        values,
        range,
        summary,
        cells,
    })
}

/// The smoothed 1-D density of `values` on `BINS_1D` bin centres of
/// `range`, scaled to a peak of 1: (bin centres, heights).
fn smooth_density(values: &[f64], range: (f64, f64)) -> (Vec<f64>, Vec<f64>) {
    let (lo, hi) = range;
    let w = (hi - lo) / BINS_1D as f64;
    let mut counts = vec![0.0; BINS_1D];
    for &v in values {
        if v.is_finite() && v >= lo && v < hi {
            counts[(((v - lo) / w) as usize).min(BINS_1D - 1)] += 1.0;
        }
    }
    let radius = (3.0 * SMOOTH_1D).ceil() as isize;
    let kernel: Vec<f64> = (-radius..=radius)
        .map(|k| (-0.5 * (k as f64 / SMOOTH_1D).powi(2)).exp())
        .collect();
    let mut smooth = vec![0.0; BINS_1D];
    for (i, out) in smooth.iter_mut().enumerate() {
        for (k, wk) in kernel.iter().enumerate() {
            let j = i as isize + k as isize - radius;
            if j >= 0 && (j as usize) < BINS_1D {
                *out += wk * counts[j as usize];
            }
        }
    }
    let peak = smooth.iter().cloned().fold(0.0, f64::max);
    if peak > 0.0 {
        smooth.iter_mut().for_each(|v| *v /= peak);
    }
    let centres = (0..BINS_1D).map(|i| lo + (i as f64 + 0.5) * w).collect();
    (centres, smooth)
}

/// Height of the piecewise-linear density at `x`.
fn height_at(xs: &[f64], ys: &[f64], x: f64) -> f64 {
    if xs.is_empty() || x <= xs[0] {
        return ys.first().copied().unwrap_or(0.0);
    }
    for i in 1..xs.len() {
        if x <= xs[i] {
            let t = (x - xs[i - 1]) / (xs[i] - xs[i - 1]);
            return ys[i - 1] + t * (ys[i] - ys[i - 1]);
        }
    }
    ys[ys.len() - 1]
}

/// The area under the density between `a` and `b`, as a polygon.
fn band_under(xs: &[f64], ys: &[f64], a: f64, b: f64) -> Vec<(f64, f64)> {
    let mut pts = vec![(a, 0.0), (a, height_at(xs, ys, a))];
    pts.extend(
        xs.iter()
            .zip(ys)
            .filter(|(x, _)| **x > a && **x < b)
            .map(|(x, y)| (*x, *y)),
    );
    pts.push((b, height_at(xs, ys, b)));
    pts.push((b, 0.0));
    pts
}

const TABLE_HEADERS: [&str; 5] = ["", "median", "68 %", "95 %", ""];

impl PairFigure {
    fn grid_size(&self) -> (u32, u32) {
        let k = self.columns.len() as u32;
        (LEFT + k * self.panel, k * (self.panel + GAP) + BOTTOM)
    }

    /// Column widths of the side table in pixels (estimated from the
    /// bundled font's average advance, 0.58 em).
    fn table_columns(&self) -> [u32; 5] {
        let mut w = TABLE_HEADERS.map(|h| h.chars().count());
        for c in &self.columns {
            for (wi, cell) in w.iter_mut().zip(&c.cells) {
                *wi = (*wi).max(cell.chars().count());
            }
        }
        w.map(|n| (n as f64 * TABLE_FONT * 0.58).ceil() as u32 + 18)
    }

    fn table_width(&self) -> u32 {
        self.table_columns().iter().sum::<u32>() + 40
    }

    fn draw_table<DB: DrawingBackend>(
        &self,
        area: &DrawingArea<DB, Shift>,
    ) -> Result<(), ReportError> {
        let widths = self.table_columns();
        let line_h = (TABLE_FONT * 1.6) as i32;
        let x0 = 20;
        let mut y = 20;
        let row = |cells: [&str; 5], y: i32, style: TextStyle| -> Result<(), ReportError> {
            let mut x = x0;
            for (i, (c, w)) in cells.iter().zip(widths).enumerate() {
                // Label and unit left-aligned, numbers right-aligned.
                let (pos, at) = if i == 0 || i == 4 {
                    (Pos::new(HPos::Left, VPos::Center), x)
                } else {
                    (Pos::new(HPos::Right, VPos::Center), x + w as i32 - 10)
                };
                area.draw(&Text::new(c.to_string(), (at, y), style.pos(pos)))
                    .ctx(NAME)?;
                x += w as i32;
            }
            Ok(())
        };
        row(TABLE_HEADERS, y, font(TABLE_FONT).color(&GREY))?;
        let total: i32 = widths.iter().map(|w| *w as i32).sum();
        y += line_h / 2 + 2;
        area.draw(&PathElement::new(
            vec![(x0, y), (x0 + total, y)],
            LIGHT.stroke_width(1),
        ))
        .ctx(NAME)?;
        y += line_h / 2 + 2;
        for c in &self.columns {
            let cells = [
                c.cells[0].as_str(),
                c.cells[1].as_str(),
                c.cells[2].as_str(),
                c.cells[3].as_str(),
                c.cells[4].as_str(),
            ];
            row(cells, y, font(TABLE_FONT))?;
            y += line_h;
        }
        // Key to the shading and lines.
        y += line_h / 2;
        let key = [
            "Diagonal: smoothed posterior density;",
            "darker band 68 %, lighter band 95 % (equal-tailed),",
            "thin line at the median.",
            "Below: grey level = posterior density;",
            "lines enclose the 68 % (bold) and 95 % (thin)",
            "highest-density regions.",
        ];
        for line in key {
            area.draw(&Text::new(
                line,
                (x0, y),
                font(TABLE_FONT - 2.0)
                    .color(&GREY)
                    .pos(Pos::new(HPos::Left, VPos::Center)),
            ))
            .ctx(NAME)?;
            y += (TABLE_FONT * 1.35) as i32;
        }
        Ok(())
    }
}

const LIGHT: RGBColor = RGBColor(200, 200, 200);

impl Figure for PairFigure {
    const NAME: &'static str = NAME;

    fn size(&self) -> (u32, u32) {
        let (gw, gh) = self.grid_size();
        (LEFT_PAD + gw + self.table_w + 30, TITLE_H + gh.max(380))
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ReportError> {
        let area = root
            .titled(&self.title, font(30.0))
            .ctx(NAME)?
            .margin(0, 0, LEFT_PAD, 0);
        let (gw, _) = self.grid_size();
        let (grid_area, side) = area.split_horizontally(gw + 20);
        let k = self.columns.len();
        let (p, gap) = (self.panel as i32, GAP as i32);
        let xs: Vec<i32> = (1..k).map(|c| LEFT as i32 + c as i32 * p).collect();
        let ys: Vec<i32> = (1..k).map(|r| r as i32 * (p + gap)).collect();
        let cells = grid_area.split_by_breakpoints(&xs, &ys);
        for row in 0..k {
            for col in 0..=row {
                self.draw_panel(&cells[row * k + col], row, col)?;
            }
        }
        self.draw_table(&side)
    }
}

impl PairFigure {
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
        let x_label = if bottom_row { BOTTOM } else { 0 };
        let y_label = if left_col { LEFT } else { 0 };
        if row == col {
            let (lo, hi) = cx.range;
            let mut chart = ChartBuilder::on(cell)
                .margin_top(GAP)
                .margin_right(6)
                .x_label_area_size(x_label)
                .y_label_area_size(y_label)
                .build_cartesian_2d(lo..hi, 0.0..1.1)
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
            let (xs, ys) = smooth_density(&cx.values, cx.range);
            let s = &cx.summary;
            let clamp = |v: f64| v.clamp(lo, hi);
            for (q, shade) in [(s.q95, tint(SKY_BLUE, 0.35)), (s.q68, tint(BLUE, 0.5))] {
                chart
                    .draw_series(std::iter::once(Polygon::new(
                        band_under(&xs, &ys, clamp(q[0]), clamp(q[1])),
                        shade.filled(),
                    )))
                    .ctx(NAME)?;
            }
            let mut curve = vec![(lo, 0.0)];
            curve.extend(xs.iter().copied().zip(ys.iter().copied()));
            curve.push((hi, 0.0));
            chart
                .draw_series(std::iter::once(PathElement::new(
                    curve,
                    INK.stroke_width(2),
                )))
                .ctx(NAME)?;
            let m = clamp(s.median);
            chart
                .draw_series(std::iter::once(PathElement::new(
                    vec![(m, 0.0), (m, height_at(&xs, &ys, m))],
                    WHITE.stroke_width(2),
                )))
                .ctx(NAME)?;
            return frame(&chart);
        }

        // 2-D panel: x = column parameter, y = row parameter.
        let cy = &self.columns[row];
        let y_fmt = tick_formatter(cy.range.1 - cy.range.0, 4);
        let grid = smoothed_histogram(
            &cx.values, &cy.values, cx.range, cy.range, BINS_2D, SMOOTH_2D,
        );
        let levels = mass_levels(&grid.z, &HDR_FRACTIONS);
        let mut chart = ChartBuilder::on(cell)
            .margin_top(GAP)
            .margin_right(6)
            .x_label_area_size(x_label)
            .y_label_area_size(y_label)
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
        chart.draw_series(grey_cells(&grid)).ctx(NAME)?;
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
        frame(&chart)
    }
}

/// One rectangle per non-empty bin, grey in proportion to its density
/// (white at zero), as opaque colours so PNG and SVG agree.
fn grey_cells(grid: &Grid2) -> impl Iterator<Item = Rectangle<(f64, f64)>> + '_ {
    let peak = grid.z.iter().cloned().fold(0.0, f64::max);
    let (dx, dy) = (grid.dx(), grid.dy());
    (0..grid.ny).flat_map(move |iy| {
        (0..grid.nx).filter_map(move |ix| {
            let z = grid.at(ix, iy);
            if peak.is_nan() || peak <= 0.0 || z < 0.01 * peak {
                return None;
            }
            let shade = (255.0 * (1.0 - GREY_DEPTH * z / peak)).round() as u8;
            let (x, y) = (grid.xc(ix), grid.yc(iy));
            Some(Rectangle::new(
                [(x - 0.5 * dx, y - 0.5 * dy), (x + 0.5 * dx, y + 0.5 * dy)],
                RGBColor(shade, shade, shade).filled(),
            ))
        })
    })
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
