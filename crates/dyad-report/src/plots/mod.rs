//! Plots of a run, each written as PNG and SVG by one drawing function
//! generic over the plotters backend.
//!
//! Palette: the colour-blind-safe set of Okabe & Ito (2008, "Color Universal
//! Design", <https://jfly.uni-koeln.de/color/>), used sparingly on white with
//! grey axes; markers differ in shape as well as colour.

mod advice;
mod category;
pub mod density;
mod ephemeris;
mod masses;
mod pairs;
mod periods;
mod ranks;
mod separation;
mod sky;
mod velocity;

pub use advice::{plot_next_epoch_advice, AdviceCurve, AdvicePlotInput};
pub use ephemeris::{plot_ephemeris, EphemerisPanel, EphemerisPlotInput};
pub use masses::{plot_mass_distributions, DistributionPanel};
pub use periods::{plot_period_windows, MassInterval, WindowSummary};
pub use ranks::{
    binomial_quantile, plot_rank_histograms, RankHistogramInput, RANK_BAND_PROBABILITY,
};
pub use separation::{plot_separation_and_angle, Band, PolarPoint, SeparationPlotInput};
pub use sky::{plot_sky, LineOfNodes, SkyMeasurement, SkyPlotInput, SkyPrediction};
pub use velocity::{plot_velocity_curves, Star, VelocityPlotInput, VelocityPoint};

pub use pairs::plot_pairs;

use crate::atomic::{commit_temp, temp_path_for, write_atomically};
use crate::error::ReportError;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::FontStyle;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

/// DejaVu Sans, compiled in (licence in assets/LICENSE-DejaVu.txt).
static FONT_BYTES: &[u8] = include_bytes!("../../assets/DejaVuSans.ttf");

/// Family name every text style in this crate uses.
pub(crate) const FONT: &str = "sans-serif";

/// Registers the bundled font with plotters once; later calls return the
/// first outcome.
pub fn register_bundled_font() -> Result<(), ReportError> {
    static DONE: OnceLock<bool> = OnceLock::new();
    let ok = *DONE.get_or_init(|| {
        // Register under every generic family plotters might ask for, so no
        // text style can fall through to a system-font lookup.
        ["sans-serif", "serif", "monospace"].iter().all(|family| {
            [FontStyle::Normal, FontStyle::Bold, FontStyle::Italic]
                .into_iter()
                .all(|style| plotters::style::register_font(family, style, FONT_BYTES).is_ok())
        })
    });
    if ok {
        Ok(())
    } else {
        Err(ReportError::Plot {
            plot: "font",
            message: "the bundled DejaVu Sans could not be parsed".into(),
        })
    }
}

/// The two files a plot function writes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PlotFiles {
    /// `<stem>.png`
    pub png: PathBuf,
    /// `<stem>.svg`
    pub svg: PathBuf,
}

// Okabe & Ito (2008) colours.
pub(crate) const INK: RGBColor = RGBColor(34, 34, 34);
pub(crate) const GREY: RGBColor = RGBColor(120, 120, 120);
pub(crate) const LIGHT_GREY: RGBColor = RGBColor(200, 200, 200);
pub(crate) const ORANGE: RGBColor = RGBColor(230, 159, 0);
pub(crate) const SKY_BLUE: RGBColor = RGBColor(86, 180, 233);
pub(crate) const GREEN: RGBColor = RGBColor(0, 158, 115);
pub(crate) const BLUE: RGBColor = RGBColor(0, 114, 178);
pub(crate) const VERMILLION: RGBColor = RGBColor(213, 94, 0);
pub(crate) const PURPLE: RGBColor = RGBColor(204, 121, 167);

/// Series colours in order of use.
pub(crate) const SERIES: [RGBColor; 6] = [BLUE, VERMILLION, GREEN, ORANGE, PURPLE, SKY_BLUE];

