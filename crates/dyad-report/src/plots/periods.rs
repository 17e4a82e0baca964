//! Period-window comparison for sparse orbits: posterior probability per
//! window, and the mass intervals each window implies, side by side.

use super::category::{category_label, CategoryAxis};
use super::{
    draw_legend, font, least_crowded_corner, legend_size, render, tick_formatter, tint, widen,
    Corner, Figure, LegendGlyph, PlotFiles, PlotResultExt, BLUE, GREY, INK, SERIES,
};
use crate::error::ReportError;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::path::Path;

const NAME: &str = "periods";

/// Median and 68/95 per cent intervals of one mass within a window [M☉].
#[derive(Debug, Clone, PartialEq)]
pub struct MassInterval {
    /// Label, e.g. "M₁ + M₂".
    pub name: String,
    /// Median.
    pub median: f64,
    /// 68 % interval, lower end.
    pub lo68: f64,
    /// 68 % interval, upper end.
    pub hi68: f64,
    /// 95 % interval, lower end.
    pub lo95: f64,
    /// 95 % interval, upper end.
    pub hi95: f64,
}

/// One period window's evidence, probability and masses.
#[derive(Debug, Clone, PartialEq)]
pub struct WindowSummary {
    /// Short label, e.g. "A" or "alias 1".
    pub label: String,
    /// Lower edge of the window \[d\].
    pub p_lo_days: f64,
    /// Upper edge of the window \[d\].
    pub p_hi_days: f64,
    /// Posterior probability of the window (the windows' sum to 1).
    pub probability: f64,
    /// Its uncertainty (1 sigma).
    pub probability_err: f64,
    /// ln evidence of the window.
    pub ln_z: f64,
    /// Its uncertainty.
    pub ln_z_err: f64,
    /// Mass intervals in this window (may be empty).
    pub masses: Vec<MassInterval>,
}

struct PeriodFigure<'a> {
    title: &'a str,
    windows: &'a [WindowSummary],
    labels: Vec<String>,
    mass_names: Vec<String>,
}

/// Writes the period-window comparison as `<stem>.png` and `<stem>.svg`.
pub fn plot_period_windows(
    stem: &Path,
    title: &str,
    windows: &[WindowSummary],
) -> Result<PlotFiles, ReportError> {
    if windows.is_empty() {
        return Err(ReportError::InvalidInput(
            "period plot needs at least one window".into(),
        ));
    }
    for w in windows {
        if !(w.probability.is_finite() && w.p_lo_days.is_finite() && w.p_hi_days.is_finite()) {
            return Err(ReportError::InvalidInput(format!(
                "period plot: window {} has non-finite values",
                w.label
            )));
        }
    }
    let labels = windows.iter().map(|w| w.label.clone()).collect();
    let mut mass_names: Vec<String> = Vec::new();
    for w in windows {
        for m in &w.masses {
            if !mass_names.contains(&m.name) {
                mass_names.push(m.name.clone());
            }
        }
    }
    render(
        &PeriodFigure {
            title,
            windows,
            labels,
            mass_names,
        },
        stem,
    )
}

/// Period formatted with about four significant digits.
fn fmt_days(p: f64) -> String {
    let d = (3 - p.abs().max(1e-9).log10().floor() as i64).clamp(0, 6) as usize;
    format!("{p:.d$}")
}

