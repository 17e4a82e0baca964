//! Loading and validating measurement files (CSV with a header whose column
//! names carry their units), converting to internal units: Julian Date,
//! radians, milliarcseconds, km/s.
//!
//! # Accepted columns
//!
//! Astrometry (one row per epoch):
//!
//! | column | meaning | stored as |
//! |---|---|---|
//! | `jd` \| `mjd` \| `jyear` \| `byear` | epoch (exactly one) | JD |
//! | `sep_mas` \| `sep_arcsec` | separation rho (>= 0) | mas |
//! | `sep_err_mas` \| `sep_err_arcsec` | its 1-sigma error (> 0) | mas |
//! | `pa_deg` | position angle, North through East, in [0, 360) | rad |
//! | `pa_err_deg` | its 1-sigma error, in (0, 180) | rad |
//! | `dra_mas`, `ddec_mas` | dRA* = dRA cos Dec (east), dDec (north) | mas |
//! | `dra_err_mas`, `ddec_err_mas` | their 1-sigma errors (> 0) | mas |
//! | `corr` (optional) | error correlation of the pair, in (-1, 1) | - |
//! | `source` (optional) | free text; may be empty | - |
//!
//! A file is either polar (all four `sep`/`pa` columns) or Cartesian (all four
//! `dra`/`ddec` columns), never a mix.
//!
//! Velocities (one row per measurement): one time column as above,
//! `rv_kms` | `rv_ms` (positive receding), `rv_err_kms` | `rv_err_ms` (> 0),
//! `star` (`primary` or `secondary`, any case) and `instrument` (non-empty text;
//! each distinct name gets its own offset and jitter).
//!
//! # Format rules chosen here
//! - Column names are matched case-insensitively, in any order; every column
//!   must be known (a typo is an error listing the accepted names, never
//!   silently ignored); a known quantity with an unknown unit suffix
//!   (`sep_deg`, `rv_mps`) is an error listing the accepted units.
//! - Lines whose first non-blank character is `#` are comments; blank lines are
//!   skipped; fields are trimmed; a field may be double-quoted (`"a, b"`, with
//!   `""` for a quote) but one record is one line. A UTF-8 byte-order mark and
//!   CRLF line ends are accepted. Comment lines need not be UTF-8; all others must.
//! - A position angle must lie in [0, 360) degrees: 360 and negative angles
//!   are refused rather than wrapped, because they usually mean a convention
//!   mix-up worth a look; `-0` is read as 0.
//! - Epochs must fall between the Julian epochs J1000.0 and J3000.0 (JD
//!   2086295.0 to 2816795.0): a value outside usually means the wrong time
//!   column name (e.g. MJD under `jd`).
//! - Uncertainties must be at least [`SMALLEST_ERROR`] (1e-9) in their
//!   column's unit.
//! - Every error names the file, the 1-based line and the column.

use std::io::Read;
use std::path::Path;

use dyad_orbit::constants::DEG;
use dyad_orbit::time::TimeScale;

use crate::data::{AstrometryEpoch, Dataset, RelativePosition, Star, VelocityPoint};
use crate::error::ModelError;

/// Earliest plausible epoch, JD: the Julian epoch J1000.0 (J2000.0 - 1000 Julian years).
pub const EARLIEST_PLAUSIBLE_JD: f64 = 2_086_295.0;
/// Latest plausible epoch, JD: the Julian epoch J3000.0.
pub const LATEST_PLAUSIBLE_JD: f64 = 2_816_795.0;

/// Smallest accepted uncertainty, in the unit of its column: anything
/// smaller is surely a typing mistake, and its inverse square would overflow
/// a likelihood.
pub const SMALLEST_ERROR: f64 = 1e-9;

/// Speed of light, km/s (SI definition), the bound on any radial velocity.
const SPEED_OF_LIGHT_KMS: f64 = 299_792.458;

/// Reads an astrometry file (see the module docs for the columns).
pub fn load_astrometry(path: &Path) -> Result<Vec<AstrometryEpoch>, ModelError> {
    let bytes = read_file(path)?;
    parse_astrometry(&bytes, path)
}

