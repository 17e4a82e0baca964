//! Recognising the header of a measurement file: which column holds
//! which quantity, in which unit.

use std::path::Path;

use dyad_orbit::constants::DEG;
use dyad_orbit::time::TimeScale;

use super::records::Record;
use crate::error::ModelError;

/// A physical quantity with the unit suffixes accepted for it.
pub(super) struct Quantity {
    /// Name stem before the unit suffix.
    stem: &'static str,
    /// What it is, for messages.
    what: &'static str,
    /// (unit suffix, factor to the internal unit).
    units: &'static [(&'static str, f64)],
}

pub(super) const MAS: &[(&str, f64)] = &[("mas", 1.0)];
pub(super) const MAS_OR_ARCSEC: &[(&str, f64)] = &[("mas", 1.0), ("arcsec", 1000.0)];
pub(super) const DEGREES: &[(&str, f64)] = &[("deg", DEG)];
pub(super) const KMS_OR_MS: &[(&str, f64)] = &[("kms", 1.0), ("ms", 1e-3)];

/// Roles of astrometry columns.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
pub(super) enum AstroRole {
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
    pub(super) fn is_polar(self) -> bool {
        matches!(
            self,
            AstroRole::Sep | AstroRole::SepErr | AstroRole::Pa | AstroRole::PaErr
        )
    }
}

/// Astrometry quantities; stems that extend others (`sep_err`) come first so
/// that the longest stem wins.
pub(super) const ASTRO_QUANTITIES: &[(AstroRole, Quantity)] = &[
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
pub(super) enum RvRole {
    Rv,
    RvErr,
}

pub(super) const RV_QUANTITIES: &[(RvRole, Quantity)] = &[
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

pub(super) const TIME_NAMES: &str = "jd, mjd, jyear, byear";
pub(super) const ASTRO_ACCEPTED: &str =
    "jd|mjd|jyear|byear; sep_mas|sep_arcsec, sep_err_mas|sep_err_arcsec, \
pa_deg, pa_err_deg; or dra_mas, ddec_mas, dra_err_mas, ddec_err_mas; optional corr, source";
pub(super) const RV_ACCEPTED: &str =
    "jd|mjd|jyear|byear, rv_kms|rv_ms, rv_err_kms|rv_err_ms, star, instrument";

/// What a column name means, or why it is not accepted.
pub(super) enum Recognised<R> {
    Time(TimeScale),
    Quantity(R, f64),
    Plain(&'static str),
}

/// Recognises `name` (already lower-case) against the time names, the
/// quantities and the unit-less names; the error message explains the problem.
pub(super) fn recognise<R: Copy>(
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
pub(super) struct Header {
    pub(super) line: usize,
    /// Lower-cased column names, as in the file.
    pub(super) names: Vec<String>,
    pub(super) time: (usize, TimeScale),
}

/// Checks for duplicate names and finds exactly one time column; returns the
/// recognised roles of all columns.
pub(super) fn parse_header<R: Copy>(
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
pub(super) fn place_quantities<R: Copy + PartialEq>(
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
