//! The ephemeris: predicted quantities (separation, position angle, the
//! stars' velocities) against time, one panel per quantity stacked on a
//! shared time axis, each period mode in its own colour with its median
//! line and shaded 68 and 95 per cent bands; the legend gives every mode's
//! period and weight.

use super::{
    draw_legend_where_free, font, render, tick_formatter, widen, Band, Figure, LegendGlyph,
    PlotFiles, PlotResultExt, GREY, SERIES,
};
use crate::error::ReportError;
use plotters::coord::Shift;
use plotters::prelude::*;
use std::path::Path;

const NAME: &str = "ephemeris";

/// One predicted quantity: its axis label and one band per mode.
#[derive(Debug, Clone, Default)]
pub struct EphemerisPanel {
    /// Axis label, e.g. "Separation ρ [mas]".
    pub axis_label: String,
    /// Whether the quantity is an angle in degrees (drawn on [0, 360) when
    /// a band wraps, on the bands' range otherwise).
    pub angle: bool,
    /// Per mode, the band on the time grid (medians of an angle in
    /// [0, 360), interval ends possibly outside).
    pub modes: Vec<Band>,
}

/// Everything the ephemeris plot draws.
#[derive(Debug, Clone, Default)]
pub struct EphemerisPlotInput {
    /// Title.
    pub title: String,
    /// Label of the time axis, e.g. "Epoch [Julian year]".
    pub time_label: String,
    /// Grid times in the unit of the time axis, increasing.
    pub times: Vec<f64>,
    /// Legend text of each mode (its period and weight).
    pub mode_labels: Vec<String>,
    /// The panels, top to bottom.
    pub panels: Vec<EphemerisPanel>,
}

/// Writes the ephemeris as `<stem>.png` and `<stem>.svg`.
pub fn plot_ephemeris(stem: &Path, input: &EphemerisPlotInput) -> Result<PlotFiles, ReportError> {
    let n = input.times.len();
    if n < 2 || !input.times.windows(2).all(|w| w[0] < w[1]) {
        return Err(ReportError::InvalidInput(
            "ephemeris plot needs at least two increasing epochs".into(),
        ));
    }
    if input.panels.is_empty() {
        return Err(ReportError::InvalidInput(
            "ephemeris plot: no quantity to draw".into(),
        ));
    }
    for p in &input.panels {
        if p.modes.len() != input.mode_labels.len() {
            return Err(ReportError::InvalidInput(format!(
                "ephemeris plot: {} has {} modes, the legend {}",
                p.axis_label,
                p.modes.len(),
                input.mode_labels.len()
            )));
        }
        for b in &p.modes {
            if b.median.len() != n || b.q68.len() != n || b.q95.len() != n {
                return Err(ReportError::InvalidInput(format!(
                    "ephemeris plot: a band of {} does not have {n} epochs",
                    p.axis_label
                )));
            }
        }
    }
    render(&EphemerisFigure { input }, stem)
}

struct EphemerisFigure<'a> {
    input: &'a EphemerisPlotInput,
}

/// Index ranges of the grid over which an angle's median moves by less than
/// half a turn from one epoch to the next (it wraps between them).
fn unwrapped_runs(median: &[f64], angle: bool) -> Vec<(usize, usize)> {
    let mut runs = Vec::new();
    let mut start = 0;
    for k in 1..=median.len() {
        if k == median.len() || (angle && (median[k] - median[k - 1]).abs() > 180.0) {
            runs.push((start, k - 1));
            start = k;
        }
    }
    runs
}

/// Maximal index ranges within `a..=b` where `crosses` holds, each widened
/// by one epoch on either side (within `a..=b`) so that a shifted band
/// tapers into the axis instead of stopping short.
fn crossings(a: usize, b: usize, crosses: impl Fn(usize) -> bool) -> Vec<(usize, usize)> {
    let mut out = Vec::new();
    let mut k = a;
    while k <= b {
        if crosses(k) {
            let start = k;
            while k < b && crosses(k + 1) {
                k += 1;
            }
            out.push((start.saturating_sub(1).max(a), (k + 1).min(b)));
        }
        k += 1;
    }
    out
}