/// Reads astrometry from any reader; `file` is the name used in errors.
pub fn load_astrometry_from_reader<R: Read>(
    mut reader: R,
    file: &Path,
) -> Result<Vec<AstrometryEpoch>, ModelError> {
    let bytes = read_all(&mut reader, file)?;
    parse_astrometry(&bytes, file)
}

/// Reads a velocity file. Instrument names are interned into `instruments`
/// in order of first appearance (names already present are reused). On error
/// `instruments` is left unchanged.
pub fn load_velocities(
    path: &Path,
    instruments: &mut Vec<String>,
) -> Result<Vec<VelocityPoint>, ModelError> {
    let bytes = read_file(path)?;
    parse_velocities(&bytes, path, instruments)
}

/// Reads velocities from any reader; `file` is the name used in errors.
pub fn load_velocities_from_reader<R: Read>(
    mut reader: R,
    file: &Path,
    instruments: &mut Vec<String>,
) -> Result<Vec<VelocityPoint>, ModelError> {
    let bytes = read_all(&mut reader, file)?;
    parse_velocities(&bytes, file, instruments)
}

/// Loads one optional astrometry file and any number of velocity files into a
/// [`Dataset`]. At least one file must be given.
pub fn load_dataset(
    astrometry: Option<&Path>,
    velocities: &[&Path],
) -> Result<Dataset, ModelError> {
    if astrometry.is_none() && velocities.is_empty() {
        return Err(ModelError::InvalidModel(
            "no data files: give an astrometry file, velocity files, or both".to_owned(),
        ));
    }
    let mut dataset = Dataset::default();
    if let Some(path) = astrometry {
        dataset.astrometry = load_astrometry(path)?;
    }
    for path in velocities {
        let points = load_velocities(path, &mut dataset.instruments)?;
        dataset.velocities.extend(points);
    }
    Ok(dataset)
}

fn read_file(path: &Path) -> Result<Vec<u8>, ModelError> {
    std::fs::read(path).map_err(|source| ModelError::Io {
        path: path.to_owned(),
        source,
    })
}

fn read_all<R: Read>(reader: &mut R, file: &Path) -> Result<Vec<u8>, ModelError> {
    let mut bytes = Vec::new();
    reader
        .read_to_end(&mut bytes)
        .map_err(|source| ModelError::Io {
            path: file.to_owned(),
            source,
        })?;
    Ok(bytes)
}

// ---------------------------------------------------------------------------
// Lines and fields

/// One non-blank, non-comment line split into trimmed fields.
struct Record {
    /// 1-based line number.
    line: usize,
    fields: Vec<String>,
}

/// Splits a file into records, skipping blank and comment lines.
fn records(bytes: &[u8], file: &Path) -> Result<Vec<Record>, ModelError> {
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    let mut out = Vec::new();
    for (index, raw) in bytes.split(|&b| b == b'\n').enumerate() {
        let line = index + 1;
        let raw = raw.strip_suffix(b"\r").unwrap_or(raw);
        let trimmed = raw.trim_ascii();
        if trimmed.is_empty() || trimmed.starts_with(b"#") {
            continue;
        }
        let text = std::str::from_utf8(raw).map_err(|e| {
            ModelError::at(
                file,
                Some(line),
                None,
                format!(
                    "not valid UTF-8 text (bad byte at position {} of the line); save the file as UTF-8",
                    e.valid_up_to() + 1
                ),
            )
        })?;
        let fields = split_fields(text)
            .map_err(|message| ModelError::at(file, Some(line), None, message))?;
        out.push(Record { line, fields });
    }
    Ok(out)
}

