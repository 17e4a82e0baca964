//! Reading the fields of data rows: numbers, uncertainties, epochs and
//! correlations, each checked, every error naming line and column.

use std::path::Path;

use dyad_orbit::time::TimeScale;

use super::header::Header;
use super::records::Record;
use super::{EARLIEST_PLAUSIBLE_JD, LATEST_PLAUSIBLE_JD, SMALLEST_ERROR};
use crate::error::ModelError;

/// Context for reading the fields of one data row.
pub(super) struct Row<'a> {
    pub(super) file: &'a Path,
    pub(super) header: &'a Header,
    pub(super) record: &'a Record,
}

impl Row<'_> {
    pub(super) fn error(&self, index: usize, message: String) -> ModelError {
        ModelError::at(
            self.file,
            Some(self.record.line),
            Some(&self.header.names[index]),
            message,
        )
    }

    pub(super) fn text(&self, index: usize) -> &str {
        &self.record.fields[index]
    }

    /// A finite number.
    pub(super) fn number(&self, index: usize) -> Result<f64, ModelError> {
        let text = self.text(index);
        if text.is_empty() {
            return Err(self.error(index, "empty value; a number is needed".to_owned()));
        }
        let value: f64 = text
            .parse()
            .map_err(|_| self.error(index, format!("'{text}' is not a number")))?;
        if !value.is_finite() {
            return Err(self.error(index, format!("'{text}' is not a finite number")));
        }
        Ok(value)
    }

    /// A strictly positive number (an uncertainty).
    pub(super) fn positive(&self, index: usize) -> Result<f64, ModelError> {
        let value = self.number(index)?;
        if value <= 0.0 {
            return Err(self.error(index, format!("an error must be positive, got {value}")));
        }
        if value < SMALLEST_ERROR {
            return Err(self.error(
                index,
                format!("an error of {value} is implausibly small (below {SMALLEST_ERROR:e} in the column's unit)"),
            ));
        }
        Ok(value)
    }

    /// The epoch as a Julian Date, checked for plausibility.
    pub(super) fn epoch(&self) -> Result<f64, ModelError> {
        let (index, scale) = self.header.time;
        let value = self.number(index)?;
        let jd = scale.to_jd(value);
        if !(EARLIEST_PLAUSIBLE_JD..=LATEST_PLAUSIBLE_JD).contains(&jd) {
            let year = TimeScale::JulianYear.from_jd(jd);
            return Err(self.error(
                index,
                format!(
                    "time {value} ({}) is JD {jd:.1}, about year {year:.0}; expected {} between \
                     {:.1} and {:.1} (years 1000 to 3000); is this the right time column name?",
                    scale.column_name(),
                    scale.column_name(),
                    scale.from_jd(EARLIEST_PLAUSIBLE_JD),
                    scale.from_jd(LATEST_PLAUSIBLE_JD),
                ),
            ));
        }
        Ok(jd)
    }

    /// An error correlation in (-1, 1).
    pub(super) fn correlation(&self, index: usize) -> Result<f64, ModelError> {
        let value = self.number(index)?;
        if !(value > -1.0 && value < 1.0) {
            return Err(self.error(
                index,
                format!("a correlation must lie strictly between -1 and 1, got {value}"),
            ));
        }
        Ok(value)
    }
}

/// Checks that a row has exactly the header's number of fields.
pub(super) fn check_field_count(
    record: &Record,
    header: &Header,
    file: &Path,
) -> Result<(), ModelError> {
    let expected = header.names.len();
    let found = record.fields.len();
    if found == expected {
        return Ok(());
    }
    let (column, detail) = if found < expected {
        (
            Some(header.names[found].as_str()),
            format!("the row ends before column '{}'", header.names[found]),
        )
    } else {
        (None, "the row has extra fields".to_owned())
    };
    Err(ModelError::at(
        file,
        Some(record.line),
        column,
        format!(
            "expected {expected} fields ({}), found {found}: {detail}",
            header.names.join(", ")
        ),
    ))
}

/// Header and data rows of a file, or an error for an empty file.
pub(super) fn header_and_rows<'a>(
    records: &'a [Record],
    file: &Path,
    example: &str,
) -> Result<(&'a Record, &'a [Record]), ModelError> {
    records.split_first().ok_or_else(|| {
        ModelError::at(
            file,
            None,
            None,
            format!(
                "the file has no header and no data; expected a header line such as '{example}'"
            ),
        )
    })
}

/// Refuses a file with a (valid) header but no data rows.
pub(super) fn require_rows(
    rows: &[Record],
    header: &Header,
    file: &Path,
) -> Result<(), ModelError> {
    if rows.is_empty() {
        return Err(ModelError::at(
            file,
            Some(header.line),
            None,
            "the file has a header but no data rows".to_owned(),
        ));
    }
    Ok(())
}
