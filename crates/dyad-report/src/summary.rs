//! Summary writers: plain text, Markdown and JSON, plus the samples CSV.
//! Every writer is atomic (see [`crate::atomic`]).

use crate::atomic::write_atomically;
use crate::error::ReportError;
use crate::input::{ParameterKind, PosteriorDraws, RunMetadata};
use crate::stats::{ParameterSummary, PosteriorSummary};
use std::fmt::Write as _;
use std::path::Path;

/// Number of decimals that give the smaller 68 % half-width two significant
/// digits (common practice for quoting uncertainties), capped to [0, 10].
pub(crate) fn decimals_for(p: &ParameterSummary) -> Option<usize> {
    let err = p.minus68().min(p.plus68());
    if !(err.is_finite() && err > 0.0) {
        return None;
    }
    let d = 1 - err.log10().floor() as i64;
    Some(d.clamp(0, 10) as usize)
}

/// Whether a parameter did not vary across the draws (a fixed prior, or a
/// quantity computed from fixed ones only): its interval is shown as
/// "fixed", not as "-0 +0".
pub(crate) fn is_fixed(p: &ParameterSummary) -> bool {
    let width = p.q95[1] - p.q95[0];
    p.n_finite > 0 && width.abs() <= 1e-12 * p.median.abs().max(1e-300)
}

/// `v` as reported: angles wrapped into [0, period) (the statistics keep
/// a contiguous window that may cross 0; see [`crate::stats`]), other
/// values unchanged.
pub(crate) fn reported(p: &ParameterSummary, v: f64) -> f64 {
    match p.info.kind {
        ParameterKind::Angle { period_deg } => {
            let w = v.rem_euclid(period_deg);
            // rem_euclid can round up to the period itself.
            if w >= period_deg {
                0.0
            } else {
                w
            }
        }
        ParameterKind::Linear => v,
    }
}

/// Formats `v` for a table with the decimals chosen for its parameter.
pub(crate) fn fmt_value(v: f64, decimals: Option<usize>) -> String {
    if !v.is_finite() {
        return format!("{v}");
    }
    let a = v.abs();
    match decimals {
        _ if a >= 1e7 => format!("{v:.4e}"),
        Some(d) if a != 0.0 && a < 1e-4 && d > 8 => format!("{v:.3e}"),
        Some(d) => format!("{v:.d$}"),
        None => {
            if a != 0.0 && a < 1e-3 {
                format!("{v:.4e}")
            } else {
                // Four significant digits.
                let d = (3 - a.log10().floor() as i64).clamp(0, 10) as usize;
                format!("{v:.d$}")
            }
        }
    }
}

/// The formatted cells of one parameter row.
struct Row {
    name: String,
    unit: String,
    median: String,
    minus: String,
    plus: String,
    interval95: String,
    map: String,
}

fn row_of(p: &ParameterSummary) -> Row {
    let d = decimals_for(p);
    let w = |v: f64| fmt_value(reported(p, v), d);
    let unit = if p.info.unit.is_empty() {
        "-".to_string()
    } else {
        p.info.unit.clone()
    };
    if is_fixed(p) {
        return Row {
            name: p.info.name.clone(),
            unit,
            median: w(p.median),
            minus: "fixed".to_string(),
            plus: String::new(),
            interval95: "fixed".to_string(),
            map: w(p.map),
        };
    }
    Row {
        name: p.info.name.clone(),
        unit,
        median: w(p.median),
        minus: format!("-{}", fmt_value(p.minus68(), d)),
        plus: format!("+{}", fmt_value(p.plus68(), d)),
        interval95: format!("[{}, {}]", w(p.q95[0]), w(p.q95[1])),
        map: w(p.map),
    }
}

const HEADERS: [&str; 7] = [
    "parameter",
    "unit",
    "median",
    "-68%",
    "+68%",
    "95% interval",
    "MAP",
];

fn row_cells(r: &Row) -> [&str; 7] {
    [
        &r.name,
        &r.unit,
        &r.median,
        &r.minus,
        &r.plus,
        &r.interval95,
        &r.map,
    ]
}