/// Splits one line at commas, honouring double quotes, trimming each field.
fn split_fields(text: &str) -> Result<Vec<String>, String> {
    let mut fields = Vec::new();
    let mut chars = text.chars().peekable();
    loop {
        // Skip leading blanks of the field.
        while chars.peek().is_some_and(|c| c.is_whitespace()) {
            chars.next();
        }
        let mut field = String::new();
        if chars.peek() == Some(&'"') {
            chars.next();
            loop {
                match chars.next() {
                    Some('"') if chars.peek() == Some(&'"') => {
                        chars.next();
                        field.push('"');
                    }
                    Some('"') => break,
                    Some(c) => field.push(c),
                    None => {
                        return Err(format!(
                            "field {} opens a quote that is never closed",
                            fields.len() + 1
                        ))
                    }
                }
            }
            while chars.peek().is_some_and(|c| c.is_whitespace()) {
                chars.next();
            }
            match chars.next() {
                None => {
                    fields.push(field);
                    return Ok(fields);
                }
                Some(',') => fields.push(field),
                Some(c) => {
                    return Err(format!(
                        "unexpected '{c}' after the closing quote of field {}",
                        fields.len() + 1
                    ))
                }
            }
        } else {
            loop {
                match chars.next() {
                    None => {
                        fields.push(field.trim_end().to_owned());
                        return Ok(fields);
                    }
                    Some(',') => {
                        fields.push(field.trim_end().to_owned());
                        break;
                    }
                    Some(c) => field.push(c),
                }
            }
        }
    }
}

// ---------------------------------------------------------------------------
// Header recognition

/// A physical quantity with the unit suffixes accepted for it.
struct Quantity {
    /// Name stem before the unit suffix.
    stem: &'static str,
    /// What it is, for messages.
    what: &'static str,
    /// (unit suffix, factor to the internal unit).
    units: &'static [(&'static str, f64)],
}

const MAS: &[(&str, f64)] = &[("mas", 1.0)];
const MAS_OR_ARCSEC: &[(&str, f64)] = &[("mas", 1.0), ("arcsec", 1000.0)];
const DEGREES: &[(&str, f64)] = &[("deg", DEG)];
const KMS_OR_MS: &[(&str, f64)] = &[("kms", 1.0), ("ms", 1e-3)];

/// Roles of astrometry columns.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
enum AstroRole {
    Sep,
    SepErr,
    Pa,
    PaErr,
    Dra,
    Ddec,
    DraErr,
    DdecErr,
}

impl AstroRole {
    fn is_polar(self) -> bool {
        matches!(
            self,
            AstroRole::Sep | AstroRole::SepErr | AstroRole::Pa | AstroRole::PaErr
        )
    }
}

/// Astrometry quantities; stems that extend others (`sep_err`) come first so
/// that the longest stem wins.
const ASTRO_QUANTITIES: &[(AstroRole, Quantity)] = &[
    (
        AstroRole::SepErr,
        Quantity {
            stem: "sep_err",
            what: "separation error",
            units: MAS_OR_ARCSEC,
        },
    ),
    (
        AstroRole::PaErr,
        Quantity {
            stem: "pa_err",
            what: "position-angle error",
            units: DEGREES,
        },
    ),
    (
        AstroRole::DraErr,
        Quantity {
            stem: "dra_err",
            what: "dRA* error",
            units: MAS,
        },
    ),
    (
        AstroRole::DdecErr,
        Quantity {
            stem: "ddec_err",
            what: "dDec error",
            units: MAS,
        },
    ),
    (
        AstroRole::Sep,
        Quantity {
            stem: "sep",
            what: "separation",
            units: MAS_OR_ARCSEC,
        },
    ),
    (
        AstroRole::Pa,
        Quantity {
            stem: "pa",
            what: "position angle",
            units: DEGREES,
        },
    ),
    (
        AstroRole::Dra,
        Quantity {
            stem: "dra",
            what: "dRA*",
            units: MAS,
        },
    ),
    (
        AstroRole::Ddec,
        Quantity {
            stem: "ddec",
            what: "dDec",
            units: MAS,
        },
    ),
];

/// Roles of velocity columns with units.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
enum RvRole {
    Rv,
    RvErr,
}

const RV_QUANTITIES: &[(RvRole, Quantity)] = &[
    (
        RvRole::RvErr,
        Quantity {
            stem: "rv_err",
            what: "velocity error",
            units: KMS_OR_MS,
        },
    ),
    (
        RvRole::Rv,
        Quantity {
            stem: "rv",
            what: "radial velocity",
            units: KMS_OR_MS,
        },
    ),
];

