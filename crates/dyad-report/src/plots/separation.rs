//! Separation and position angle against time, each with the posterior's
//! 68 and 95 per cent bands, the best orbit and the measurements, and the
//! residuals (observed minus best orbit) in a panel beneath each.

use super::{
    draw_legend_where_free, draw_marker, font, render, tick_formatter, tint, widen, Figure,
    LegendGlyph, Marker, PlotFiles, PlotResultExt, BLUE, GREY, MARKERS, SKY_BLUE, VERMILLION,
};
use crate::error::ReportError;
use plotters::coord::Shift;
use plotters::prelude::*;
use std::path::Path;

const NAME: &str = "separation";

/// A posterior band over a time grid: the median and the 68 and 95 per
/// cent equal-tailed intervals of the draws at each time.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Band {
    /// Median at each grid time.
    pub median: Vec<f64>,
    /// 16th and 84th percentiles.
    pub q68: Vec<[f64; 2]>,
    /// 2.5th and 97.5th percentiles.
    pub q95: Vec<[f64; 2]>,
}

/// One measurement in separation and position angle (Cartesian ones
/// converted by the caller, errors propagated).
#[derive(Debug, Clone, PartialEq)]
pub struct PolarPoint {
    /// Epoch [yr] (the unit of the time axis).
    pub t_year: f64,
    /// Separation [mas].
    pub sep_mas: f64,
    /// Its 1-sigma error [mas].
    pub sep_err_mas: f64,
    /// Position angle [deg], on the same unwrapped branch as the curves.
    pub pa_deg: f64,
    /// Its 1-sigma error [deg].
    pub pa_err_deg: f64,
    /// Observed minus best orbit in separation [mas].
    pub sep_oc_mas: f64,
    /// Observed minus best orbit in position angle [deg].
    pub pa_oc_deg: f64,
    /// Source (instrument or technique); each gets its own marker shape.
    pub source: String,
}

/// Everything the separation and position-angle plot draws.
#[derive(Debug, Clone, Default)]
pub struct SeparationPlotInput {
    /// Title.
    pub title: String,
    /// Label of the time axis, e.g. "Epoch [Julian year]".
    pub time_label: String,
    /// Grid times [yr], increasing.
    pub times_year: Vec<f64>,
    /// Separation band [mas] on the grid.
    pub separation: Band,
    /// Position-angle band [deg] on the grid, unwrapped along time (values
    /// may leave [0, 360); the plot folds them back by whole turns).
    pub position_angle: Band,
    /// Best orbit's separation [mas] on the grid.
    pub best_separation: Vec<f64>,
    /// Best orbit's position angle [deg] on the grid (same branch).
    pub best_position_angle: Vec<f64>,
    /// Measurements.
    pub points: Vec<PolarPoint>,
}

/// Writes the plot as `<stem>.png` and `<stem>.svg`.
pub fn plot_separation_and_angle(
    stem: &Path,
    input: &SeparationPlotInput,
) -> Result<PlotFiles, ReportError> {
    let n = input.times_year.len();
    if n < 2 {
        return Err(ReportError::InvalidInput(
            "separation plot needs at least two grid times".into(),
        ));
    }
    for (what, len) in [
        ("separation median", input.separation.median.len()),
        ("separation 68 % band", input.separation.q68.len()),
        ("separation 95 % band", input.separation.q95.len()),
        ("position-angle median", input.position_angle.median.len()),
        ("position-angle 68 % band", input.position_angle.q68.len()),
        ("position-angle 95 % band", input.position_angle.q95.len()),
        ("best separation", input.best_separation.len()),
        ("best position angle", input.best_position_angle.len()),
    ] {
        if len != n {
            return Err(ReportError::InvalidInput(format!(
                "separation plot: {what} has {len} values for {n} grid times"
            )));
        }
    }
    let mut sources: Vec<String> = Vec::new();
    for p in &input.points {
        if !sources.contains(&p.source) {
            sources.push(p.source.clone());
        }
    }
    render(&SeparationFigure { input, sources }, stem)
}

struct SeparationFigure<'a> {
    input: &'a SeparationPlotInput,
    sources: Vec<String>,
}

const Y_LABEL: u32 = 100;

/// Which quantity a pair of panels shows.
#[derive(Clone, Copy)]
enum Quantity {
    Separation,
    PositionAngle,
}