/// Renders the plain-text summary.
pub fn text_summary(meta: &RunMetadata, summary: &PosteriorSummary) -> String {
    let mut out = String::new();
    let title = if meta.title.is_empty() {
        "dyad run summary"
    } else {
        &meta.title
    };
    out.push_str(title);
    out.push('\n');
    out.push_str(&"=".repeat(title.chars().count()));
    out.push('\n');
    let key_width = meta
        .entries
        .iter()
        .map(|(k, _)| k.chars().count())
        .max()
        .unwrap_or(0);
    for (k, v) in &meta.entries {
        out.push_str(&format!("{k:<key_width$} : {v}\n"));
    }
    out.push_str(&format!(
        "\nPosterior from {} draws; MAP = draw {} (log-posterior {:.4}).\n",
        summary.n_draws, summary.map_draw, summary.map_log_posterior
    ));
    out.push_str("Intervals are equal-tailed (68 %: 16th-84th, 95 %: 2.5th-97.5th percentile);\n");
    out.push_str(&format!("quantiles: {}.\n", summary.quantile_rule));
    out.push_str(
        "Angles are summarised on the circle (window centred on the circular mean) and reported\n\
         in [0, period): an interval written [350, 10] runs through 0.\n\n",
    );

    out.push_str(&text_parameter_table(summary));
    out
}

/// The parameter table of the plain-text summary alone (one row per
/// parameter: median, 68 % errors, 95 % interval, MAP), e.g. for a block
/// per period mode.
pub fn text_parameter_table(summary: &PosteriorSummary) -> String {
    let mut out = String::new();
    let rows: Vec<Row> = summary.parameters.iter().map(row_of).collect();
    let mut widths: [usize; 7] = HEADERS.map(|h| h.chars().count());
    for r in &rows {
        for (w, c) in widths.iter_mut().zip(row_cells(r)) {
            *w = (*w).max(c.chars().count());
        }
    }
    let line = |cells: [&str; 7]| -> String {
        let mut s = String::new();
        for (i, (c, w)) in cells.iter().zip(widths).enumerate() {
            if i > 0 {
                s.push_str("  ");
            }
            // Names left-aligned, numbers right-aligned.
            if i < 2 {
                s.push_str(&format!("{c:<w$}"));
            } else {
                s.push_str(&format!("{c:>w$}"));
            }
        }
        s.trim_end().to_string() + "\n"
    };
    out.push_str(&line(HEADERS));
    let total: usize = widths.iter().sum::<usize>() + 2 * (widths.len() - 1);
    out.push_str(&"-".repeat(total));
    out.push('\n');
    for r in &rows {
        out.push_str(&line(row_cells(r)));
    }
    out
}

/// Escapes the characters that would break a Markdown table cell.
fn md_cell(s: &str) -> String {
    s.replace('|', "\\|").replace('\n', " ")
}

/// Renders the Markdown summary.
pub fn markdown_summary(meta: &RunMetadata, summary: &PosteriorSummary) -> String {
    let mut out = String::new();
    let title = if meta.title.is_empty() {
        "dyad run summary"
    } else {
        &meta.title
    };
    out.push_str(&format!("# {}\n\n", md_cell(title)));
    for (k, v) in &meta.entries {
        out.push_str(&format!("- **{}**: {}\n", md_cell(k), md_cell(v)));
    }
    if !meta.entries.is_empty() {
        out.push('\n');
    }
    out.push_str(&format!(
        "Posterior from {} draws; MAP is draw {} (log-posterior {:.4}). \
         Intervals are equal-tailed (68 %: 16th–84th, 95 %: 2.5th–97.5th percentile; {}). \
         Angles are summarised on the circle and reported in [0, period): an interval \
         written [350, 10] runs through 0.\n\n",
        summary.n_draws, summary.map_draw, summary.map_log_posterior, summary.quantile_rule
    ));
    out.push_str(&markdown_parameter_table(summary));
    out
}

/// The parameter table of the Markdown summary alone.
pub fn markdown_parameter_table(summary: &PosteriorSummary) -> String {
    let mut out = String::new();
    out.push_str("| Parameter | Unit | Median | −68% | +68% | 95% interval | MAP |\n");
    out.push_str("|:--|:--|--:|--:|--:|--:|--:|\n");
    for p in &summary.parameters {
        let r = row_of(p);
        out.push_str(&format!(
            "| {} | {} | {} | {} | {} | {} | {} |\n",
            md_cell(&r.name),
            md_cell(&r.unit),
            r.median,
            r.minus.replacen('-', "−", 1),
            r.plus,
            r.interval95,
            r.map
        ));
    }
    out
}

