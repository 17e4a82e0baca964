//! Tables for the run folder and for papers: the per-measurement
//! astrometric residuals (CSV) and the elements as a LaTeX table with
//! asymmetric errors.
//!
//! Rounding in the LaTeX table follows common practice for quoting
//! uncertainties: the smaller of the two 68 % half-widths keeps two
//! significant digits, the value and the other error are rounded to the same
//! decimal place (which may lie left of the decimal point: 1230 +230 -150).

use crate::atomic::write_atomically;
use crate::error::ReportError;
use crate::input::{ParameterInfo, ParameterKind};
use crate::stats::{summarise_values, ParameterSummary};
use crate::summary::{is_fixed, reported};
use std::path::Path;

/// The form an astrometric measurement was given in, which fixes the
/// meaning and units of the pairs in [`AstrometryResidualRow`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MeasuredForm {
    /// (separation \[mas\], position angle \[deg\]).
    Polar,
    /// (ΔRA* \[mas\], ΔDec \[mas\]).
    Cartesian,
}

/// Observed minus model for one astrometric epoch, in the form measured.
#[derive(Debug, Clone, PartialEq)]
pub struct AstrometryResidualRow {
    /// Epoch \[JD\].
    pub t_jd: f64,
    /// Epoch as a Julian year.
    pub t_jyear: f64,
    /// The `source` column of the data (empty when absent).
    pub source: String,
    /// Polar or Cartesian.
    pub form: MeasuredForm,
    /// Measured pair.
    pub observed: [f64; 2],
    /// Model pair at the same epoch.
    pub model: [f64; 2],
    /// Observed minus model (position angle wrapped to (-180, 180]).
    pub residual: [f64; 2],
    /// 1-sigma errors used in the fit.
    pub error: [f64; 2],
    /// rᵀ C⁻¹ r with the pair's error correlation (chi-square, 2 degrees of
    /// freedom).
    pub chi_square: f64,
}

/// Header of the astrometric residuals table.
pub const RESIDUAL_COLUMNS: [&str; 25] = [
    "jd",
    "jyear",
    "source",
    "form",
    "sep_obs_mas",
    "sep_model_mas",
    "sep_oc_mas",
    "sep_err_mas",
    "sep_normalised",
    "pa_obs_deg",
    "pa_model_deg",
    "pa_oc_deg",
    "pa_err_deg",
    "pa_normalised",
    "dra_obs_mas",
    "dra_model_mas",
    "dra_oc_mas",
    "dra_err_mas",
    "dra_normalised",
    "ddec_obs_mas",
    "ddec_model_mas",
    "ddec_oc_mas",
    "ddec_err_mas",
    "ddec_normalised",
    "chi_square",
];

/// The cells of one residual row: the measured form's five columns
/// (observed, model, O − C, error, O − C / error) per component, the other
/// form's columns empty.
fn residual_cells(r: &AstrometryResidualRow) -> Vec<String> {
    let num = |v: f64| format!("{v:?}");
    let component = |k: usize| -> [String; 5] {
        [
            num(r.observed[k]),
            num(r.model[k]),
            num(r.residual[k]),
            num(r.error[k]),
            num(r.residual[k] / r.error[k]),
        ]
    };
    let empty = || std::array::from_fn::<String, 5, _>(|_| String::new());
    let (polar, cartesian) = match r.form {
        MeasuredForm::Polar => ([component(0), component(1)], [empty(), empty()]),
        MeasuredForm::Cartesian => ([empty(), empty()], [component(0), component(1)]),
    };
    let mut cells = vec![
        num(r.t_jd),
        num(r.t_jyear),
        r.source.clone(),
        match r.form {
            MeasuredForm::Polar => "polar".to_string(),
            MeasuredForm::Cartesian => "cartesian".to_string(),
        },
    ];
    for group in polar.into_iter().chain(cartesian) {
        cells.extend(group);
    }
    cells.push(num(r.chi_square));
    cells
}