/// Converts plotting-library errors into [`ReportError::Plot`].
pub(crate) trait PlotResultExt<T> {
    fn ctx(self, plot: &'static str) -> Result<T, ReportError>;
}

impl<T, E: std::fmt::Display> PlotResultExt<T> for Result<T, E> {
    fn ctx(self, plot: &'static str) -> Result<T, ReportError> {
        self.map_err(|e| ReportError::Plot {
            plot,
            message: e.to_string(),
        })
    }
}

/// A figure drawable on any backend.
pub(crate) trait Figure {
    /// Short name used in error messages.
    const NAME: &'static str;
    /// Size in pixels.
    fn size(&self) -> (u32, u32);
    /// Draws the whole figure on `root` (already white).
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ReportError>;
}

/// `<stem>.<ext>`, keeping any dots already in the stem.
fn with_suffix(stem: &Path, ext: &str) -> PathBuf {
    let mut s = stem.as_os_str().to_os_string();
    s.push(".");
    s.push(ext);
    PathBuf::from(s)
}

/// Writes `fig` as `<stem>.png` and `<stem>.svg`, each atomically.
pub(crate) fn render<F: Figure>(fig: &F, stem: &Path) -> Result<PlotFiles, ReportError> {
    register_bundled_font()?;
    let files = PlotFiles {
        png: with_suffix(stem, "png"),
        svg: with_suffix(stem, "svg"),
    };
    let size = fig.size();

    let tmp = temp_path_for(&files.png)?;
    let drawn = (|| {
        let root = BitMapBackend::new(&tmp, size).into_drawing_area();
        root.fill(&WHITE).ctx(F::NAME)?;
        fig.draw(&root)?;
        root.present().ctx(F::NAME)
    })();
    match drawn {
        Ok(()) => commit_temp(&tmp, &files.png)?,
        Err(e) => {
            let _ = std::fs::remove_file(&tmp);
            return Err(e);
        }
    }

    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, size).into_drawing_area();
        root.fill(&WHITE).ctx(F::NAME)?;
        fig.draw(&root)?;
        root.present().ctx(F::NAME)?;
    }
    write_atomically(&files.svg, |w| {
        w.write_all(svg.as_bytes())
            .map_err(|e| ReportError::io(&files.svg, e))
    })?;
    Ok(files)
}

/// Text style in the bundled font.
pub(crate) fn font(size: f64) -> TextStyle<'static> {
    (FONT, size).into_font().color(&INK)
}

/// Tick-label formatter for an axis spanning `span` with about `n_ticks`
/// ticks: enough decimals to tell neighbouring ticks apart.
pub(crate) fn tick_formatter(span: f64, n_ticks: usize) -> impl Fn(&f64) -> String {
    let step = (span.abs() / n_ticks.max(1) as f64).max(f64::MIN_POSITIVE);
    let decimals = (-step.log10().floor()).clamp(0.0, 8.0) as usize;
    let scientific = span.abs() >= 1e6 || (span.abs() < 1e-4 && span != 0.0);
    move |v: &f64| {
        if scientific {
            format!("{v:.1e}")
        } else {
            let s = format!("{v:.decimals$}");
            // Avoid "-0.0".
            if s.trim_start_matches('-')
                .chars()
                .all(|c| c == '0' || c == '.')
            {
                s.trim_start_matches('-').to_string()
            } else {
                s
            }
        }
    }
}

/// Axis range of finite values: the 0.1st to 99.9th percentile padded by
/// `pad` of the span on each side; a degenerate span becomes a unit window.
pub(crate) fn padded_range(values: &[f64], pad: f64) -> (f64, f64) {
    let mut v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
    if v.is_empty() {
        return (0.0, 1.0);
    }
    v.sort_by(f64::total_cmp);
    let lo = crate::stats::quantile_sorted(&v, 0.001);
    let hi = crate::stats::quantile_sorted(&v, 0.999);
    widen(lo, hi, pad)
}

/// `[lo, hi]` padded by `pad` of its span; degenerate spans get a window.
pub(crate) fn widen(lo: f64, hi: f64, pad: f64) -> (f64, f64) {
    let span = hi - lo;
    if !span.is_finite() || span <= 0.0 {
        let half = if lo.abs() > 0.0 { 0.05 * lo.abs() } else { 0.5 };
        return (lo - half, lo + half);
    }
    (lo - pad * span, hi + pad * span)
}

/// Marker shapes for per-instrument points.
#[derive(Debug, Clone, Copy)]
pub(crate) enum Marker {
    Circle,
    Triangle,
    Square,
    Diamond,
    Cross,
    /// An open circle with cross-hairs through it (the primary star).
    Primary,
}

pub(crate) const MARKERS: [Marker; 5] = [
    Marker::Circle,
    Marker::Triangle,
    Marker::Square,
    Marker::Diamond,
    Marker::Cross,
];