/// Builds the JSON summary document.
pub fn json_summary(
    meta: &RunMetadata,
    summary: &PosteriorSummary,
    diagnostics: &serde_json::Value,
) -> Result<serde_json::Value, ReportError> {
    let metadata: Vec<serde_json::Value> = meta
        .entries
        .iter()
        .map(|(k, v)| serde_json::json!({ "key": k, "value": v }))
        .collect();
    Ok(serde_json::json!({
        "title": meta.title,
        "metadata": metadata,
        "n_draws": summary.n_draws,
        "map_draw": summary.map_draw,
        "map_log_posterior": summary.map_log_posterior,
        "quantile_rule": summary.quantile_rule,
        "parameters": serde_json::to_value(&summary.parameters)?,
        "diagnostics": diagnostics,
    }))
}

fn write_string(path: &Path, content: &str) -> Result<(), ReportError> {
    write_atomically(path, |w| {
        w.write_all(content.as_bytes())
            .map_err(|e| ReportError::io(path, e))
    })
}

/// Writes the plain-text summary to `path` (atomically).
pub fn write_text_summary(
    path: &Path,
    meta: &RunMetadata,
    summary: &PosteriorSummary,
) -> Result<(), ReportError> {
    write_string(path, &text_summary(meta, summary))
}

/// Writes the Markdown summary to `path` (atomically).
pub fn write_markdown_summary(
    path: &Path,
    meta: &RunMetadata,
    summary: &PosteriorSummary,
) -> Result<(), ReportError> {
    write_string(path, &markdown_summary(meta, summary))
}

/// Writes the JSON summary to `path` (atomically). Non-finite numbers
/// become `null` (JSON has no NaN).
pub fn write_json_summary(
    path: &Path,
    meta: &RunMetadata,
    summary: &PosteriorSummary,
    diagnostics: &serde_json::Value,
) -> Result<(), ReportError> {
    let doc = json_summary(meta, summary, diagnostics)?;
    let mut text = serde_json::to_string_pretty(&doc)?;
    text.push('\n');
    write_string(path, &text)
}

/// Writes the posterior samples CSV to `path` (atomically): a header of
/// [`crate::ParameterInfo::column_name`] columns followed by
/// `log_posterior`, then one row per draw. Floats use Rust's shortest
/// round-trip representation (full precision); non-finite values are written
/// `NaN`, `inf`, `-inf`, which pandas.read_csv parses as floats.
///
/// With `modes`, a last integer column `mode` holds each draw's mode number
/// (one per draw).
pub fn write_samples_csv(
    path: &Path,
    draws: &PosteriorDraws,
    modes: Option<&[usize]>,
) -> Result<(), ReportError> {
    draws.validate()?;
    if let Some(m) = modes {
        if m.len() != draws.n_draws() {
            return Err(ReportError::InvalidInput(format!(
                "{} mode labels for {} draws",
                m.len(),
                draws.n_draws()
            )));
        }
    }
    let mut names: Vec<String> = draws.params.iter().map(|p| p.column_name()).collect();
    names.push("log_posterior".to_string());
    if modes.is_some() {
        names.push("mode".to_string());
    }
    for (i, n) in names.iter().enumerate() {
        if n.is_empty() {
            return Err(ReportError::InvalidInput(format!(
                "parameter {i} has an empty column name"
            )));
        }
        if names[..i].contains(n) {
            return Err(ReportError::InvalidInput(format!(
                "duplicate column name {n}"
            )));
        }
    }
    let n_params = draws.n_params();
    write_atomically(path, |w| {
        let mut out = dyad_common::csv_table::writer(w);
        let csv = |e| ReportError::csv(path, e);
        out.write_record(&names).map_err(csv)?;
        // Debug formatting of f64 is the shortest string that parses back
        // to the same bits; one reused buffer keeps the per-row loop free of
        // allocations.
        let mut cell = String::with_capacity(24);
        for (d, lp) in draws.log_posterior.iter().enumerate() {
            for v in draws.values[d * n_params..(d + 1) * n_params]
                .iter()
                .chain([lp])
            {
                cell.clear();
                let _ = write!(cell, "{v:?}");
                out.write_field(&cell).map_err(csv)?;
            }
            if let Some(m) = modes {
                cell.clear();
                let _ = write!(cell, "{}", m[d]);
                out.write_field(&cell).map_err(csv)?;
            }
            out.write_record(None::<&[u8]>).map_err(csv)?;
        }
        out.flush().map_err(|e| ReportError::io(path, e))
    })
}
