//! Radial-velocity curves folded on the period, with residuals.

use super::{
    draw_legend_where_free, draw_marker, font, render, tick_formatter, widen, Figure, LegendGlyph,
    Marker, PlotFiles, PlotResultExt, BLUE, GREY, INK, MARKERS, VERMILLION,
};
use crate::error::ReportError;
use plotters::coord::Shift;
use plotters::prelude::*;
use std::path::Path;

const NAME: &str = "velocity";

/// Which star a velocity belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Star {
    /// The primary (brighter) star.
    Primary,
    /// The secondary star.
    Secondary,
}

/// One measured radial velocity, with the instrument offset already removed.
#[derive(Debug, Clone, PartialEq)]
pub struct VelocityPoint {
    /// Time \[JD\].
    pub t_jd: f64,
    /// Velocity minus the instrument offset [km/s].
    pub rv_kms: f64,
    /// Error bar [km/s] (the binary decides whether jitter is included).
    pub err_kms: f64,
    /// Observed minus model at `t_jd` [km/s].
    pub residual_kms: f64,
    /// Which star.
    pub star: Star,
    /// Instrument name; each gets its own marker shape.
    pub instrument: String,
}

/// Everything the velocity plot draws.
#[derive(Debug, Clone, Default)]
pub struct VelocityPlotInput {
    /// Title.
    pub title: String,
    /// Period used for folding \[d\].
    pub period_days: f64,
    /// Time of periastron \[JD\]; phase 0.
    pub t_peri_jd: f64,
    /// Measurements.
    pub points: Vec<VelocityPoint>,
    /// Model curve of the primary: (phase in [0, 1], velocity [km/s]).
    pub model_primary: Vec<(f64, f64)>,
    /// Model curve of the secondary (empty if not observed).
    pub model_secondary: Vec<(f64, f64)>,
}

/// Phase in [0, 1) of `t` for period `p` and periastron `t0`.
pub(crate) fn phase_of(t: f64, t0: f64, p: f64) -> f64 {
    ((t - t0) / p).rem_euclid(1.0)
}

struct VelocityFigure<'a> {
    input: &'a VelocityPlotInput,
    instruments: Vec<String>,
}

/// Writes the folded velocity curves as `<stem>.png` and `<stem>.svg`.
pub fn plot_velocity_curves(
    stem: &Path,
    input: &VelocityPlotInput,
) -> Result<PlotFiles, ReportError> {
    if !(input.period_days.is_finite() && input.period_days > 0.0) {
        return Err(ReportError::InvalidInput(format!(
            "velocity plot: period {} d",
            input.period_days
        )));
    }
    if input.points.is_empty() && input.model_primary.is_empty() {
        return Err(ReportError::InvalidInput(
            "velocity plot needs measurements or a model curve".into(),
        ));
    }
    let mut instruments: Vec<String> = Vec::new();
    for p in &input.points {
        if !instruments.contains(&p.instrument) {
            instruments.push(p.instrument.clone());
        }
    }
    render(&VelocityFigure { input, instruments }, stem)
}

const Y_LABEL: u32 = 100;

fn star_colour(s: Star) -> RGBColor {
    match s {
        Star::Primary => BLUE,
        Star::Secondary => VERMILLION,
    }
}

impl VelocityFigure<'_> {
    fn marker_of(&self, instrument: &str) -> Marker {
        let i = self
            .instruments
            .iter()
            .position(|s| s == instrument)
            .unwrap_or(0);
        MARKERS[i % MARKERS.len()]
    }
}

