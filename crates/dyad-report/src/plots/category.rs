//! A category axis: categories 0..n at integer positions, drawn over
//! [-0.5, n - 0.5], with a tick (and label) at every category and fractional
//! positions allowed for side-by-side items within a category.

use plotters::coord::ranged1d::{DefaultFormatting, KeyPointHint, Ranged};
use std::ops::Range;

#[derive(Debug, Clone, Copy)]
pub(crate) struct CategoryAxis {
    pub(crate) n: usize,
}

impl Ranged for CategoryAxis {
    type FormatOption = DefaultFormatting;
    type ValueType = f64;

    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        let lo = -0.5;
        let span = self.n as f64;
        let t = (value - lo) / span;
        (limit.0 as f64 + t * (limit.1 - limit.0) as f64).round() as i32
    }

    fn key_points<Hint: KeyPointHint>(&self, _hint: Hint) -> Vec<f64> {
        (0..self.n).map(|i| i as f64).collect()
    }

    fn range(&self) -> Range<f64> {
        -0.5..self.n as f64 - 0.5
    }
}

/// Label of category `v` (nearest integer), or empty off the axis.
pub(crate) fn category_label(labels: &[String], v: f64) -> String {
    let i = v.round();
    if i >= 0.0 && (i as usize) < labels.len() && (v - i).abs() < 1e-6 {
        labels[i as usize].clone()
    } else {
        String::new()
    }
}
