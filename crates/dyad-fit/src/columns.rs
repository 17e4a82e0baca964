//! Measurements given as named columns of values (a binding's arrays or
//! data frames) into a [`Dataset`], under exactly the rules of the
//! measurement files.
//!
//! The columns are the files' columns, by the same names and units
//! (`jyear`, `sep_mas`, `pa_deg`, ..., `rv_kms`, `star`, `instrument`; see
//! `dyad_model::load`). Each table is written as CSV text in memory and
//! read by the file loader, so that the checks (finite numbers, positive
//! errors, position angles in [0, 360), plausible epochs, correlations in
//! (-1, 1), known column names and units) and the unit conversions are one
//! code for files and arrays. Numbers are written in Rust's shortest
//! round-trip form, so every value is read back to the same bits: a fit of
//! arrays and a fit of the files they came from see the same data.
//!
//! A problem is a [`ColumnError`] naming the argument (`"astrometry"`,
//! `"velocities"`), the column and the 0-based index of the value.

use std::fmt::Write as _;
use std::path::Path;

use dyad_model::data::Dataset;
use dyad_model::error::ModelError;
use dyad_model::load::{load_astrometry_from_reader, load_velocities_from_reader};

/// The values of one column.
#[derive(Debug, Clone, PartialEq)]
pub enum Column {
    /// Numbers (epochs, separations, errors, ...).
    Numbers(Vec<f64>),
    /// Text (`star`, `instrument`, `source`).
    Texts(Vec<String>),
}

impl Column {
    /// The number of values.
    pub fn len(&self) -> usize {
        match self {
            Column::Numbers(v) => v.len(),
            Column::Texts(v) => v.len(),
        }
    }

    /// Whether the column has no values.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// A table of named columns, in the caller's order.
pub type Columns = [(String, Column)];

/// A problem with a value (or a whole column) of a table.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{}: {message}", self.place())]
pub struct ColumnError {
    /// The table: `"astrometry"` or `"velocities"`.
    pub argument: String,
    /// The column, when the problem is in one.
    pub column: Option<String>,
    /// The 0-based index of the value, when the problem is in one.
    pub index: Option<usize>,
    /// What is wrong.
    pub message: String,
}

impl ColumnError {
    /// A problem of `argument`, at `column` and `index` when given.
    pub fn new(
        argument: &str,
        column: Option<&str>,
        index: Option<usize>,
        message: impl Into<String>,
    ) -> Self {
        Self {
            argument: argument.to_owned(),
            column: column.map(str::to_owned),
            index,
            message: message.into(),
        }
    }