impl Figure for VelocityFigure<'_> {
    const NAME: &'static str = NAME;

    fn size(&self) -> (u32, u32) {
        (1200, 900)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ReportError> {
        let inp = self.input;
        let area = root.titled(&inp.title, font(30.0)).ctx(NAME)?;
        let (_, ah) = area.dim_in_pixel();
        let (upper, lower) = area.split_vertically((ah as f64 * 0.68) as i32);
        let phase = |t: f64| phase_of(t, inp.t_peri_jd, inp.period_days);

        // Velocity range from points (with error bars) and model curves.
        let mut lo = f64::INFINITY;
        let mut hi = f64::NEG_INFINITY;
        for p in &inp.points {
            lo = lo.min(p.rv_kms - p.err_kms.abs());
            hi = hi.max(p.rv_kms + p.err_kms.abs());
        }
        for &(_, v) in inp.model_primary.iter().chain(&inp.model_secondary) {
            lo = lo.min(v);
            hi = hi.max(v);
        }
        let (lo, hi) = widen(lo, hi, 0.08);
        let res_max = inp
            .points
            .iter()
            .map(|p| p.residual_kms.abs() + p.err_kms.abs())
            .filter(|v| v.is_finite())
            .fold(0.0, f64::max);
        let res_max = if res_max > 0.0 { 1.15 * res_max } else { 1.0 };

        let fy = tick_formatter(hi - lo, 6);
        let fr = tick_formatter(2.0 * res_max, 4);
        let fx = tick_formatter(1.0, 5);
        let blank = |_: &f64| String::new();

        let mut top = ChartBuilder::on(&upper)
            .margin_left(20)
            .margin_right(30)
            .margin_top(10)
            .margin_bottom(6)
            .x_label_area_size(0)
            .y_label_area_size(Y_LABEL)
            .build_cartesian_2d(0.0..1.0, lo..hi)
            .ctx(NAME)?;
        top.configure_mesh()
            .x_labels(11)
            .y_labels(7)
            .x_label_formatter(&blank)
            .y_label_formatter(&fy)
            .label_style(font(18.0))
            .axis_desc_style(font(22.0))
            .y_desc("Radial velocity [km/s]")
            .light_line_style(RGBColor(242, 242, 242))
            .bold_line_style(RGBColor(225, 225, 225))
            .axis_style(GREY)
            .draw()
            .ctx(NAME)?;

        let mut bottom = ChartBuilder::on(&lower)
            .margin_left(20)
            .margin_right(30)
            .margin_top(4)
            .margin_bottom(10)
            .x_label_area_size(70)
            .y_label_area_size(Y_LABEL)
            .build_cartesian_2d(0.0..1.0, -res_max..res_max)
            .ctx(NAME)?;
        bottom
            .configure_mesh()
            .x_labels(11)
            .y_labels(5)
            .x_label_formatter(&fx)
            .y_label_formatter(&fr)
            .label_style(font(18.0))
            .axis_desc_style(font(22.0))
            .x_desc("Orbital phase (0 = periastron)")
            .y_desc("O − C [km/s]")
            .light_line_style(RGBColor(242, 242, 242))
            .bold_line_style(RGBColor(225, 225, 225))
            .axis_style(GREY)
            .draw()
            .ctx(NAME)?;
        bottom
            .draw_series(std::iter::once(PathElement::new(
                vec![(0.0, 0.0), (1.0, 0.0)],
                INK.stroke_width(2),
            )))
            .ctx(NAME)?;

        // Model curves, sorted by phase.
        for (curve, star) in [
            (&inp.model_primary, Star::Primary),
            (&inp.model_secondary, Star::Secondary),
        ] {
            if curve.is_empty() {
                continue;
            }
            let mut c: Vec<(f64, f64)> = curve.clone();
            c.sort_by(|a, b| a.0.total_cmp(&b.0));
            top.draw_series(std::iter::once(PathElement::new(
                c,
                star_colour(star).stroke_width(3),
            )))
            .ctx(NAME)?;
        }

        // Points with error bars, in both panels.
        for p in &inp.points {
            let x = phase(p.t_jd);
            let colour = star_colour(p.star);
            let marker = self.marker_of(&p.instrument);
            for (chart_area, y) in [
                (top.plotting_area(), p.rv_kms),
                (bottom.plotting_area(), p.residual_kms),
            ] {
                let e = p.err_kms.abs();
                chart_area
                    .draw(&PathElement::new(
                        vec![(x, y - e), (x, y + e)],
                        colour.mix(0.8).stroke_width(2),
                    ))
                    .ctx(NAME)?;
                for yy in [y - e, y + e] {
                    chart_area
                        .draw(
                            &(EmptyElement::at((x, yy))
                                + PathElement::new(vec![(-4, 0), (4, 0)], colour.stroke_width(2))),
                        )
                        .ctx(NAME)?;
                }
                draw_marker(chart_area, (x, y), marker, 5, colour.filled(), NAME)?;
            }
        }

        // Legend: one entry per (star, instrument) seen, then the models.
        let mut legend: Vec<(LegendGlyph, String)> = Vec::new();
        for star in [Star::Primary, Star::Secondary] {
            for inst in &self.instruments {
                if inp
                    .points
                    .iter()
                    .any(|p| p.star == star && &p.instrument == inst)
                {
                    let who = if star == Star::Primary {
                        "primary"
                    } else {
                        "secondary"
                    };
                    legend.push((
                        LegendGlyph::Marker(self.marker_of(inst), star_colour(star)),
                        format!("{who}, {inst}"),
                    ));
                }
            }
        }
        if !inp.model_primary.is_empty() {
            legend.push((LegendGlyph::Line(BLUE, 3, 1.0), "model, primary".into()));
        }
        if !inp.model_secondary.is_empty() {
            legend.push((
                LegendGlyph::Line(VERMILLION, 3, 1.0),
                "model, secondary".into(),
            ));
        }
        let plot = top.plotting_area().strip_coord_spec();
        let (px, py) = top.plotting_area().get_pixel_range();
        let mut pts = Vec::new();
        for p in &inp.points {
            let (x, y) = top.backend_coord(&(phase(p.t_jd), p.rv_kms));
            pts.push((x - px.start, y - py.start));
        }
        for &(ph, v) in inp.model_primary.iter().chain(&inp.model_secondary) {
            let (x, y) = top.backend_coord(&(ph, v));
            pts.push((x - px.start, y - py.start));
        }
        draw_legend_where_free(&plot, &legend, &pts, NAME)?;
        Ok(())
    }
}