const TIME_NAMES: &str = "jd, mjd, jyear, byear";
const ASTRO_ACCEPTED: &str = "jd|mjd|jyear|byear; sep_mas|sep_arcsec, sep_err_mas|sep_err_arcsec, \
pa_deg, pa_err_deg; or dra_mas, ddec_mas, dra_err_mas, ddec_err_mas; optional corr, source";
const RV_ACCEPTED: &str =
    "jd|mjd|jyear|byear, rv_kms|rv_ms, rv_err_kms|rv_err_ms, star, instrument";

/// What a column name means, or why it is not accepted.
enum Recognised<R> {
    Time(TimeScale),
    Quantity(R, f64),
    Plain(&'static str),
}

/// Recognises `name` (already lower-case) against the time names, the
/// quantities and the unit-less names; the error message explains the problem.
fn recognise<R: Copy>(
    name: &str,
    quantities: &[(R, Quantity)],
    plain: &[&'static str],
    accepted: &str,
) -> Result<Recognised<R>, String> {
    if let Some(scale) = TimeScale::from_column_name(name) {
        return Ok(Recognised::Time(scale));
    }
    if let Some(p) = plain.iter().find(|p| **p == name) {
        return Ok(Recognised::Plain(p));
    }
    let unit_list = |q: &Quantity| {
        q.units
            .iter()
            .map(|(u, _)| format!("{}_{u}", q.stem))
            .collect::<Vec<_>>()
            .join(" or ")
    };
    for (role, q) in quantities {
        if name == q.stem {
            return Err(format!(
                "column '{name}' needs a unit suffix: {}",
                unit_list(q)
            ));
        }
        if let Some(unit) = name.strip_prefix(q.stem).and_then(|r| r.strip_prefix('_')) {
            if let Some((_, factor)) = q.units.iter().find(|(u, _)| *u == unit) {
                return Ok(Recognised::Quantity(*role, *factor));
            }
            // A single extra token is a unit; anything longer is a misspelt name.
            if !unit.is_empty() && !unit.contains('_') {
                return Err(format!(
                    "unknown unit '{unit}' for the {} in column '{name}'; accepted: {}",
                    q.what,
                    unit_list(q)
                ));
            }
        }
    }
    if name.parse::<f64>().is_ok() {
        return Err(format!(
            "'{name}' looks like data; the first line that is not a comment must be a header \
             naming the columns ({accepted})"
        ));
    }
    Err(format!(
        "unknown column '{name}'; accepted columns: {accepted}"
    ))
}

/// The header, parsed: which field index holds what.
struct Header {
    line: usize,
    /// Lower-cased column names, as in the file.
    names: Vec<String>,
    time: (usize, TimeScale),
}

/// Checks for duplicate names and finds exactly one time column; returns the
/// recognised roles of all columns.
fn parse_header<R: Copy>(
    record: &Record,
    file: &Path,
    quantities: &[(R, Quantity)],
    plain: &[&'static str],
    accepted: &str,
) -> Result<(Header, Vec<Recognised<R>>), ModelError> {
    let line = record.line;
    let names: Vec<String> = record.fields.iter().map(|f| f.to_lowercase()).collect();
    let mut roles = Vec::with_capacity(names.len());
    let mut time: Option<(usize, TimeScale)> = None;
    for (index, name) in names.iter().enumerate() {
        if name.is_empty() {
            return Err(ModelError::at(
                file,
                Some(line),
                None,
                format!(
                    "header field {} is empty; every column needs a name",
                    index + 1
                ),
            ));
        }
        if let Some(first) = names[..index].iter().position(|n| n == name) {
            return Err(ModelError::at(
                file,
                Some(line),
                Some(name),
                format!(
                    "duplicate column '{name}' (fields {} and {})",
                    first + 1,
                    index + 1
                ),
            ));
        }
        let role = recognise(name, quantities, plain, accepted)
            .map_err(|message| ModelError::at(file, Some(line), Some(name), message))?;
        if let Recognised::Time(scale) = role {
            if let Some((first, _)) = time {
                return Err(ModelError::at(
                    file,
                    Some(line),
                    Some(name),
                    format!(
                        "two time columns, '{}' and '{name}'; keep exactly one of {TIME_NAMES}",
                        names[first]
                    ),
                ));
            }
            time = Some((index, scale));
        }
        roles.push(role);
    }
    let Some(time) = time else {
        return Err(ModelError::at(
            file,
            Some(line),
            Some("jd"),
            format!("missing time column: add one of {TIME_NAMES}"),
        ));
    };
    Ok((Header { line, names, time }, roles))
}

/// Index and unit factor of each role, refusing the same quantity twice in
/// different units.
fn place_quantities<R: Copy + PartialEq>(
    header: &Header,
    roles: &[Recognised<R>],
    quantities: &[(R, Quantity)],
    file: &Path,
) -> Result<Vec<(R, usize, f64)>, ModelError> {
    let mut placed: Vec<(R, usize, f64)> = Vec::new();
    for (index, role) in roles.iter().enumerate() {
        if let Recognised::Quantity(r, factor) = role {
            if let Some((_, first, _)) = placed.iter().find(|(p, _, _)| p == r) {
                let what = quantities
                    .iter()
                    .find(|(q, _)| q == r)
                    .map_or("quantity", |(_, q)| q.what);
                return Err(ModelError::at(
                    file,
                    Some(header.line),
                    Some(&header.names[index]),
                    format!(
                        "the {what} is given twice, in '{}' and '{}'; keep one",
                        header.names[*first], header.names[index]
                    ),
                ));
            }
            placed.push((*r, index, *factor));
        }
    }
    Ok(placed)
}

// ---------------------------------------------------------------------------
// Field values

/// Context for reading the fields of one data row.
struct Row<'a> {
    file: &'a Path,
    header: &'a Header,
    record: &'a Record,
}

impl Row<'_> {
    fn error(&self, index: usize, message: String) -> ModelError {
        ModelError::at(
            self.file,
            Some(self.record.line),
            Some(&self.header.names[index]),
            message,
        )
    }

    fn text(&self, index: usize) -> &str {
        &self.record.fields[index]
    }

    /// A finite number.
    fn number(&self, index: usize) -> Result<f64, ModelError> {
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
    fn positive(&self, index: usize) -> Result<f64, ModelError> {
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
    fn epoch(&self) -> Result<f64, ModelError> {
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
    fn correlation(&self, index: usize) -> Result<f64, ModelError> {
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
fn check_field_count(record: &Record, header: &Header, file: &Path) -> Result<(), ModelError> {
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
fn header_and_rows<'a>(
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
fn require_rows(rows: &[Record], header: &Header, file: &Path) -> Result<(), ModelError> {
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

// ---------------------------------------------------------------------------
// Astrometry

fn parse_astrometry(bytes: &[u8], file: &Path) -> Result<Vec<AstrometryEpoch>, ModelError> {
    let records = records(bytes, file)?;
    let (header_record, rows) = header_and_rows(
        &records,
        file,
        "jd, sep_mas, sep_err_mas, pa_deg, pa_err_deg",
    )?;
    let (header, roles) = parse_header(
        header_record,
        file,
        ASTRO_QUANTITIES,
        &["corr", "source"],
        ASTRO_ACCEPTED,
    )?;
    let placed = place_quantities(&header, &roles, ASTRO_QUANTITIES, file)?;
    let plain_index = |wanted: &str| {
        roles
            .iter()
            .position(|r| matches!(r, Recognised::Plain(p) if *p == wanted))
    };
    let corr_index = plain_index("corr");
    let source_index = plain_index("source");

    // Polar or Cartesian: decided by the first position column; a column of
    // the other form is an error at that column.
    let polar = match placed.first() {
        Some((role, _, _)) => role.is_polar(),
        None => return Err(ModelError::at(
            file,
            Some(header.line),
            Some("sep_mas"),
            "no position columns: give sep_mas (or sep_arcsec), sep_err_mas, pa_deg, pa_err_deg, \
                 or dra_mas, ddec_mas, dra_err_mas, ddec_err_mas"
                .to_owned(),
        )),
    };
    if let Some((_, index, _)) = placed.iter().find(|(r, _, _)| r.is_polar() != polar) {
        return Err(ModelError::at(
            file,
            Some(header.line),
            Some(&header.names[*index]),
            "mixes polar (sep, pa) and Cartesian (dra, ddec) columns; use one form per file"
                .to_owned(),
        ));
    }
    let needed: &[(AstroRole, &str)] = if polar {
        &[
            (AstroRole::Sep, "sep_mas"),
            (AstroRole::SepErr, "sep_err_mas"),
            (AstroRole::Pa, "pa_deg"),
            (AstroRole::PaErr, "pa_err_deg"),
        ]
    } else {
        &[
            (AstroRole::Dra, "dra_mas"),
            (AstroRole::Ddec, "ddec_mas"),
            (AstroRole::DraErr, "dra_err_mas"),
            (AstroRole::DdecErr, "ddec_err_mas"),
        ]
    };
    // (index, factor) per needed role, in the order of `needed`.
    let mut slots = [(0_usize, 0.0_f64); 4];
    for (slot, (role, name)) in slots.iter_mut().zip(needed) {
        let Some((_, index, factor)) = placed.iter().find(|(r, _, _)| r == role) else {
            let alternative = match role {
                AstroRole::Sep => " (or sep_arcsec)",
                AstroRole::SepErr => " (or sep_err_arcsec)",
                _ => "",
            };
            return Err(ModelError::at(
                file,
                Some(header.line),
                Some(name),
                format!("missing column '{name}'{alternative}"),
            ));
        };
        *slot = (*index, *factor);
    }

    require_rows(rows, &header, file)?;

    // Fields are read left to right in file order so that the first problem
    // reported in a row is the leftmost one.
    let mut order = [0_usize, 1, 2, 3];
    order.sort_by_key(|&k| slots[k].0);

    let mut epochs = Vec::with_capacity(rows.len());
    for record in rows {
        check_field_count(record, &header, file)?;
        let row = Row {
            file,
            header: &header,
            record,
        };
        let t_jd = row.epoch()?;
        let mut values = [0.0_f64; 4];
        for &k in &order {
            let (index, factor) = slots[k];
            let role = needed[k].0;
            let value = match role {
                AstroRole::SepErr | AstroRole::PaErr | AstroRole::DraErr | AstroRole::DdecErr => {
                    row.positive(index)?
                }
                _ => row.number(index)?,
            };
            match role {
                AstroRole::Sep if value < 0.0 => {
                    return Err(row.error(
                        index,
                        format!("a separation cannot be negative, got {value}"),
                    ))
                }
                AstroRole::Pa if !(0.0..360.0).contains(&value) => {
                    return Err(row.error(
                        index,
                        format!(
                            "a position angle must lie in [0, 360) degrees, got {value}; \
                             add or subtract 360 if that is what is meant"
                        ),
                    ))
                }
                AstroRole::PaErr if value >= 180.0 => {
                    return Err(row.error(
                        index,
                        format!("a position-angle error must be below 180 degrees, got {value}"),
                    ))
                }
                _ => {}
            }
            // `+ 0.0` turns a -0 position angle into +0.
            let scaled = value * factor + 0.0;
            if !scaled.is_finite() {
                return Err(row.error(index, format!("{value} is too large")));
            }
            values[k] = scaled;
        }
        let corr = match corr_index {
            Some(index) => row.correlation(index)?,
            None => 0.0,
        };
        let source = source_index
            .map(|index| row.text(index).to_owned())
            .filter(|s| !s.is_empty());
        let [a, b, c, d] = values;
        let position = if polar {
            RelativePosition::Polar {
                sep_mas: a,
                sep_err_mas: b,
                pa_rad: c,
                pa_err_rad: d,
                corr,
            }
        } else {
            RelativePosition::Cartesian {
                dra_mas: a,
                ddec_mas: b,
                dra_err_mas: c,
                ddec_err_mas: d,
                corr,
            }
        };
        epochs.push(AstrometryEpoch {
            t_jd,
            position,
            source,
        });
    }
    Ok(epochs)
}

// ---------------------------------------------------------------------------
// Velocities

fn parse_velocities(
    bytes: &[u8],
    file: &Path,
    instruments: &mut Vec<String>,
) -> Result<Vec<VelocityPoint>, ModelError> {
    let records = records(bytes, file)?;
    let (header_record, rows) =
        header_and_rows(&records, file, "jd, rv_kms, rv_err_kms, star, instrument")?;
    let (header, roles) = parse_header(
        header_record,
        file,
        RV_QUANTITIES,
        &["star", "instrument"],
        RV_ACCEPTED,
    )?;
    let placed = place_quantities(&header, &roles, RV_QUANTITIES, file)?;
    let find = |role: RvRole, name: &str| {
        placed
            .iter()
            .find(|(r, _, _)| *r == role)
            .map(|(_, index, factor)| (*index, *factor))
            .ok_or_else(|| {
                ModelError::at(
                    file,
                    Some(header.line),
                    Some(name),
                    format!(
                        "missing column '{name}' (or the same in m/s: {})",
                        name.replace("kms", "ms")
                    ),
                )
            })
    };
    let (rv_index, rv_factor) = find(RvRole::Rv, "rv_kms")?;
    let (err_index, err_factor) = find(RvRole::RvErr, "rv_err_kms")?;
    let plain = |wanted: &str| {
        roles
            .iter()
            .position(|r| matches!(r, Recognised::Plain(p) if *p == wanted))
            .ok_or_else(|| {
                ModelError::at(
                    file,
                    Some(header.line),
                    Some(wanted),
                    format!("missing column '{wanted}'"),
                )
            })
    };
    let star_index = plain("star")?;
    let instrument_index = plain("instrument")?;

    require_rows(rows, &header, file)?;

    // Work on a copy so that a failed load leaves the caller's list untouched.
    let mut names = instruments.clone();
    let mut points = Vec::with_capacity(rows.len());
    for record in rows {
        check_field_count(record, &header, file)?;
        let row = Row {
            file,
            header: &header,
            record,
        };
        let t_jd = row.epoch()?;
        let mut rv_kms = 0.0;
        let mut rv_err_kms = 0.0;
        let mut star = Star::Primary;
        let mut instrument = 0;
        // Left to right, as for astrometry.
        let mut order = [rv_index, err_index, star_index, instrument_index];
        order.sort_unstable();
        for index in order {
            if index == rv_index {
                rv_kms = row.number(index)? * rv_factor;
                if rv_kms.abs() >= SPEED_OF_LIGHT_KMS {
                    return Err(row.error(
                        index,
                        format!(
                            "a radial velocity of {rv_kms} km/s is not below the speed of light; check the unit"
                        ),
                    ));
                }
            } else if index == err_index {
                rv_err_kms = row.positive(index)? * err_factor;
            } else if index == star_index {
                let label = row.text(index);
                star = match label.to_lowercase().as_str() {
                    "primary" => Star::Primary,
                    "secondary" => Star::Secondary,
                    _ => {
                        return Err(row.error(
                            index,
                            format!("unknown star '{label}'; accepted: primary, secondary"),
                        ))
                    }
                };
            } else {
                let name = row.text(index);
                if name.is_empty() {
                    return Err(row.error(
                        index,
                        "empty instrument name; every measurement needs one".to_owned(),
                    ));
                }
                instrument = match names.iter().position(|n| n == name) {
                    Some(k) => k,
                    None => {
                        names.push(name.to_owned());
                        names.len() - 1
                    }
                };
            }
        }
        points.push(VelocityPoint {
            t_jd,
            rv_kms,
            rv_err_kms,
            star,
            instrument,
        });
    }
    *instruments = names;
    Ok(points)
}

#[cfg(test)]
mod tests {
    use super::split_fields;

    #[test]
    fn fields_split_with_quotes_and_blanks() {
        let fields = split_fields(r#" 1.5 , "a, ""b""" ,,x "#);
        assert_eq!(
            fields,
            Ok(vec![
                "1.5".into(),
                r#"a, "b""#.into(),
                String::new(),
                "x".into()
            ])
        );
        assert!(split_fields(r#"1,"open"#).is_err());
        assert!(split_fields(r#""a"b,1"#).is_err());
    }
}