    /// `astrometry['sep_err_mas'][3]`, `velocities['star']` or `astrometry`.
    pub fn place(&self) -> String {
        let mut place = self.argument.clone();
        if let Some(column) = &self.column {
            let _ = write!(place, "['{column}']");
        }
        if let Some(index) = self.index {
            let _ = write!(place, "[{index}]");
        }
        place
    }
}

/// The measurements of an astrometry table and a velocity table (either
/// may be absent, not both).
pub fn dataset_from_columns(
    astrometry: Option<&Columns>,
    velocities: Option<&Columns>,
) -> Result<Dataset, ColumnError> {
    if astrometry.is_none() && velocities.is_none() {
        return Err(ColumnError::new(
            "astrometry",
            None,
            None,
            "no measurements: give astrometry, velocities, or both",
        ));
    }
    let mut dataset = Dataset::default();
    if let Some(table) = astrometry {
        let text = csv_text("astrometry", table)?;
        dataset.astrometry = load_astrometry_from_reader(text.as_bytes(), Path::new("astrometry"))
            .map_err(|e| placed("astrometry", e))?;
    }
    if let Some(table) = velocities {
        let text = csv_text("velocities", table)?;
        dataset.velocities = load_velocities_from_reader(
            text.as_bytes(),
            Path::new("velocities"),
            &mut dataset.instruments,
        )
        .map_err(|e| placed("velocities", e))?;
    }
    Ok(dataset)
}

/// The table as CSV: a header of the column names, then one line per
/// index. Number columns come first, so that no line starts with a text
/// that the loader could take for a comment; texts are quoted.
fn csv_text(argument: &str, table: &Columns) -> Result<String, ColumnError> {
    let Some((first_name, first)) = table.first() else {
        return Err(ColumnError::new(
            argument,
            None,
            None,
            "no columns: give a time column and the measurement columns",
        ));
    };
    let rows = first.len();
    for (name, column) in table {
        if name.trim().is_empty() || name.contains([',', '"', '\n', '\r']) {
            return Err(ColumnError::new(
                argument,
                Some(name),
                None,
                "not a column name",
            ));
        }
        if column.len() != rows {
            return Err(ColumnError::new(
                argument,
                Some(name),
                None,
                format!(
                    "has {} values but '{first_name}' has {rows}: every column needs one value per measurement",
                    column.len()
                ),
            ));
        }
    }
    let mut order: Vec<&(String, Column)> = table.iter().collect();
    order.sort_by_key(|(_, c)| matches!(c, Column::Texts(_)));
    let mut text = String::new();
    let names: Vec<&str> = order.iter().map(|(n, _)| n.as_str()).collect();
    text.push_str(&names.join(","));
    text.push('\n');
    for row in 0..rows {
        for (k, (_, column)) in order.iter().enumerate() {
            if k > 0 {
                text.push(',');
            }
            match column {
                // `{}` of an f64 is the shortest text that parses back to it
                // ("NaN" and "inf" are refused by the loader as not finite).
                Column::Numbers(v) => {
                    let _ = write!(text, "{}", v[row]);
                }
                Column::Texts(v) => {
                    text.push('"');
                    text.push_str(&v[row].replace('"', "\"\""));
                    text.push('"');
                }
            }
        }
        text.push('\n');
    }
    Ok(text)
}

/// The loader's error for the table's CSV text, placed by column and
/// index (line 1 is the header, line 2 the value of index 0).
fn placed(argument: &str, error: ModelError) -> ColumnError {
    match error {
        ModelError::Input { location, message } => {
            let index = location.line.filter(|&l| l >= 2).map(|l| l - 2);
            ColumnError {
                argument: argument.to_owned(),
                column: location.column,
                index,
                message: message.replace("the file has", "the table has"),
            }
        }
        other => ColumnError::new(argument, None, None, other.to_string()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use dyad_model::data::{RelativePosition, Star};

    fn numbers(name: &str, v: &[f64]) -> (String, Column) {
        (name.to_owned(), Column::Numbers(v.to_vec()))
    }

    fn texts(name: &str, v: &[&str]) -> (String, Column) {
        (
            name.to_owned(),
            Column::Texts(v.iter().map(|s| s.to_string()).collect()),
        )
    }

    fn polar(sep_err: &[f64]) -> Vec<(String, Column)> {
        vec![
            numbers("jyear", &[2001.5, 2003.25]),
            numbers("sep_mas", &[120.0, 0.1 + 0.2]),
            numbers("sep_err_mas", sep_err),
            numbers("pa_deg", &[10.0, 359.999_999_999_999_94]),
            numbers("pa_err_deg", &[0.5, 0.5]),
        ]
    }

    #[test]
    fn values_are_read_back_to_the_same_bits_with_the_files_unit_conversions() {
        let data = dataset_from_columns(Some(&polar(&[1.0, 2.0])), None).unwrap();
        let RelativePosition::Polar {
            sep_mas, pa_rad, ..
        } = data.astrometry[1].position
        else {
            panic!("polar")
        };
        assert_eq!(sep_mas.to_bits(), (0.1_f64 + 0.2).to_bits());
        // The loader's factor for degrees (dyad_orbit::constants::DEG).
        let expected = 359.999_999_999_999_94 * dyad_orbit::constants::DEG;
        assert_eq!(pa_rad.to_bits(), expected.to_bits());
        // J2000.0 = JD 2451545.0, 365.25 d per Julian year (IAU; common practice).
        assert_eq!(data.astrometry[0].t_jd, 2_451_545.0 + 1.5 * 365.25);
    }

    #[test]
    fn a_bad_value_is_named_by_argument_column_and_index() {
        let err = dataset_from_columns(Some(&polar(&[1.0, -2.0])), None).unwrap_err();
        assert_eq!(err.place(), "astrometry['sep_err_mas'][1]");
        assert!(err.message.contains("positive"), "{err}");
        let err = dataset_from_columns(Some(&polar(&[f64::NAN, 2.0])), None).unwrap_err();
        assert_eq!(err.place(), "astrometry['sep_err_mas'][0]");
    }

    #[test]
    fn mismatched_lengths_and_unknown_columns_are_refused() {
        let err = dataset_from_columns(Some(&polar(&[1.0])), None).unwrap_err();
        assert_eq!(err.place(), "astrometry['sep_err_mas']");
        let mut table = polar(&[1.0, 1.0]);
        table.push(numbers("sep_errr_mas", &[1.0, 1.0]));
        let err = dataset_from_columns(Some(&table), None).unwrap_err();
        assert_eq!(err.column.as_deref(), Some("sep_errr_mas"), "{err}");
        assert_eq!(err.index, None);
    }

    #[test]
    fn velocities_with_texts_that_need_quoting_are_read() {
        let table = vec![
            texts("star", &["primary", "Secondary"]),
            texts("instrument", &["echelle, \"blue\" arm", "# hash"]),
            numbers("jd", &[2_455_000.5, 2_455_001.5]),
            numbers("rv_kms", &[-3.25, 4.0]),
            numbers("rv_err_kms", &[0.1, 0.2]),
        ];
        let data = dataset_from_columns(None, Some(&table)).unwrap();
        assert_eq!(data.velocities[1].star, Star::Secondary);
        assert_eq!(data.instruments, ["echelle, \"blue\" arm", "# hash"]);
        let mut bad = table.clone();
        bad[0] = texts("star", &["primary", "tertiary"]);
        let err = dataset_from_columns(None, Some(&bad)).unwrap_err();
        assert_eq!(err.place(), "velocities['star'][1]");
    }
}
