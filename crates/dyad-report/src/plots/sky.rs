//! Sky plot of the relative orbit: North up, East left.

use super::{
    corner_origin, dashed_segment, draw_legend, draw_marker, font, least_crowded_corner,
    legend_size, render, tick_formatter, Corner, Figure, LegendGlyph, Marker, PlotFiles,
    PlotResultExt, BLUE, GREEN, GREY, INK, ORANGE, PURPLE, SKY_BLUE, VERMILLION,
};
use crate::error::ReportError;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::path::Path;

const NAME: &str = "sky";

/// One measured relative position with its covariance, in mas.
#[derive(Debug, Clone, PartialEq)]
pub struct SkyMeasurement {
    /// ΔRA* = Δα cos δ, positive to the East \[mas\].
    pub dra: f64,
    /// ΔDec, positive to the North \[mas\].
    pub ddec: f64,
    /// Covariance of (ΔRA*, ΔDec) \[mas²\]: `[[var_ra, cov], [cov, var_dec]]`.
    pub cov: [[f64; 2]; 2],
    /// Free text (epoch, source); not drawn, kept for callers' records.
    pub label: String,
    /// The model position (ΔRA*, ΔDec) \[mas\] at the same epoch, drawn
    /// as an O − C connector from the measured point.
    pub model: Option<(f64, f64)>,
}

/// The line of nodes of an orbit on the sky: the two points where the
/// orbit crosses the plane of the sky through the primary, in mas.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LineOfNodes {
    /// Ascending node (ΔRA*, ΔDec) \[mas\]: the secondary moves away from
    /// the observer there.
    pub ascending: (f64, f64),
    /// Descending node (ΔRA*, ΔDec) \[mas\].
    pub descending: (f64, f64),
    /// Whether the data tell the two apart (astrometry alone fixes the node
    /// only modulo 180 deg, and then neither end is labelled).
    pub ascending_known: bool,
}

/// A predicted position at a future epoch.
#[derive(Debug, Clone, PartialEq)]
pub struct SkyPrediction {
    /// ΔRA* \[mas\] (posterior median).
    pub dra: f64,
    /// ΔDec \[mas\].
    pub ddec: f64,
    /// Optional covariance \[mas²\] drawn as a 1-sigma ellipse.
    pub cov: Option<[[f64; 2]; 2]>,
    /// Label written beside the marker, e.g. "2027.5".
    pub label: String,
}

/// Everything the sky plot draws. Tracks are lists of (ΔRA*, ΔDec) points
/// in mas ordered in time over one period.
#[derive(Debug, Clone, Default)]
pub struct SkyPlotInput {
    /// Title.
    pub title: String,
    /// Measured positions.
    pub measurements: Vec<SkyMeasurement>,
    /// Orbit tracks of posterior draws (a few tens show the spread).
    pub tracks: Vec<Vec<(f64, f64)>>,
    /// The best (MAP) orbit's track, drawn bold, with the direction of motion.
    pub best_track: Option<Vec<(f64, f64)>>,
    /// Predicted positions.
    pub predictions: Vec<SkyPrediction>,
    /// Line of nodes of the best orbit.
    pub nodes: Option<LineOfNodes>,
    /// Periastron of the best orbit (ΔRA*, ΔDec) \[mas\].
    pub periastron: Option<(f64, f64)>,
}

struct SkyFigure<'a> {
    input: &'a SkyPlotInput,
}

/// Points of the 1-sigma ellipse of `cov` around `(x, y)`, from the
/// Cholesky factor L (cov = L Lᵀ): p = centre + L (cos t, sin t).
/// A covariance that is not positive definite falls back to its diagonal.
pub(crate) fn ellipse_points(x: f64, y: f64, cov: [[f64; 2]; 2], n: usize) -> Vec<(f64, f64)> {
    let a = cov[0][0];
    let b = 0.5 * (cov[0][1] + cov[1][0]);
    let d = cov[1][1];
    let (l11, l21, l22) = if a > 0.0 && a * d - b * b > 0.0 {
        let l11 = a.sqrt();
        let l21 = b / l11;
        (l11, l21, (d - l21 * l21).sqrt())
    } else {
        (a.abs().sqrt(), 0.0, d.abs().sqrt())
    };
    (0..=n)
        .map(|k| {
            let t = std::f64::consts::TAU * k as f64 / n as f64;
            let (s, c) = t.sin_cos();
            (x + l11 * c, y + l21 * c + l22 * s)
        })
        .collect()
}

