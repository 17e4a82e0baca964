//! Relative astrometry files: polar (separation, position angle) or
//! Cartesian (dRA*, dDec) positions.

use std::path::Path;

use super::header::{
    parse_header, place_quantities, AstroRole, Recognised, ASTRO_ACCEPTED, ASTRO_QUANTITIES,
};
use super::records::records;
use super::rows::{check_field_count, header_and_rows, require_rows, Row};
use crate::data::{AstrometryEpoch, RelativePosition};
use crate::error::ModelError;

pub(super) fn parse_astrometry(
    bytes: &[u8],
    file: &Path,
) -> Result<Vec<AstrometryEpoch>, ModelError> {
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
