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
//!   `""` for a quote; blanks may stand before the opening quote) but one
//!   record is one line. A UTF-8 byte-order mark and CRLF line ends are
//!   accepted. Comment lines need not be UTF-8; all others must. The `csv`
//!   crate splits the records ([`records`]).
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

use crate::data::{AstrometryEpoch, Dataset, VelocityPoint};
use crate::error::ModelError;

mod astrometry;
mod header;
mod records;
mod rows;
mod velocities;

use astrometry::parse_astrometry;
use velocities::parse_velocities;

/// Earliest plausible epoch, JD: the Julian epoch J1000.0 (J2000.0 - 1000 Julian years).
pub const EARLIEST_PLAUSIBLE_JD: f64 = 2_086_295.0;
/// Latest plausible epoch, JD: the Julian epoch J3000.0.
pub const LATEST_PLAUSIBLE_JD: f64 = 2_816_795.0;

/// Smallest accepted uncertainty, in the unit of its column: anything
/// smaller is surely a typing mistake, and its inverse square would overflow
/// a likelihood.
pub const SMALLEST_ERROR: f64 = 1e-9;

/// Speed of light, km/s (SI definition), the bound on any radial velocity.
pub(crate) const SPEED_OF_LIGHT_KMS: f64 = 299_792.458;

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