/// Writes the sky plot as `<stem>.png` and `<stem>.svg`.
pub fn plot_sky(stem: &Path, input: &SkyPlotInput) -> Result<PlotFiles, ReportError> {
    let finite = |p: &(f64, f64)| p.0.is_finite() && p.1.is_finite();
    if input.measurements.is_empty()
        && input.tracks.iter().all(|t| t.is_empty())
        && input.best_track.iter().all(|t| t.is_empty())
    {
        return Err(ReportError::InvalidInput(
            "sky plot needs measurements or orbit tracks".into(),
        ));
    }
    if input
        .tracks
        .iter()
        .chain(input.best_track.iter())
        .any(|t| !t.iter().all(finite))
    {
        return Err(ReportError::InvalidInput(
            "sky plot: non-finite track point".into(),
        ));
    }
    render(&SkyFigure { input }, stem)
}

const W: u32 = 1000;
const H: u32 = 1060;
const MARGIN: u32 = 24;
const X_LABEL: u32 = 70;
const Y_LABEL: u32 = 90;
const LEGEND_FONT: f64 = 17.0;
const COMPASS_BOX: i32 = 110;

impl Figure for SkyFigure<'_> {
    const NAME: &'static str = NAME;

    fn size(&self) -> (u32, u32) {
        (W, H)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ReportError> {
        let inp = self.input;
        let area = root.titled(&inp.title, font(30.0)).ctx(NAME)?;
        let (aw, ah) = area.dim_in_pixel();
        let pw = aw as f64 - (Y_LABEL + 2 * MARGIN) as f64;
        let ph = ah as f64 - (X_LABEL + 2 * MARGIN) as f64;

        // Data extent in chart coordinates (x = -ΔRA*, so East is left).
        let mut xs = vec![0.0];
        let mut ys = vec![0.0];
        for m in &inp.measurements {
            for (a, b) in ellipse_points(m.dra, m.ddec, m.cov, 16) {
                xs.push(-a);
                ys.push(b);
            }
        }
        for t in inp.tracks.iter().chain(inp.best_track.iter()) {
            for &(a, b) in t {
                xs.push(-a);
                ys.push(b);
            }
        }
        for p in &inp.predictions {
            xs.push(-p.dra);
            ys.push(p.ddec);
        }
        let (x0, x1) = min_max(&xs);
        let (y0, y1) = min_max(&ys);
        // Equal scale: the same mas per pixel on both axes, 8 % padding.
        let scale = ((x1 - x0) / pw).max((y1 - y0) / ph).max(1e-9) * 1.16;
        let (cx, cy) = (0.5 * (x0 + x1), 0.5 * (y0 + y1));
        let (hx, hy) = (0.5 * scale * pw, 0.5 * scale * ph);
        let xr = (cx - hx, cx + hx);
        let yr = (cy - hy, cy + hy);

        let mut chart = ChartBuilder::on(&area)
            .margin(MARGIN)
            .x_label_area_size(X_LABEL)
            .y_label_area_size(Y_LABEL)
            .build_cartesian_2d(xr.0..xr.1, yr.0..yr.1)
            .ctx(NAME)?;
        let fx = tick_formatter(xr.1 - xr.0, 6);
        let neg_fx = |v: &f64| fx(&-v);
        let fy = tick_formatter(yr.1 - yr.0, 6);
        chart
            .configure_mesh()
            .x_labels(7)
            .y_labels(7)
            .x_label_formatter(&neg_fx)
            .y_label_formatter(&fy)
            .label_style(font(18.0))
            .axis_desc_style(font(22.0))
            .x_desc("ΔRA* [mas]   (East ←)")
            .y_desc("ΔDec [mas]   (North ↑)")
            .light_line_style(RGBColor(240, 240, 240))
            .bold_line_style(RGBColor(225, 225, 225))
            .axis_style(GREY)
            .draw()
            .ctx(NAME)?;

        let to_chart =
            |t: &[(f64, f64)]| -> Vec<(f64, f64)> { t.iter().map(|&(a, b)| (-a, b)).collect() };
        let track_style = SKY_BLUE.mix(0.35).stroke_width(1);
        for t in &inp.tracks {
            chart
                .draw_series(std::iter::once(PathElement::new(to_chart(t), track_style)))
                .ctx(NAME)?;
        }
        if let Some(best) = &inp.best_track {
            chart
                .draw_series(std::iter::once(PathElement::new(
                    to_chart(best),
                    BLUE.stroke_width(3),
                )))
                .ctx(NAME)?;
        }
        // Direction of motion along the best orbit, else the first draw's
        // (every draw shares the sense of motion the data fix).
        if let Some(arrow_track) = inp.best_track.as_ref().or(inp.tracks.first()) {
            if let Some((tail, head)) = motion_arrow(arrow_track, scale * pw) {
                let (tx, ty) = (-tail.0, tail.1);
                let (hx, hy) = (-head.0, head.1);
                let (dx, dy) = (hx - tx, hy - ty);
                let len = (dx * dx + dy * dy).sqrt();
                let (ux, uy) = (dx / len, dy / len);
                let wing = 0.3 * len;
                let left = (hx - wing * (ux + 0.5 * uy), hy - wing * (uy - 0.5 * ux));
                let right = (hx - wing * (ux - 0.5 * uy), hy - wing * (uy + 0.5 * ux));
                chart
                    .draw_series(std::iter::once(PathElement::new(
                        vec![(tx, ty), (hx - 0.8 * wing * ux, hy - 0.8 * wing * uy)],
                        INK.stroke_width(3),
                    )))
                    .ctx(NAME)?;
                chart
                    .draw_series(std::iter::once(Polygon::new(
                        vec![(hx, hy), left, right],
                        INK.filled(),
                    )))
                    .ctx(NAME)?;
            }
        }
        // Line of nodes through the primary, dashed, and the periastron.
        if let Some(nodes) = &inp.nodes {
            let (a, d) = (nodes.ascending, nodes.descending);
            let dashes = dashed_segment((-a.0, a.1), (-d.0, d.1), 24);
            chart
                .draw_series(
                    dashes
                        .into_iter()
                        .map(|s| PathElement::new(s, GREEN.stroke_width(2))),
                )
                .ctx(NAME)?;
            for (p, text) in [(a, "ascending node"), (d, "")] {
                draw_marker(
                    chart.plotting_area(),
                    (-p.0, p.1),
                    Marker::Square,
                    4,
                    GREEN.filled(),
                    NAME,
                )?;
                if nodes.ascending_known && !text.is_empty() {
                    chart
                        .plotting_area()
                        .draw(
                            &(EmptyElement::at((-p.0, p.1))
                                + Text::new(
                                    text,
                                    (8, 8),
                                    font(16.0)
                                        .color(&GREEN)
                                        .pos(Pos::new(HPos::Left, VPos::Top)),
                                )),
                        )
                        .ctx(NAME)?;
                }
            }
        }
        if let Some(p) = inp.periastron {
            chart
                .draw_series(std::iter::once(PathElement::new(
                    vec![(0.0, 0.0), (-p.0, p.1)],
                    ORANGE.stroke_width(1),
                )))
                .ctx(NAME)?;
            draw_marker(
                chart.plotting_area(),
                (-p.0, p.1),
                Marker::Triangle,
                6,
                ORANGE.filled(),
                NAME,
            )?;
            chart
                .plotting_area()
                .draw(
                    &(EmptyElement::at((-p.0, p.1))
                        + Text::new(
                            "periastron",
                            (9, -9),
                            font(16.0)
                                .color(&INK)
                                .pos(Pos::new(HPos::Left, VPos::Bottom)),
                        )),
                )
                .ctx(NAME)?;
        }
        // O − C connectors: measured point to the model at the same epoch.
        for m in &inp.measurements {
            if let Some((a, b)) = m.model {
                chart
                    .draw_series(std::iter::once(PathElement::new(
                        vec![(-m.dra, m.ddec), (-a, b)],
                        INK.stroke_width(2),
                    )))
                    .ctx(NAME)?;
            }
        }
        for m in &inp.measurements {
            let e: Vec<(f64, f64)> = ellipse_points(m.dra, m.ddec, m.cov, 48)
                .into_iter()
                .map(|(a, b)| (-a, b))
                .collect();
            chart
                .draw_series(std::iter::once(PathElement::new(
                    e,
                    VERMILLION.stroke_width(2),
                )))
                .ctx(NAME)?;
            draw_marker(
                chart.plotting_area(),
                (-m.dra, m.ddec),
                Marker::Circle,
                4,
                VERMILLION.filled(),
                NAME,
            )?;
        }
        for p in &inp.predictions {
            if let Some(cov) = p.cov {
                let e: Vec<(f64, f64)> = ellipse_points(p.dra, p.ddec, cov, 48)
                    .into_iter()
                    .map(|(a, b)| (-a, b))
                    .collect();
                chart
                    .draw_series(std::iter::once(PathElement::new(e, PURPLE.stroke_width(2))))
                    .ctx(NAME)?;
            }
            draw_marker(
                chart.plotting_area(),
                (-p.dra, p.ddec),
                Marker::Diamond,
                7,
                PURPLE.filled(),
                NAME,
            )?;
            chart
                .plotting_area()
                .draw(
                    &(EmptyElement::at((-p.dra, p.ddec))
                        + Text::new(
                            p.label.clone(),
                            (12, -12),
                            font(18.0)
                                .color(&PURPLE)
                                .pos(Pos::new(HPos::Left, VPos::Bottom)),
                        )),
                )
                .ctx(NAME)?;
        }
        // The primary: an open ring with cross-hairs at the origin.
        draw_marker(
            chart.plotting_area(),
            (0.0, 0.0),
            Marker::Primary,
            9,
            INK.filled(),
            NAME,
        )?;

        let mut legend = vec![(
            LegendGlyph::Marker(Marker::Primary, INK),
            "primary".to_string(),
        )];
        if !inp.measurements.is_empty() {
            legend.push((
                LegendGlyph::Marker(Marker::Circle, VERMILLION),
                format!("measured ({}, 1σ ellipses)", inp.measurements.len()),
            ));
        }
        if !inp.tracks.is_empty() {
            legend.push((
                LegendGlyph::Line(SKY_BLUE, 2, 0.8),
                format!("posterior orbits ({})", inp.tracks.len()),
            ));
        }
        if inp.best_track.is_some() {
            legend.push((
                LegendGlyph::Line(BLUE, 3, 1.0),
                "best orbit, with direction of motion".into(),
            ));
        }
        if inp.measurements.iter().any(|m| m.model.is_some()) {
            legend.push((
                LegendGlyph::Line(INK, 2, 1.0),
                "O − C: measured to best-orbit position".into(),
            ));
        }
        if inp.nodes.is_some() {
            legend.push((LegendGlyph::Line(GREEN, 2, 1.0), "line of nodes".into()));
        }
        if inp.periastron.is_some() {
            legend.push((
                LegendGlyph::Marker(Marker::Triangle, ORANGE),
                "periastron".into(),
            ));
        }
        if !inp.predictions.is_empty() {
            legend.push((
                LegendGlyph::Marker(Marker::Diamond, PURPLE),
                "predicted".into(),
            ));
        }
        // Put the legend where it hides the fewest drawn points.
        let (px, py) = chart.plotting_area().get_pixel_range();
        let mut pts: Vec<(i32, i32)> = Vec::new();
        let mut push = |a: f64, b: f64| {
            let (x, y) = chart.backend_coord(&(-a, b));
            pts.push((x - px.start, y - py.start));
        };
        push(0.0, 0.0);
        for t in inp.tracks.iter().chain(inp.best_track.iter()) {
            for p in t.iter().step_by(3) {
                push(p.0, p.1);
            }
        }
        for m in &inp.measurements {
            for _ in 0..20 {
                push(m.dra, m.ddec);
            }
        }
        for p in &inp.predictions {
            for _ in 0..20 {
                push(p.dra, p.ddec);
            }
        }
        let plot = chart.plotting_area().strip_coord_spec();
        let box_size = legend_size(&plot, &legend, LEGEND_FONT, NAME)?;
        let (pw, ph) = plot.dim_in_pixel();
        let corner = least_crowded_corner(
            &pts,
            box_size,
            (pw as i32, ph as i32),
            10,
            &[
                Corner::BottomLeft,
                Corner::BottomRight,
                Corner::TopLeft,
                Corner::TopRight,
            ],
        );
        draw_legend(&plot, &legend, corner, 10, LEGEND_FONT, NAME)?;
        // Compass (pixel space) in the least crowded of the other corners.
        let compass_corner = least_crowded_corner(
            &pts,
            (COMPASS_BOX, COMPASS_BOX),
            (pw as i32, ph as i32),
            10,
            &[
                Corner::TopRight,
                Corner::TopLeft,
                Corner::BottomRight,
                Corner::BottomLeft,
            ]
            .into_iter()
            .filter(|c| *c != corner)
            .collect::<Vec<_>>(),
        );
        let (bx, by) = corner_origin(
            compass_corner,
            (COMPASS_BOX, COMPASS_BOX),
            (pw as i32, ph as i32),
            10,
        );
        let (ox, oy, len) = (bx + COMPASS_BOX - 25, by + COMPASS_BOX - 20, 60);
        for (tip, label, lpos) in [
            ((ox, oy - len), "N", Pos::new(HPos::Center, VPos::Bottom)),
            ((ox - len, oy), "E", Pos::new(HPos::Right, VPos::Center)),
        ] {
            plot.draw(&PathElement::new(vec![(ox, oy), tip], INK.stroke_width(2)))
                .ctx(NAME)?;
            let (dx, dy) = ((tip.0 - ox).signum(), (tip.1 - oy).signum());
            let head = vec![
                tip,
                (tip.0 - 10 * dx + 5 * dy, tip.1 - 10 * dy + 5 * dx),
                (tip.0 - 10 * dx - 5 * dy, tip.1 - 10 * dy - 5 * dx),
            ];
            plot.draw(&Polygon::new(head, INK.filled())).ctx(NAME)?;
            let lp = (tip.0 + 6 * dx, tip.1 + 6 * dy);
            plot.draw(&Text::new(label, lp, font(22.0).pos(lpos)))
                .ctx(NAME)?;
        }

        Ok(())
    }
}

