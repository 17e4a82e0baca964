//! The one CSV dialect dyad writes: comma-separated, `\n` line ends, a
//! field quoted only when it needs it (RFC 4180 quoting, by the `csv`
//! crate), every record of a table the same length.
//!
//! Tables that go to a file as a stream take [`writer`]; small tables that
//! are assembled in memory first (and then written atomically with their
//! siblings) take [`CsvText`].

use std::io::Write;

/// A CSV writer in dyad's dialect over `w`.
pub fn writer<W: Write>(w: W) -> csv::Writer<W> {
    csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(w)
}

/// A CSV table assembled in memory, optionally after a preamble of comment
/// lines (which the readers of dyad skip).
pub struct CsvText {
    writer: csv::Writer<Vec<u8>>,
}

impl CsvText {
    /// An empty table.
    pub fn new() -> Self {
        Self::with_preamble("")
    }

    /// A table that starts with `preamble` verbatim (e.g. `"# comment\n"`).
    pub fn with_preamble(preamble: &str) -> Self {
        Self {
            writer: writer(preamble.as_bytes().to_vec()),
        }
    }

    /// Writes one record. Fails if its length differs from the first
    /// record's.
    pub fn record<I, T>(&mut self, fields: I) -> Result<(), csv::Error>
    where
        I: IntoIterator<Item = T>,
        T: AsRef<str>,
    {
        self.writer
            .write_record(fields.into_iter().map(|f| f.as_ref().to_owned()))
    }

    /// Writes one field of the current record.
    pub fn field(&mut self, field: impl AsRef<str>) -> Result<(), csv::Error> {
        self.writer.write_field(field.as_ref())
    }

    /// Ends the current record (after [`Self::field`] calls).
    pub fn end_record(&mut self) -> Result<(), csv::Error> {
        self.writer.write_record(None::<&[u8]>)
    }

    /// The text of the table.
    pub fn finish(self) -> Result<String, csv::Error> {
        let bytes = self
            .writer
            .into_inner()
            .map_err(|e| csv::Error::from(e.into_error()))?;
        // Every field and the preamble were `str`, so the bytes are UTF-8.
        Ok(String::from_utf8_lossy(&bytes).into_owned())
    }
}

impl Default for CsvText {
    fn default() -> Self {
        Self::new()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plain_fields_are_written_as_they_are_and_others_quoted() {
        // RFC 4180 (Shafranovich 2005), sec. 2: fields holding a comma, a
        // double quote or a line break are enclosed in double quotes, and a
        // double quote inside is doubled.
        let mut t = CsvText::with_preamble("# note\n");
        t.record(["a", "b", "c"]).expect("in memory");
        t.field("1.5").expect("in memory");
        t.field("x,y").expect("in memory");
        t.field("say \"hi\"").expect("in memory");
        t.end_record().expect("in memory");
        assert_eq!(
            t.finish().expect("in memory"),
            "# note\na,b,c\n1.5,\"x,y\",\"say \"\"hi\"\"\"\n"
        );
    }

    #[test]
    fn records_of_unequal_length_are_refused() {
        let mut t = CsvText::new();
        t.record(["a", "b"]).expect("in memory");
        assert!(t.record(["1"]).is_err());
    }
}