/// Draws a marker of `size` pixels centred on the data point `at`.
pub(crate) fn draw_marker<DB: DrawingBackend, CT: CoordTranslate>(
    area: &DrawingArea<DB, CT>,
    at: CT::From,
    marker: Marker,
    size: i32,
    style: ShapeStyle,
    plot: &'static str,
) -> Result<(), ReportError>
where
    CT::From: Clone + 'static,
{
    let s = size;
    let e = EmptyElement::at(at.clone());
    match marker {
        Marker::Circle => area.draw(&(e + Circle::new((0, 0), s, style))),
        Marker::Triangle => {
            area.draw(&(e + Polygon::new(vec![(0, -s - 1), (-s - 1, s), (s + 1, s)], style)))
        }
        Marker::Square => area.draw(&(e + Rectangle::new([(-s, -s), (s, s)], style))),
        Marker::Diamond => area.draw(
            &(e + Polygon::new(
                vec![(0, -s - 2), (s + 1, 0), (0, s + 2), (-s - 1, 0)],
                style,
            )),
        ),
        Marker::Primary => {
            // Cross-hairs reach past the ring, with a gap at the centre so
            // a point on the primary stays visible.
            let (inner, outer) = (s / 3, s + s * 3 / 4);
            let ink = style.color.stroke_width(2);
            for (dx, dy) in [(1, 0), (-1, 0), (0, 1), (0, -1)] {
                area.draw(
                    &(EmptyElement::at(at.clone())
                        + PathElement::new(
                            vec![(dx * inner, dy * inner), (dx * outer, dy * outer)],
                            ink,
                        )),
                )
                .ctx(plot)?;
            }
            area.draw(&(e + Circle::new((0, 0), s, ink)))
        }
        Marker::Cross => area.draw(
            &(e + PathElement::new(vec![(-s, -s), (s, s)], style.stroke_width(2))
                + PathElement::new(vec![(-s, s), (s, -s)], style.stroke_width(2))),
        ),
    }
    .ctx(plot)
}

/// What a legend entry shows beside its text.
#[derive(Debug, Clone, Copy)]
pub(crate) enum LegendGlyph {
    /// A line of the given colour, width and opacity.
    Line(RGBColor, u32, f64),
    /// A filled marker.
    Marker(Marker, RGBColor),
}

/// Where a legend box goes inside an area.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Corner {
    TopLeft,
    TopRight,
    BottomLeft,
    BottomRight,
}

/// Pixel size of the legend box for `entries`.
pub(crate) fn legend_size<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[(LegendGlyph, String)],
    size: f64,
    plot: &'static str,
) -> Result<(i32, i32), ReportError> {
    let style = font(size);
    let line_h = (size * 1.35).round() as i32;
    let glyph_w = (size * 2.0).round() as i32;
    let pad = (size * 0.5).round() as i32;
    let mut text_w = 0;
    for (_, t) in entries {
        let (w, _) = area.estimate_text_size(t, &style).ctx(plot)?;
        text_w = text_w.max(w as i32);
    }
    Ok((
        pad * 3 + glyph_w + text_w,
        pad * 2 + line_h * entries.len() as i32,
    ))
}

pub(crate) fn corner_origin(
    corner: Corner,
    (bw, bh): (i32, i32),
    (aw, ah): (i32, i32),
    inset: i32,
) -> (i32, i32) {
    let x0 = match corner {
        Corner::TopLeft | Corner::BottomLeft => inset,
        _ => aw - inset - bw,
    };
    let y0 = match corner {
        Corner::TopLeft | Corner::TopRight => inset,
        _ => ah - inset - bh,
    };
    (x0, y0)
}

/// The corner (in order of preference) whose legend box covers the fewest
/// of `points` (pixel coordinates relative to the area).
pub(crate) fn least_crowded_corner(
    points: &[(i32, i32)],
    box_size: (i32, i32),
    area_size: (i32, i32),
    inset: i32,
    preference: &[Corner],
) -> Corner {
    let mut best = (
        usize::MAX,
        preference.first().copied().unwrap_or(Corner::TopLeft),
    );
    for &c in preference {
        let (x0, y0) = corner_origin(c, box_size, area_size, inset);
        let (x1, y1) = (x0 + box_size.0, y0 + box_size.1);
        let n = points
            .iter()
            .filter(|p| p.0 >= x0 - 4 && p.0 <= x1 + 4 && p.1 >= y0 - 4 && p.1 <= y1 + 4)
            .count();
        if n < best.0 {
            best = (n, c);
        }
    }
    best.1
}