/// Writes the astrometric residuals table to `path` (atomically).
pub fn write_astrometry_residuals_csv(
    path: &Path,
    rows: &[AstrometryResidualRow],
) -> Result<(), ReportError> {
    write_atomically(path, |w| {
        let mut out = dyad_common::csv_table::writer(w);
        let csv = |e| ReportError::csv(path, e);
        out.write_record(RESIDUAL_COLUMNS).map_err(csv)?;
        for r in rows {
            out.write_record(residual_cells(r)).map_err(csv)?;
        }
        out.flush().map_err(|e| ReportError::io(path, e))
    })
}

/// One row of the LaTeX elements table.
#[derive(Debug, Clone, PartialEq)]
pub struct ElementRow {
    /// Symbol in LaTeX math, e.g. `P`, `\Omega`, `M_1`.
    pub symbol: String,
    /// Unit in LaTeX, e.g. `yr`, `$^\circ$`, `$M_\odot$` (empty for none).
    pub unit: String,
    /// How the draws are summarised (angles wrap).
    pub kind: ParameterKind,
    /// One value per draw, in draw order.
    pub values: Vec<f64>,
}

/// Decimal place for quoting `median` with errors `minus`, `plus`: the
/// power of ten k such that the smaller error rounded to a multiple of
/// 10^k has two significant digits. `None` if neither error is positive.
pub fn rounding_place(minus: f64, plus: f64) -> Option<i32> {
    let err = [minus, plus]
        .into_iter()
        .filter(|e| e.is_finite() && *e > 0.0)
        .fold(f64::INFINITY, f64::min);
    if !err.is_finite() {
        return None;
    }
    let mut k = err.log10().floor() as i32 - 1;
    // 0.0996 rounds to 0.100 at k = -3: three digits; move one place up.
    if round_to(err, k) >= 10f64.powi(k + 2) {
        k += 1;
    }
    Some(k)
}

fn round_to(v: f64, k: i32) -> f64 {
    let s = 10f64.powi(k);
    (v / s).round() * s
}

/// `v` rounded to a multiple of 10^k and written with max(0, -k) decimals.
fn fmt_place(v: f64, k: i32) -> String {
    let d = (-k).max(0) as usize;
    let s = format!("{:.d$}", round_to(v, k));
    if s.trim_start_matches('-')
        .chars()
        .all(|c| c == '0' || c == '.')
    {
        s.trim_start_matches('-').to_string()
    } else {
        s
    }
}

/// `$x^{+a}_{-b}$` with the common-practice rounding of [`rounding_place`],
/// or `$x$` (fixed) for a parameter that did not vary. Angles are wrapped
/// into [0, period) first.
pub fn latex_value(s: &ParameterSummary) -> String {
    let median = reported(s, s.median);
    if is_fixed(s) {
        return format!("${}$ (fixed)", crate::summary::fmt_value(median, None));
    }
    match rounding_place(s.minus68(), s.plus68()) {
        Some(k) => format!(
            "${}^{{+{}}}_{{-{}}}$",
            fmt_place(median, k),
            fmt_place(s.plus68(), k),
            fmt_place(s.minus68(), k)
        ),
        None => format!("${}$", crate::summary::fmt_value(median, None)),
    }
}

