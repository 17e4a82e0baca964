//! Next-epoch advice: the expected shrinkage of each target interval from
//! one more measurement, against the candidate date, one line per kind of
//! measurement and one panel per target.

use std::path::Path;

use plotters::coord::Shift;
use plotters::prelude::*;

use super::{
    font, padded_range, render, tick_formatter, Figure, PlotFiles, PlotResultExt, GREY, SERIES,
};
use crate::error::ReportError;

const NAME: &str = "next-epoch advice";

/// One kind of measurement (a position, a velocity of one star) over the
/// candidate dates.
#[derive(Debug, Clone, PartialEq)]
pub struct AdviceCurve {
    /// What is measured, e.g. "position (1.0 mas)".
    pub label: String,
    /// Candidate dates (Julian years), increasing.
    pub dates: Vec<f64>,
    /// Expected shrinkage of each target's 68 per cent interval, per cent,
    /// one vector per target (the order of [`AdvicePlotInput::targets`]),
    /// each as long as `dates`.
    pub shrinkage_percent: Vec<Vec<f64>>,
}

/// Everything the advice plot shows.
#[derive(Debug, Clone, PartialEq)]
pub struct AdvicePlotInput {
    /// Title.
    pub title: String,
    /// Plot labels of the targets (e.g. "M₁").
    pub targets: Vec<String>,
    /// One curve per kind of measurement.
    pub curves: Vec<AdviceCurve>,
}

/// Writes the advice plot as `<stem>.png` and `<stem>.svg`.
pub fn plot_next_epoch_advice(
    stem: &Path,
    input: &AdvicePlotInput,
) -> Result<PlotFiles, ReportError> {
    if input.targets.is_empty() || input.curves.is_empty() {
        return Err(ReportError::InvalidInput(
            "advice plot needs at least one target and one kind of measurement".into(),
        ));
    }
    for c in &input.curves {
        if c.dates.is_empty()
            || c.shrinkage_percent.len() != input.targets.len()
            || c.shrinkage_percent.iter().any(|s| s.len() != c.dates.len())
        {
            return Err(ReportError::InvalidInput(format!(
                "advice plot: curve '{}' does not match its dates and targets",
                c.label
            )));
        }
    }
    render(&AdviceFigure { input }, stem)
}

struct AdviceFigure<'a> {
    input: &'a AdvicePlotInput,
}

/// Runs of consecutive dates without a gap wider than 1.5 of the smallest
/// step (dates outside an observing season leave gaps the line must not
/// bridge).
fn runs(dates: &[f64]) -> Vec<std::ops::Range<usize>> {
    let step = dates
        .windows(2)
        .map(|w| w[1] - w[0])
        .filter(|d| *d > 0.0)
        .fold(f64::INFINITY, f64::min);
    let mut out = Vec::new();
    let mut start = 0;
    for i in 1..dates.len() {
        if dates[i] - dates[i - 1] > 1.5 * step {
            out.push(start..i);
            start = i;
        }
    }
    out.push(start..dates.len());
    out
}