impl Figure for PeriodFigure<'_> {
    const NAME: &'static str = NAME;

    fn size(&self) -> (u32, u32) {
        let n = self.windows.len() as u32;
        ((2 * (160 * n).max(420) + 260).min(3000), 760)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ReportError> {
        let area = root.titled(self.title, font(30.0)).ctx(NAME)?;
        let (aw, _) = area.dim_in_pixel();
        let (left, right) = area.split_horizontally((aw as f64 * 0.5) as i32);
        let n = self.windows.len();
        let cat_fmt = |v: &f64| category_label(&self.labels, *v);

        // Left: probability per window with error bars.
        let y_top = 1.32;
        let mut chart = ChartBuilder::on(&left)
            .margin(20)
            .x_label_area_size(70)
            .y_label_area_size(80)
            .build_cartesian_2d(CategoryAxis { n }, 0.0..y_top)
            .ctx(NAME)?;
        let prob_fmt = |v: &f64| {
            if *v <= 1.0 + 1e-9 {
                format!("{v:.1}")
            } else {
                String::new()
            }
        };
        chart
            .configure_mesh()
            .disable_x_mesh()
            .x_label_formatter(&cat_fmt)
            .y_labels(14)
            .y_label_formatter(&prob_fmt)
            .label_style(font(17.0))
            .axis_desc_style(font(20.0))
            .x_desc("Period window")
            .y_desc("Posterior probability")
            .light_line_style(RGBColor(245, 245, 245))
            .bold_line_style(RGBColor(230, 230, 230))
            .axis_style(GREY)
            .draw()
            .ctx(NAME)?;
        // The strip above probability 1 holds a small table: no grid there.
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(-0.5, 1.0), (n as f64 - 0.5, y_top)],
                WHITE.filled(),
            )))
            .ctx(NAME)?;
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(-0.5, 1.0), (n as f64 - 0.5, 1.0)],
                GREY.stroke_width(1),
            )))
            .ctx(NAME)?;
        for (i, w) in self.windows.iter().enumerate() {
            let x = i as f64;
            let p = w.probability.clamp(0.0, 1.0);
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(x - 0.32, 0.0), (x + 0.32, p)],
                    tint(BLUE, 0.65).filled(),
                )))
                .ctx(NAME)?;
            let e = w.probability_err.abs();
            if e.is_finite() && e > 0.0 {
                let (a, b) = ((p - e).max(0.0), (p + e).min(1.0));
                let pa = chart.plotting_area();
                pa.draw(&PathElement::new(vec![(x, a), (x, b)], INK.stroke_width(2)))
                    .ctx(NAME)?;
                for y in [a, b] {
                    pa.draw(
                        &(EmptyElement::at((x, y))
                            + PathElement::new(vec![(-8, 0), (8, 0)], INK.stroke_width(2))),
                    )
                    .ctx(NAME)?;
                }
            }
            // A small table above the bars.
            let lines = [
                (
                    format!("{}–{} d", fmt_days(w.p_lo_days), fmt_days(w.p_hi_days)),
                    1.27,
                ),
                (
                    format!("p = {:.3} ± {:.3}", w.probability, w.probability_err),
                    1.19,
                ),
                (format!("ln Z = {:.2} ± {:.2}", w.ln_z, w.ln_z_err), 1.11),
            ];
            for (text, y) in lines {
                chart
                    .plotting_area()
                    .draw(&Text::new(
                        text,
                        (x, y),
                        font(15.0).pos(Pos::new(HPos::Center, VPos::Center)),
                    ))
                    .ctx(NAME)?;
            }
        }

        // Right: mass intervals per window.
        let mut lo = f64::INFINITY;
        let mut hi = f64::NEG_INFINITY;
        for m in self.windows.iter().flat_map(|w| &w.masses) {
            for v in [m.lo95, m.hi95, m.median] {
                if v.is_finite() {
                    lo = lo.min(v);
                    hi = hi.max(v);
                }
            }
        }
        if !lo.is_finite() {
            lo = 0.0;
            hi = 1.0;
        }
        let (lo, hi) = widen(lo, hi, 0.08);
        let fy = tick_formatter(hi - lo, 6);
        let mut chart = ChartBuilder::on(&right)
            .margin(20)
            .x_label_area_size(70)
            .y_label_area_size(90)
            .build_cartesian_2d(CategoryAxis { n }, lo..hi)
            .ctx(NAME)?;
        chart
            .configure_mesh()
            .disable_x_mesh()
            .x_label_formatter(&cat_fmt)
            .y_labels(7)
            .y_label_formatter(&fy)
            .label_style(font(17.0))
            .axis_desc_style(font(20.0))
            .x_desc("Period window")
            .y_desc("Mass [M☉]  (median, 68 % and 95 %)")
            .light_line_style(RGBColor(245, 245, 245))
            .bold_line_style(RGBColor(230, 230, 230))
            .axis_style(GREY)
            .draw()
            .ctx(NAME)?;
        let k = self.mass_names.len().max(1);
        let spread = 0.6;
        for (i, w) in self.windows.iter().enumerate() {
            for m in &w.masses {
                let j = self
                    .mass_names
                    .iter()
                    .position(|s| s == &m.name)
                    .unwrap_or(0);
                let x = i as f64 - 0.5 * spread + spread * (j as f64 + 0.5) / k as f64;
                let c = SERIES[j % SERIES.len()];
                let pa = chart.plotting_area();
                pa.draw(&PathElement::new(
                    vec![(x, m.lo95), (x, m.hi95)],
                    c.stroke_width(2),
                ))
                .ctx(NAME)?;
                pa.draw(&PathElement::new(
                    vec![(x, m.lo68), (x, m.hi68)],
                    c.stroke_width(8),
                ))
                .ctx(NAME)?;
                pa.draw(&Circle::new((x, m.median), 6, WHITE.filled()))
                    .ctx(NAME)?;
                pa.draw(&Circle::new((x, m.median), 6, INK.stroke_width(2)))
                    .ctx(NAME)?;
            }
        }
        let legend: Vec<(LegendGlyph, String)> = self
            .mass_names
            .iter()
            .enumerate()
            .map(|(j, name)| {
                (
                    LegendGlyph::Line(SERIES[j % SERIES.len()], 6, 1.0),
                    name.clone(),
                )
            })
            .collect();
        let plot = chart.plotting_area().strip_coord_spec();
        let (px, py) = chart.plotting_area().get_pixel_range();
        let mut pts = Vec::new();
        for (i, w) in self.windows.iter().enumerate() {
            for m in &w.masses {
                let j = self
                    .mass_names
                    .iter()
                    .position(|s| s == &m.name)
                    .unwrap_or(0);
                let x = i as f64 - 0.5 * spread + spread * (j as f64 + 0.5) / k as f64;
                for t in 0..=20 {
                    let y = m.lo95 + (m.hi95 - m.lo95) * t as f64 / 20.0;
                    let (a, b) = chart.backend_coord(&(x, y));
                    pts.push((a - px.start, b - py.start));
                }
            }
        }
        let box_size = legend_size(&plot, &legend, 16.0, NAME)?;
        let (pw, ph) = plot.dim_in_pixel();
        let corner = least_crowded_corner(
            &pts,
            box_size,
            (pw as i32, ph as i32),
            8,
            &[
                Corner::TopLeft,
                Corner::TopRight,
                Corner::BottomRight,
                Corner::BottomLeft,
            ],
        );
        draw_legend(&plot, &legend, corner, 8, 16.0, NAME)?;
        Ok(())
    }
}