impl SeparationFigure<'_> {
    fn marker_of(&self, source: &str) -> Marker {
        let i = self.sources.iter().position(|s| s == source).unwrap_or(0);
        MARKERS[i % MARKERS.len()]
    }

    fn time_range(&self) -> (f64, f64) {
        let t = &self.input.times_year;
        (t[0], t[t.len() - 1])
    }

    fn draw_pair<DB: DrawingBackend>(
        &self,
        upper: &DrawingArea<DB, Shift>,
        lower: &DrawingArea<DB, Shift>,
        quantity: Quantity,
        x_axis_below: bool,
    ) -> Result<(), ReportError> {
        let inp = self.input;
        let (band, best, unit, desc) = match quantity {
            Quantity::Separation => (
                &inp.separation,
                &inp.best_separation,
                "mas",
                "Separation ρ [mas]",
            ),
            Quantity::PositionAngle => (
                &inp.position_angle,
                &inp.best_position_angle,
                "deg",
                "Position angle θ [deg]",
            ),
        };
        let value = |p: &PolarPoint, turn: f64| match quantity {
            Quantity::Separation => (p.sep_mas, p.sep_err_mas, p.sep_oc_mas),
            Quantity::PositionAngle => (p.pa_deg - turn, p.pa_err_deg, p.pa_oc_deg),
        };
        // Position angles are drawn in [0, 360): the curves are cut where
        // the best orbit passes 0/360 and each piece is shifted by whole
        // turns (`turns`, per grid time; band edges beyond 0 or 360 are
        // held at the axis).
        let turns: Vec<f64> = match quantity {
            Quantity::PositionAngle => best.iter().map(|v| 360.0 * (v / 360.0).floor()).collect(),
            Quantity::Separation => vec![0.0; best.len()],
        };
        let mut runs: Vec<(usize, usize)> = Vec::new();
        let mut start = 0;
        for k in 1..=turns.len() {
            if k == turns.len() || turns[k] != turns[start] {
                runs.push((start, k - 1));
                start = k;
            }
        }
        let wrapped = matches!(quantity, Quantity::PositionAngle);
        let (t0, t1) = self.time_range();
        let turn_at = |t: f64| {
            let dt = inp.times_year[1] - inp.times_year[0];
            let k = ((t - t0) / dt).round().clamp(0.0, (turns.len() - 1) as f64) as usize;
            turns[k]
        };
        let mut lo = f64::INFINITY;
        let mut hi = f64::NEG_INFINITY;
        for q in &band.q95 {
            lo = lo.min(q[0]);
            hi = hi.max(q[1]);
        }
        for v in best {
            lo = lo.min(*v);
            hi = hi.max(*v);
        }
        let mut res_max: f64 = 0.0;
        for p in &inp.points {
            let (v, e, r) = value(p, turn_at(p.t_year));
            lo = lo.min(v - e);
            hi = hi.max(v + e);
            res_max = res_max.max(r.abs() + e);
        }
        let (lo, hi) = if wrapped {
            (0.0, 360.0)
        } else {
            widen(lo, hi, 0.06)
        };
        let res_max = if res_max.is_finite() && res_max > 0.0 {
            1.15 * res_max
        } else {
            1.0
        };
        let fx = tick_formatter(t1 - t0, 8);
        let fy = tick_formatter(hi - lo, 6);
        let fr = tick_formatter(2.0 * res_max, 4);
        let blank = |_: &f64| String::new();

        let mut top = ChartBuilder::on(upper)
            .margin_left(20)
            .margin_right(30)
            .margin_top(10)
            .margin_bottom(4)
            .x_label_area_size(0)
            .y_label_area_size(Y_LABEL)
            .build_cartesian_2d(t0..t1, lo..hi)
            .ctx(NAME)?;
        top.configure_mesh()
            .x_labels(9)
            .y_labels(6)
            .x_label_formatter(&blank)
            .y_label_formatter(&fy)
            .label_style(font(17.0))
            .axis_desc_style(font(20.0))
            .y_desc(desc)
            .light_line_style(RGBColor(244, 244, 244))
            .bold_line_style(RGBColor(228, 228, 228))
            .axis_style(GREY)
            .draw()
            .ctx(NAME)?;
        let times = &inp.times_year;
        for (a, b) in runs.iter().copied() {
            let shift = turns[a];
            let seg = |v: &[f64]| -> Vec<(f64, f64)> {
                (a..=b).map(|k| (times[k], v[k] - shift)).collect()
            };
            for (q, shade) in [
                (&band.q95, tint(SKY_BLUE, 0.3)),
                (&band.q68, tint(SKY_BLUE, 0.6)),
            ] {
                let upper: Vec<f64> = q.iter().map(|v| v[1]).collect();
                let lower: Vec<f64> = q.iter().map(|v| v[0]).collect();
                let mut poly = seg(&upper);
                poly.extend(seg(&lower).into_iter().rev());
                top.draw_series(std::iter::once(Polygon::new(poly, shade.filled())))
                    .ctx(NAME)?;
            }
            top.draw_series(std::iter::once(PathElement::new(
                seg(&band.median),
                SKY_BLUE.stroke_width(2),
            )))
            .ctx(NAME)?;
            top.draw_series(std::iter::once(PathElement::new(
                seg(best),
                BLUE.stroke_width(2),
            )))
            .ctx(NAME)?;
        }

        let mut bottom = ChartBuilder::on(lower)
            .margin_left(20)
            .margin_right(30)
            .margin_top(2)
            .margin_bottom(if x_axis_below { 10 } else { 14 })
            .x_label_area_size(if x_axis_below { 64 } else { 0 })
            .y_label_area_size(Y_LABEL)
            .build_cartesian_2d(t0..t1, -res_max..res_max)
            .ctx(NAME)?;
        let mut mesh = bottom.configure_mesh();
        mesh.x_labels(9)
            .y_labels(3)
            .x_label_formatter(&fx)
            .y_label_formatter(&fr)
            .label_style(font(17.0))
            .axis_desc_style(font(20.0))
            .y_desc(format!("O − C [{unit}]"))
            .light_line_style(RGBColor(244, 244, 244))
            .bold_line_style(RGBColor(228, 228, 228))
            .axis_style(GREY);
        if x_axis_below {
            mesh.x_desc(inp.time_label.as_str());
        } else {
            mesh.x_label_formatter(&blank);
        }
        mesh.draw().ctx(NAME)?;
        bottom
            .draw_series(std::iter::once(PathElement::new(
                vec![(t0, 0.0), (t1, 0.0)],
                BLUE.stroke_width(2),
            )))
            .ctx(NAME)?;

        for p in &inp.points {
            let (v, e, r) = value(p, turn_at(p.t_year));
            let marker = self.marker_of(&p.source);
            for (area, y) in [(top.plotting_area(), v), (bottom.plotting_area(), r)] {
                area.draw(&PathElement::new(
                    vec![(p.t_year, y - e), (p.t_year, y + e)],
                    VERMILLION.stroke_width(2),
                ))
                .ctx(NAME)?;
                draw_marker(area, (p.t_year, y), marker, 4, VERMILLION.filled(), NAME)?;
            }
        }

        if matches!(quantity, Quantity::Separation) {
            let mut legend: Vec<(LegendGlyph, String)> = self
                .sources
                .iter()
                .map(|s| {
                    let name = if s.is_empty() { "measured" } else { s.as_str() };
                    (
                        LegendGlyph::Marker(self.marker_of(s), VERMILLION),
                        name.to_string(),
                    )
                })
                .collect();
            legend.push((LegendGlyph::Line(BLUE, 2, 1.0), "best orbit".into()));
            legend.push((
                LegendGlyph::Line(SKY_BLUE, 2, 1.0),
                "posterior median, 68 % and 95 % bands".into(),
            ));
            let plot = top.plotting_area().strip_coord_spec();
            let (px, py) = top.plotting_area().get_pixel_range();
            let mut pts = Vec::new();
            for (t, q) in times.iter().zip(&band.q95) {
                for y in [q[0], q[1], 0.5 * (q[0] + q[1])] {
                    let (x, yy) = top.backend_coord(&(*t, y));
                    pts.push((x - px.start, yy - py.start));
                }
            }
            for p in &inp.points {
                let (x, y) = top.backend_coord(&(p.t_year, p.sep_mas));
                pts.push((x - px.start, y - py.start));
            }
            draw_legend_where_free(&plot, &legend, &pts, NAME)?;
        }
        Ok(())
    }
}

impl Figure for SeparationFigure<'_> {
    const NAME: &'static str = NAME;

    fn size(&self) -> (u32, u32) {
        (1200, 1300)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ReportError> {
        let area = root.titled(&self.input.title, font(30.0)).ctx(NAME)?;
        let (_, ah) = area.dim_in_pixel();
        let ah = ah as i32;
        // Separation, its residuals, position angle, its residuals.
        let tall = (ah as f64 * 0.31) as i32;
        let short = (ah as f64 * 0.15) as i32;
        let panels =
            area.split_by_breakpoints(Vec::<i32>::new(), [tall, tall + short, 2 * tall + short]);
        self.draw_pair(&panels[0], &panels[1], Quantity::Separation, false)?;
        self.draw_pair(&panels[2], &panels[3], Quantity::PositionAngle, true)
    }
}