/// The elements as a LaTeX `tabular`: one column of values, or one per
/// group when `groups` gives a group index per draw (e.g. the period mode
/// of each draw), headed by the group's weight. Medians with the 68 %
/// equal-tailed interval as asymmetric errors.
pub fn latex_elements_table(
    caption: &str,
    rows: &[ElementRow],
    groups: Option<&[usize]>,
) -> Result<String, ReportError> {
    let n_draws = rows.first().map_or(0, |r| r.values.len());
    if rows.iter().any(|r| r.values.len() != n_draws) || n_draws == 0 {
        return Err(ReportError::InvalidInput(
            "elements table: every row needs the same, non-zero number of draws".into(),
        ));
    }
    let group_of: Vec<usize> = match groups {
        Some(g) if g.len() == n_draws => g.to_vec(),
        Some(g) => {
            return Err(ReportError::InvalidInput(format!(
                "elements table: {} group indices for {n_draws} draws",
                g.len()
            )))
        }
        None => vec![0; n_draws],
    };
    let n_groups = group_of.iter().max().map_or(1, |m| m + 1);
    let members: Vec<Vec<usize>> = (0..n_groups)
        .map(|g| (0..n_draws).filter(|&d| group_of[d] == g).collect())
        .filter(|m: &Vec<usize>| !m.is_empty())
        .collect();
    let mut out = String::new();
    out.push_str(&format!("% {}\n", caption.replace('\n', " ")));
    out.push_str(
        "% Medians with the 68 % equal-tailed interval as asymmetric errors; the smaller\n\
         % error keeps two significant digits. Angles in [0, 360) deg. Written by dyad.\n",
    );
    out.push_str(&format!(
        "\\begin{{tabular}}{{ll{}}}\n\\hline\n",
        "c".repeat(members.len())
    ));
    out.push_str("Element & Unit");
    if members.len() == 1 {
        out.push_str(" & Value");
    } else {
        for (g, m) in members.iter().enumerate() {
            out.push_str(&format!(
                " & Mode {} (weight {:.2})",
                g + 1,
                m.len() as f64 / n_draws as f64
            ));
        }
    }
    out.push_str(" \\\\\n\\hline\n");
    for row in rows {
        out.push_str(&format!("${}$ & {}", row.symbol, row.unit));
        let info = ParameterInfo {
            name: row.symbol.clone(),
            unit: String::new(),
            label: row.symbol.clone(),
            kind: row.kind,
        };
        for m in &members {
            let values: Vec<f64> = m.iter().map(|&d| row.values[d]).collect();
            let cell = match summarise_values(&info, &values, values[0]) {
                Ok(s) => latex_value(&s),
                Err(_) => "--".to_string(),
            };
            out.push_str(&format!(" & {cell}"));
        }
        out.push_str(" \\\\\n");
    }
    out.push_str("\\hline\n\\end{tabular}\n");
    Ok(out)
}

