//! Radial-velocity files: one row per measurement of one star by one
//! instrument.

use std::path::Path;

use super::header::{
    parse_header, place_quantities, Recognised, RvRole, RV_ACCEPTED, RV_QUANTITIES,
};
use super::records::records;
use super::rows::{check_field_count, header_and_rows, require_rows, Row};
use super::SPEED_OF_LIGHT_KMS;
use crate::data::{Star, VelocityPoint};
use crate::error::ModelError;

pub(super) fn parse_velocities(
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