fn min_max(v: &[f64]) -> (f64, f64) {
    v.iter()
        .filter(|x| x.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &x| {
            (lo.min(x), hi.max(x))
        })
}

/// Tail and head (in ΔRA*, ΔDec) of a short arrow along the track at the
/// point farthest from the primary, pointing in the direction of motion
/// (the track's time order), offset outward so it does not hide the track.
fn motion_arrow(track: &[(f64, f64)], view_span: f64) -> Option<((f64, f64), (f64, f64))> {
    if track.len() < 3 {
        return None;
    }
    let (i, _) = track
        .iter()
        .enumerate()
        .map(|(i, p)| (i, p.0 * p.0 + p.1 * p.1))
        .max_by(|a, b| a.1.total_cmp(&b.1))?;
    let n = track.len();
    let a = track[(i + n - 1) % n];
    let b = track[(i + 1) % n];
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let len = (dx * dx + dy * dy).sqrt();
    if len.is_nan() || len <= 0.0 {
        return None;
    }
    let (ux, uy) = (dx / len, dy / len);
    let p = track[i];
    let r = (p.0 * p.0 + p.1 * p.1).sqrt().max(1e-12);
    let off = 0.035 * view_span;
    let c = (p.0 + off * p.0 / r, p.1 + off * p.1 / r);
    let half = 0.04 * view_span;
    Some((
        (c.0 - half * ux, c.1 - half * uy),
        (c.0 + half * ux, c.1 + half * uy),
    ))
}