impl Figure for AdviceFigure<'_> {
    const NAME: &'static str = NAME;

    fn size(&self) -> (u32, u32) {
        (1100, 330 * self.input.targets.len() as u32 + 90)
    }

    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ReportError> {
        let area = root.titled(&self.input.title, font(26.0)).ctx(NAME)?;
        let panels = area.split_evenly((self.input.targets.len(), 1));
        let all_dates: Vec<f64> = self
            .input
            .curves
            .iter()
            .flat_map(|c| c.dates.iter().copied())
            .collect();
        let (x0, x1) = padded_range(&all_dates, 0.02);
        for (t, (panel, target)) in panels.iter().zip(&self.input.targets).enumerate() {
            let values: Vec<f64> = self
                .input
                .curves
                .iter()
                .flat_map(|c| c.shrinkage_percent[t].iter().copied())
                .collect();
            let (_, hi) = padded_range(&values, 0.1);
            let (y0, y1) = (0.0f64.min(hi - 1.0), hi.max(1.0));
            let mut chart = ChartBuilder::on(panel)
                .margin(14)
                .x_label_area_size(44)
                .y_label_area_size(84)
                .build_cartesian_2d(x0..x1, y0..y1)
                .ctx(NAME)?;
            chart
                .configure_mesh()
                .x_labels(10)
                .y_labels(6)
                .x_label_formatter(&tick_formatter(x1 - x0, 10))
                .y_label_formatter(&tick_formatter(y1 - y0, 6))
                .label_style(font(15.0))
                .axis_desc_style(font(17.0))
                .x_desc("Date of the next measurement (Julian year)")
                .y_desc(format!("{target}: interval shrinks by (%)"))
                .light_line_style(RGBColor(246, 246, 246))
                .bold_line_style(RGBColor(232, 232, 232))
                .axis_style(GREY)
                .draw()
                .ctx(NAME)?;
            for (k, curve) in self.input.curves.iter().enumerate() {
                let colour = SERIES[k % SERIES.len()];
                let s = &curve.shrinkage_percent[t];
                for run in runs(&curve.dates) {
                    let pts: Vec<(f64, f64)> = run
                        .map(|i| (curve.dates[i], s[i]))
                        .filter(|p| p.1.is_finite())
                        .collect();
                    chart
                        .draw_series(std::iter::once(PathElement::new(
                            pts,
                            colour.stroke_width(2),
                        )))
                        .ctx(NAME)?;
                }
                // The best date of this kind: an open ring with a drop line.
                let best = s
                    .iter()
                    .enumerate()
                    .filter(|(_, v)| v.is_finite())
                    .max_by(|a, b| a.1.total_cmp(b.1));
                if let Some((i, &v)) = best {
                    let x = curve.dates[i];
                    chart
                        .draw_series(std::iter::once(PathElement::new(
                            vec![(x, y0), (x, v)],
                            colour.mix(0.5).stroke_width(1),
                        )))
                        .ctx(NAME)?;
                    chart
                        .draw_series(std::iter::once(Circle::new(
                            (x, v),
                            6,
                            colour.stroke_width(2),
                        )))
                        .ctx(NAME)?;
                }
                if t == 0 {
                    // Legend entries only once, in the first panel.
                    chart
                        .draw_series(std::iter::empty::<Circle<(f64, f64), i32>>())
                        .ctx(NAME)?
                        .label(curve.label.clone())
                        .legend(move |(x, y)| {
                            PathElement::new(vec![(x, y), (x + 22, y)], colour.stroke_width(3))
                        });
                }
            }
            if t == 0 {
                chart
                    .configure_series_labels()
                    .label_font(font(15.0))
                    .background_style(WHITE.mix(0.9))
                    .border_style(GREY)
                    .position(SeriesLabelPosition::UpperRight)
                    .draw()
                    .ctx(NAME)?;
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn season_gaps_split_the_line() {
        let dates = [2027.0, 2027.1, 2027.2, 2028.0, 2028.1];
        assert_eq!(runs(&dates), vec![0..3, 3..5]);
        assert_eq!(runs(&[2030.0]), vec![0..1]);
    }

    #[test]
    fn writes_png_and_svg_and_refuses_mismatched_curves() {
        let dir = tempfile::tempdir().unwrap();
        let mut input = AdvicePlotInput {
            title: "Next measurement".into(),
            targets: vec!["M₁".into(), "M₂".into()],
            curves: vec![AdviceCurve {
                label: "position (1 mas)".into(),
                dates: vec![2027.0, 2027.5, 2028.0],
                shrinkage_percent: vec![vec![1.0, 5.0, 2.0], vec![0.5, 3.0, 1.0]],
            }],
        };
        let files = plot_next_epoch_advice(&dir.path().join("advice"), &input).unwrap();
        assert!(files.png.exists() && files.svg.exists());
        input.curves[0].shrinkage_percent.pop();
        assert!(plot_next_epoch_advice(&dir.path().join("bad"), &input).is_err());
    }
}