/// Writes [`latex_elements_table`] to `path` (atomically).
pub fn write_latex_elements_table(
    path: &Path,
    caption: &str,
    rows: &[ElementRow],
    groups: Option<&[usize]>,
) -> Result<(), ReportError> {
    let text = latex_elements_table(caption, rows, groups)?;
    write_atomically(path, |w| {
        w.write_all(text.as_bytes())
            .map_err(|e| ReportError::io(path, e))
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn summary_of(values: &[f64], kind: ParameterKind) -> ParameterSummary {
        let info = ParameterInfo {
            name: "x".into(),
            unit: String::new(),
            label: "x".into(),
            kind,
        };
        summarise_values(&info, values, values[0]).unwrap()
    }

    /// Draws whose median and 16/84 % quantiles are exactly m, m - b, m + a
    /// (Hyndman & Fan definition 7 on 101 evenly placed points).
    fn draws_with(m: f64, minus: f64, plus: f64) -> Vec<f64> {
        (0..=100)
            .map(|k| {
                let p = k as f64 / 100.0;
                if p <= 0.5 {
                    m - minus * (0.5 - p) / 0.34
                } else {
                    m + plus * (p - 0.5) / 0.34
                }
            })
            .collect()
    }

    #[test]
    fn errors_keep_two_significant_digits_and_the_value_follows() {
        // Common practice for quoting uncertainties: two significant digits
        // in the smaller error, the value rounded to the same place.
        let cases = [
            ((12.3456, 0.0156, 0.0234), "$12.346^{+0.023}_{-0.016}$"),
            ((1234.0, 150.0, 230.0), "$1230^{+230}_{-150}$"),
            ((0.41937, 0.00142, 0.00139), "$0.4194^{+0.0014}_{-0.0014}$"),
            // 0.0996 rounds to 0.100, three digits: quoted at 0.10.
            ((5.0, 0.0996, 0.31), "$5.00^{+0.31}_{-0.10}$"),
            ((-14.1932, 0.0703, 0.0711), "$-14.193^{+0.071}_{-0.070}$"),
        ];
        for ((m, minus, plus), expected) in cases {
            let s = summary_of(&draws_with(m, minus, plus), ParameterKind::Linear);
            assert_eq!(latex_value(&s), expected, "{m} -{minus} +{plus}");
        }
        assert_eq!(rounding_place(0.0156, 0.0234), Some(-3));
        assert_eq!(rounding_place(150.0, 230.0), Some(1));
        assert_eq!(rounding_place(0.0, 0.0), None);
    }

    #[test]
    fn fixed_parameters_are_shown_as_fixed() {
        let s = summary_of(&[0.25; 50], ParameterKind::Linear);
        assert_eq!(latex_value(&s), "$0.2500$ (fixed)");
    }

    #[test]
    fn angles_straddling_zero_are_reported_in_0_360() {
        // Draws from 356 to 4 deg through 0: median 0 (or 360), reported as
        // a value in [0, 360) with errors of about 2.7 deg either side.
        let values: Vec<f64> = (0..=80).map(|k| (356.0 + 0.1 * k as f64) % 360.0).collect();
        let s = summary_of(&values, ParameterKind::Angle { period_deg: 360.0 });
        let text = latex_value(&s);
        let median: f64 = text
            .trim_start_matches('$')
            .split('^')
            .next()
            .unwrap()
            .parse()
            .unwrap();
        assert!((0.0..360.0).contains(&median), "{text}");
        assert!(!(0.05..=359.95).contains(&median), "{text}");
        assert!(text.contains("^{+2.7}_{-2.7}"), "{text}");
        // An angle near 359.9 stays there rather than becoming -0.1.
        let s = summary_of(
            &[359.8, 359.9, 360.0 - 1e-3],
            ParameterKind::Angle { period_deg: 360.0 },
        );
        assert!(latex_value(&s).starts_with("$359.9"), "{}", latex_value(&s));
    }

    #[test]
    fn one_column_per_group_with_its_weight() {
        let rows = [ElementRow {
            symbol: "P".into(),
            unit: "yr".into(),
            kind: ParameterKind::Linear,
            values: vec![10.0, 10.1, 9.9, 20.0, 20.2, 19.8, 20.1, 19.9],
        }];
        let groups = [0, 0, 0, 1, 1, 1, 1, 1];
        let text = latex_elements_table("test", &rows, Some(&groups)).unwrap();
        assert!(
            text.contains("Mode 1 (weight 0.38) & Mode 2 (weight 0.62)"),
            "{text}"
        );
        assert!(text.contains("\\begin{tabular}{llcc}"), "{text}");
        let single = latex_elements_table("test", &rows, None).unwrap();
        assert!(single.contains("Element & Unit & Value"), "{single}");
        assert!(latex_elements_table("test", &rows, Some(&groups[..3])).is_err());
    }

    #[test]
    fn residual_rows_fill_the_measured_form_only_and_quote_sources() {
        let row = AstrometryResidualRow {
            t_jd: 2451545.0,
            t_jyear: 2000.0,
            source: "speckle, \"4 m\"".into(),
            form: MeasuredForm::Cartesian,
            observed: [10.0, 20.0],
            model: [9.0, 21.0],
            residual: [1.0, -1.0],
            error: [2.0, 4.0],
            chi_square: 0.3125,
        };
        let cells = residual_cells(&row);
        assert_eq!(cells.len(), RESIDUAL_COLUMNS.len());
        assert_eq!(cells[2], "speckle, \"4 m\"");
        assert_eq!(cells[3], "cartesian");
        assert!(cells[4..14].iter().all(String::is_empty));
        assert_eq!(&cells[14..19], ["10.0", "9.0", "1.0", "2.0", "0.5"]);
        assert_eq!(cells[23], "-0.25");
        // Written with the source quoted as RFC 4180 says.
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("residuals.csv");
        write_astrometry_residuals_csv(&path, &[row]).unwrap();
        let text = std::fs::read_to_string(&path).unwrap();
        let line = text.lines().nth(1).unwrap();
        assert!(
            line.starts_with("2451545.0,2000.0,\"speckle, \"\"4 m\"\"\",cartesian,,"),
            "{line}"
        );
        assert!(text.ends_with(",0.3125\n"), "{text}");
    }
}
