//! Posterior distributions of masses (or any scalar quantities), one
//! histogram panel each, with the median and the 68 and 95 per cent
//! intervals shaded and written on the panel.

use super::{
    font, padded_range, render, tick_formatter, tint, Figure, PlotFiles, PlotResultExt, BLUE, GREY,
    INK, SKY_BLUE,
};
use crate::error::ReportError;
use crate::input::ParameterInfo;
use crate::stats::summarise_values;
use crate::summary::{decimals_for, fmt_value};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::path::Path;

const NAME: &str = "masses";
const BINS: usize = 50;
/// Height of the text block above each panel [px].
const HEADER: u32 = 66;
const Y_LABEL: u32 = 80;

/// One panel: a label such as "M₁", a unit such as "M☉" (empty for the
/// mass ratio q) and the posterior draws.
#[derive(Debug, Clone, PartialEq)]
pub struct DistributionPanel {
    /// Label, e.g. "M₁", "M₁ + M₂", "q = M₂/M₁".
    pub label: String,
    /// Unit, e.g. "M☉"; empty for dimensionless numbers.
    pub unit: String,
    /// Draws.
    pub values: Vec<f64>,
}

struct MassFigure<'a> {
    title: &'a str,
    panels: &'a [DistributionPanel],
    cols: usize,
    rows: usize,
}

/// Writes the distribution panels (laid out two per row; four panels make
/// a 2 x 2 grid) as `<stem>.png` and `<stem>.svg`.
pub fn plot_mass_distributions(
    stem: &Path,
    title: &str,
    panels: &[DistributionPanel],
) -> Result<PlotFiles, ReportError> {
    if panels.is_empty() {
        return Err(ReportError::InvalidInput(
            "mass plot needs at least one panel".into(),
        ));
    }
    for p in panels {
        if !p.values.iter().any(|v| v.is_finite()) {
            return Err(ReportError::InvalidInput(format!(
                "mass plot: panel {} has no finite draws",
                p.label
            )));
        }
    }
    let cols = if panels.len() == 1 { 1 } else { 2 };
    let rows = panels.len().div_ceil(cols);
    render(
        &MassFigure {
            title,
            panels,
            cols,
            rows,
        },
        stem,
    )
}

impl Figure for MassFigure<'_> {
    const NAME: &'static str = NAME;

    fn size(&self) -> (u32, u32) {
        (600 * self.cols as u32, 60 + 430 * self.rows as u32)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ReportError> {
        let area = root.titled(self.title, font(30.0)).ctx(NAME)?;
        let cells = area.split_evenly((self.rows, self.cols));
        for (panel, cell) in self.panels.iter().zip(cells.iter()) {
            draw_panel(cell, panel)?;
        }
        Ok(())
    }
}

fn draw_panel<DB: DrawingBackend>(
    cell: &DrawingArea<DB, Shift>,
    panel: &DistributionPanel,
) -> Result<(), ReportError> {
    let info = ParameterInfo::linear(&panel.label, &panel.unit, &panel.label);
    let s = summarise_values(&info, &panel.values, f64::NAN)?;
    let (lo, hi) = padded_range(&panel.values, 0.04);
    let w = (hi - lo) / BINS as f64;
    let mut counts = vec![0.0; BINS];
    let mut n = 0.0;
    for &v in &panel.values {
        if v.is_finite() {
            n += 1.0;
            if v >= lo && v < hi {
                counts[(((v - lo) / w) as usize).min(BINS - 1)] += 1.0;
            }
        }
    }
    // Probability density: count / (n * bin width).
    let density: Vec<f64> = counts.iter().map(|c| c / (n * w)).collect();
    let peak = density.iter().cloned().fold(0.0, f64::max);
    let y_hi = if peak > 0.0 { peak * 1.08 } else { 1.0 };
    let density_unit = if panel.unit.is_empty() {
        "Probability density".to_string()
    } else {
        format!("Density [1/{}]", panel.unit)
    };
    let x_desc = if panel.unit.is_empty() {
        panel.label.clone()
    } else {
        format!("{} [{}]", panel.label, panel.unit)
    };
    let fx = tick_formatter(hi - lo, 5);
    let fy = tick_formatter(y_hi, 4);
    let mut chart = ChartBuilder::on(cell)
        .margin(18)
        .margin_top(HEADER)
        .x_label_area_size(58)
        .y_label_area_size(Y_LABEL)
        .build_cartesian_2d(lo..hi, 0.0..y_hi)
        .ctx(NAME)?;
    chart
        .configure_mesh()
        .disable_mesh()
        .x_labels(6)
        .y_labels(5)
        .x_label_formatter(&fx)
        .y_label_formatter(&fy)
        .label_style(font(16.0))
        .axis_desc_style(font(19.0))
        .x_desc(x_desc)
        .y_desc(density_unit)
        .axis_style(GREY)
        .draw()
        .ctx(NAME)?;
    // Interval bands behind the histogram.
    let clamp = |v: f64| v.clamp(lo, hi);
    for (q, shade) in [(s.q95, tint(SKY_BLUE, 0.25)), (s.q68, tint(SKY_BLUE, 0.5))] {
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(clamp(q[0]), 0.0), (clamp(q[1]), y_hi)],
                shade.filled(),
            )))
            .ctx(NAME)?;
    }
    let mut outline = Vec::with_capacity(2 * BINS + 2);
    outline.push((lo, 0.0));
    for (i, d) in density.iter().enumerate() {
        let x0 = lo + i as f64 * w;
        outline.push((x0, *d));
        outline.push((x0 + w, *d));
    }
    outline.push((hi, 0.0));
    chart
        .draw_series(std::iter::once(PathElement::new(
            outline,
            BLUE.stroke_width(2),
        )))
        .ctx(NAME)?;
    chart
        .draw_series(std::iter::once(PathElement::new(
            vec![(clamp(s.median), 0.0), (clamp(s.median), y_hi)],
            INK.stroke_width(2),
        )))
        .ctx(NAME)?;

    // Values written in the top-left of the plotting area.
    let d = decimals_for(&s);
    let f = |v: f64| fmt_value(v, d);
    let unit = if panel.unit.is_empty() {
        String::new()
    } else {
        format!(" {}", panel.unit)
    };
    let lines = [
        format!(
            "{} = {} −{} +{}{}",
            panel.label,
            f(s.median),
            f(s.minus68()),
            f(s.plus68()),
            unit
        ),
        format!(
            "68 %: [{}, {}]    95 %: [{}, {}]{}",
            f(s.q68[0]),
            f(s.q68[1]),
            f(s.q95[0]),
            f(s.q95[1]),
            unit
        ),
    ];
    let x = 18 + Y_LABEL as i32;
    for (i, line) in lines.iter().enumerate() {
        let style = if i == 0 { font(19.0) } else { font(16.0) };
        cell.draw(&Text::new(
            line.clone(),
            (x, 10 + 26 * i as i32),
            style.pos(Pos::new(HPos::Left, VPos::Top)),
        ))
        .ctx(NAME)?;
    }
    Ok(())
}