/// Draws a 16-pixel legend of `entries` in the corner of `area` where it
/// covers fewest of the points `pts` (pixels relative to the area), trying
/// the top right first.
pub(crate) fn draw_legend_where_free<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[(LegendGlyph, String)],
    pts: &[(i32, i32)],
    plot: &'static str,
) -> Result<(), ReportError> {
    let size = 16.0;
    let box_size = legend_size(area, entries, size, plot)?;
    let (pw, ph) = area.dim_in_pixel();
    let corner = least_crowded_corner(
        pts,
        box_size,
        (pw as i32, ph as i32),
        8,
        &[
            Corner::TopRight,
            Corner::TopLeft,
            Corner::BottomRight,
            Corner::BottomLeft,
        ],
    );
    draw_legend(area, entries, corner, 8, size, plot)
}

/// Draws a legend box of `entries` in a corner of `area` (pixel
/// coordinates relative to the area), with `inset` pixels from the edges.
pub(crate) fn draw_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[(LegendGlyph, String)],
    corner: Corner,
    inset: i32,
    size: f64,
    plot: &'static str,
) -> Result<(), ReportError> {
    if entries.is_empty() {
        return Ok(());
    }
    let style = font(size);
    let line_h = (size * 1.35).round() as i32;
    let glyph_w = (size * 2.0).round() as i32;
    let pad = (size * 0.5).round() as i32;
    let (box_w, box_h) = legend_size(area, entries, size, plot)?;
    let (aw, ah) = area.dim_in_pixel();
    let (x0, y0) = corner_origin(corner, (box_w, box_h), (aw as i32, ah as i32), inset);
    area.draw(&Rectangle::new(
        [(x0, y0), (x0 + box_w, y0 + box_h)],
        WHITE.mix(0.9).filled(),
    ))
    .ctx(plot)?;
    area.draw(&Rectangle::new(
        [(x0, y0), (x0 + box_w, y0 + box_h)],
        LIGHT_GREY.stroke_width(1),
    ))
    .ctx(plot)?;
    for (i, (glyph, text)) in entries.iter().enumerate() {
        let cy = y0 + pad + line_h * i as i32 + line_h / 2;
        let gx0 = x0 + pad;
        match *glyph {
            LegendGlyph::Line(c, w, a) => area
                .draw(&PathElement::new(
                    vec![(gx0, cy), (gx0 + glyph_w, cy)],
                    c.mix(a).stroke_width(w),
                ))
                .ctx(plot)?,
            LegendGlyph::Marker(m, c) => draw_marker(
                area,
                (gx0 + glyph_w / 2, cy),
                m,
                if matches!(m, Marker::Primary) {
                    (size * 0.55).round() as i32
                } else {
                    (size * 0.3).round() as i32
                },
                c.filled(),
                plot,
            )?,
        }
        area.draw(&Text::new(
            text.clone(),
            (gx0 + glyph_w + pad, cy),
            style.pos(plotters::style::text_anchor::Pos::new(
                plotters::style::text_anchor::HPos::Left,
                plotters::style::text_anchor::VPos::Center,
            )),
        ))
        .ctx(plot)?;
    }
    Ok(())
}

/// A solid colour `a` of the way from white to `c` (opaque, so overlapping
/// shapes stay the same shade in PNG and SVG).
pub(crate) fn tint(c: RGBColor, a: f64) -> RGBColor {
    let m = |v: u8| (255.0 - a * (255.0 - v as f64)).round().clamp(0.0, 255.0) as u8;
    RGBColor(m(c.0), m(c.1), m(c.2))
}

/// Dashed line from `a` to `b` in data coordinates, as `n_dashes` short
/// segments with equal gaps between them.
pub(crate) fn dashed_segment(
    a: (f64, f64),
    b: (f64, f64),
    n_dashes: usize,
) -> Vec<Vec<(f64, f64)>> {
    let n = n_dashes.max(1);
    let at = |t: f64| (a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1));
    (0..n)
        .map(|k| {
            let t0 = (2 * k) as f64 / (2 * n - 1) as f64;
            let t1 = (2 * k + 1) as f64 / (2 * n - 1) as f64;
            vec![at(t0), at(t1)]
        })
        .collect()
}

/// Dashed vertical line from `(x, y0)` to `(x, y1)` in data coordinates,
/// as short segments.
pub(crate) fn dashed_vertical(x: f64, y0: f64, y1: f64, n_dashes: usize) -> Vec<Vec<(f64, f64)>> {
    let n = n_dashes.max(1);
    let step = (y1 - y0) / (2 * n) as f64;
    (0..n)
        .map(|k| {
            let a = y0 + 2.0 * k as f64 * step;
            vec![(x, a), (x, a + step)]
        })
        .collect()
}