impl EphemerisFigure<'_> {
    fn colour(mode: usize) -> RGBColor {
        SERIES[mode % SERIES.len()]
    }

    fn draw_panel<DB: DrawingBackend>(
        &self,
        area: &DrawingArea<DB, Shift>,
        panel: &EphemerisPanel,
        first: bool,
        last: bool,
    ) -> Result<(), ReportError> {
        let inp = self.input;
        let times = &inp.times;
        let (t0, t1) = (times[0], times[times.len() - 1]);
        let mut lo = f64::INFINITY;
        let mut hi = f64::NEG_INFINITY;
        for q in panel.modes.iter().flat_map(|b| &b.q95) {
            lo = lo.min(q[0]);
            hi = hi.max(q[1]);
        }
        // An angle is drawn on the whole turn unless no band wraps, in
        // which case it gets the bands' own range, as other quantities do.
        let wraps = panel.angle
            && (lo < 0.0
                || hi > 360.0
                || panel
                    .modes
                    .iter()
                    .any(|b| unwrapped_runs(&b.median, true).len() > 1));
        let (lo, hi) = if wraps {
            (0.0, 360.0)
        } else if panel.angle {
            let (lo, hi) = widen(lo, hi, 0.08);
            (lo.max(0.0), hi.min(360.0))
        } else {
            widen(lo, hi, 0.08)
        };
        let fx = tick_formatter(t1 - t0, 8);
        let fy = tick_formatter(hi - lo, 6);
        let blank = |_: &f64| String::new();
        let mut chart = ChartBuilder::on(area)
            .margin_left(20)
            .margin_right(30)
            .margin_top(if first { 10 } else { 4 })
            .margin_bottom(if last { 10 } else { 4 })
            .x_label_area_size(if last { 64 } else { 0 })
            .y_label_area_size(100)
            .build_cartesian_2d(t0..t1, lo..hi)
            .ctx(NAME)?;
        let mut mesh = chart.configure_mesh();
        mesh.x_labels(9)
            .y_labels(if wraps { 5 } else { 6 })
            .y_label_formatter(&fy)
            .label_style(font(17.0))
            .axis_desc_style(font(20.0))
            .y_desc(panel.axis_label.as_str())
            .light_line_style(RGBColor(244, 244, 244))
            .bold_line_style(RGBColor(228, 228, 228))
            .axis_style(GREY);
        if last {
            mesh.x_label_formatter(&fx).x_desc(inp.time_label.as_str());
        } else {
            mesh.x_label_formatter(&blank);
        }
        mesh.draw().ctx(NAME)?;

        // Angles: each run of the median is drawn where it lies and, over
        // the stretches where a band crosses 0 or 360, once more a turn
        // away, every vertex held inside the axis.
        let clamp = |v: f64| v.clamp(lo, hi);
        for (m, band) in panel.modes.iter().enumerate() {
            let c = Self::colour(m);
            for (a, b) in unwrapped_runs(&band.median, panel.angle) {
                for (q, opacity) in [(&band.q95, 0.16), (&band.q68, 0.32)] {
                    let mut pieces = vec![(a, b, 0.0)];
                    if panel.angle {
                        for (c0, c1) in crossings(a, b, |k| q[k][1] > 360.0) {
                            pieces.push((c0, c1, -360.0));
                        }
                        for (c0, c1) in crossings(a, b, |k| q[k][0] < 0.0) {
                            pieces.push((c0, c1, 360.0));
                        }
                    }
                    for (c0, c1, shift) in pieces {
                        let edge = |side: usize| {
                            (c0..=c1).map(move |k| (times[k], clamp(q[k][side] + shift)))
                        };
                        let mut poly: Vec<(f64, f64)> = edge(1).collect();
                        poly.extend(edge(0).rev());
                        chart
                            .draw_series(std::iter::once(Polygon::new(
                                poly,
                                c.mix(opacity).filled(),
                            )))
                            .ctx(NAME)?;
                    }
                }
                chart
                    .draw_series(std::iter::once(PathElement::new(
                        (a..=b)
                            .map(|k| (times[k], clamp(band.median[k])))
                            .collect::<Vec<_>>(),
                        c.stroke_width(2),
                    )))
                    .ctx(NAME)?;
            }
        }

        if first {
            let mut legend: Vec<(LegendGlyph, String)> = inp
                .mode_labels
                .iter()
                .enumerate()
                .map(|(m, label)| (LegendGlyph::Line(Self::colour(m), 6, 0.6), label.clone()))
                .collect();
            legend.push((
                LegendGlyph::Line(GREY, 2, 1.0),
                "median; shaded: 68 % and 95 % bands".into(),
            ));
            let plot = chart.plotting_area().strip_coord_spec();
            let (px, py) = chart.plotting_area().get_pixel_range();
            let mut pts = Vec::new();
            for band in &panel.modes {
                for (k, t) in times.iter().enumerate() {
                    let q = band.q95[k];
                    for y in [q[0], q[1], band.median[k]] {
                        let (x, yy) = chart.backend_coord(&(*t, clamp(y)));
                        pts.push((x - px.start, yy - py.start));
                    }
                }
            }
            draw_legend_where_free(&plot, &legend, &pts, NAME)?;
        }
        Ok(())
    }
}

impl Figure for EphemerisFigure<'_> {
    const NAME: &'static str = NAME;

    fn size(&self) -> (u32, u32) {
        (1200, 160 + 340 * self.input.panels.len() as u32)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ReportError> {
        let area = root.titled(&self.input.title, font(30.0)).ctx(NAME)?;
        let (_, ah) = area.dim_in_pixel();
        let n = self.input.panels.len();
        // Equal panels, the last one taller by its time axis.
        let axis = 70;
        let each = (ah as i32 - axis) / n as i32;
        let breaks: Vec<i32> = (1..n as i32).map(|k| k * each).collect();
        let areas = area.split_by_breakpoints(Vec::<i32>::new(), breaks);
        for (k, (panel, a)) in self.input.panels.iter().zip(&areas).enumerate() {
            self.draw_panel(a, panel, k == 0, k + 1 == n)?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn angle_runs_break_where_the_median_wraps() {
        let m = [350.0, 355.0, 359.0, 3.0, 8.0];
        assert_eq!(unwrapped_runs(&m, true), [(0, 2), (3, 4)]);
        assert_eq!(unwrapped_runs(&m, false), [(0, 4)]);
    }

    #[test]
    fn crossings_are_the_stretches_over_the_edge_widened_by_one() {
        let over = [false, true, true, false, false, true];
        assert_eq!(crossings(0, 5, |k| over[k]), [(0, 3), (4, 5)]);
        assert_eq!(crossings(1, 4, |k| over[k]), [(1, 3)]);
        assert!(crossings(3, 4, |k| over[k]).is_empty());
    }
}
