//! Splitting a measurement file into records with the `csv` crate, which
//! handles the byte-order mark, CRLF line ends, comment lines and quoting;
//! here each record gets its 1-based line number and the rules of our
//! format are applied (module docs of [`super`]).

use std::path::Path;

use crate::error::ModelError;

/// One non-blank, non-comment line split into trimmed fields.
pub(super) struct Record {
    /// 1-based line number.
    pub(super) line: usize,
    pub(super) fields: Vec<String>,
}

/// Splits a file into records, skipping blank and comment lines.
pub(super) fn records(original: &[u8], file: &Path) -> Result<Vec<Record>, ModelError> {
    let normalised = blanks_before_quotes_removed(original);
    let bytes = normalised.as_slice();
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .comment(Some(b'#'))
        .from_reader(bytes);
    let mut out = Vec::new();
    let mut record = csv::ByteRecord::new();
    // Newlines counted so far: (offset, line at that offset).
    let mut counted = (0, 1);
    let mut line_at = |offset: usize| {
        let (from, line) = counted;
        let line = line + bytes[from..offset].iter().filter(|&&b| b == b'\n').count();
        counted = (offset, line);
        line
    };
    loop {
        let more = reader.read_byte_record(&mut record).map_err(|e| {
            // Reading from memory fails only on what csv cannot parse.
            ModelError::at(file, None, None, format!("not readable as CSV: {e}"))
        })?;
        if !more {
            break;
        }
        // A record's position is where the reader stood before it, ahead
        // of any empty or comment lines that csv skipped.
        let start = record.position().map_or(0, |p| p.byte() as usize);
        let line = first_line(bytes, start, line_at(start));
        let inner_breaks = record
            .iter()
            .any(|f| f.contains(&b'\n') || f.contains(&b'\r'));
        let first = record.get(0).unwrap_or_default().trim_ascii();
        // Blank lines, and comments indented by blanks (csv sees only `#`
        // at the start of a line).
        if (record.len() == 1 && first.is_empty()) || first.starts_with(b"#") {
            continue;
        }
        if inner_breaks {
            return Err(ModelError::at(
                file,
                Some(line),
                None,
                "a quote opened on this line is never closed on it (a record is one line)",
            ));
        }
        let mut fields = Vec::with_capacity(record.len());
        for field in &record {
            let text = std::str::from_utf8(field).map_err(|_| not_utf8(file, line, original))?;
            fields.push(text.trim().to_owned());
        }
        out.push(Record { line, fields });
    }
    Ok(out)
}

/// The line of the first record at or after `offset` (on line `line`):
/// csv skips a byte-order mark, empty lines and lines starting with `#`.
fn first_line(bytes: &[u8], mut offset: usize, mut line: usize) -> usize {
    if offset == 0 && bytes.starts_with(BOM) {
        offset = BOM.len();
    }
    loop {
        match bytes.get(offset) {
            Some(b'\n') => line += 1,
            Some(b'\r') => {}
            Some(b'#') => match bytes[offset..].iter().position(|&b| b == b'\n') {
                Some(k) => {
                    offset += k;
                    line += 1;
                }
                None => return line,
            },
            _ => return line,
        }
        offset += 1;
    }
}

const BOM: &[u8] = b"\xEF\xBB\xBF";

/// The text with the blanks between a comma (or the start of a line) and an
/// opening quote removed, everything else kept byte for byte.
///
/// csv (like RFC 4180) reads a quote only as the very first byte of a field,
/// while hand-aligned files often write `2000.5, "speckle, 4 m"`; without
/// this the quote would be read as text and the comma inside it would split
/// the field.
fn blanks_before_quotes_removed(bytes: &[u8]) -> Vec<u8> {
    #[derive(Clone, Copy, PartialEq)]
    enum State {
        LineStart,
        FieldStart,
        Comment,
        Unquoted,
        Quoted,
        /// Just after a quote inside quotes: closed, or the first of `""`.
        QuoteInQuotes,
    }
    let mut out = Vec::with_capacity(bytes.len());
    let mut state = State::LineStart;
    // Blanks at the start of a field, kept unless a quote follows.
    let mut blanks = 0..0;
    for (k, &b) in bytes.iter().enumerate() {
        let at_field_start = matches!(state, State::LineStart | State::FieldStart);
        if at_field_start && (b == b' ' || b == b'\t') {
            if blanks.is_empty() {
                blanks = k..k;
            }
            blanks.end = k + 1;
            continue;
        }
        if !(at_field_start && b == b'"') {
            out.extend_from_slice(&bytes[blanks.clone()]);
        }
        blanks = 0..0;
        state = match (state, b) {
            (State::LineStart, b'#') | (State::Comment, _) if b != b'\n' => State::Comment,
            (State::LineStart | State::FieldStart, b'"') | (State::QuoteInQuotes, b'"') => {
                State::Quoted
            }
            (State::Quoted, b'"') => State::QuoteInQuotes,
            (State::Quoted, _) => State::Quoted,
            (_, b'\n' | b'\r') => State::LineStart,
            (_, b',') => State::FieldStart,
            _ => State::Unquoted,
        };
        out.push(b);
    }
    out.extend_from_slice(&bytes[blanks]);
    out
}

/// The error for line `line` of `bytes` that is not UTF-8, naming the
/// first bad byte.
fn not_utf8(file: &Path, line: usize, bytes: &[u8]) -> ModelError {
    let raw = bytes
        .split(|&b| b == b'\n')
        .nth(line - 1)
        .unwrap_or_default();
    let raw = raw.strip_prefix(BOM).unwrap_or(raw);
    let position = std::str::from_utf8(raw)
        .err()
        .map_or(1, |e| e.valid_up_to() + 1);
    ModelError::at(
        file,
        Some(line),
        None,
        format!(
            "not valid UTF-8 text (bad byte at position {position} of the line); save the file as UTF-8"
        ),
    )
}
