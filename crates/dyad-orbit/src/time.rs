//! Time scales accepted in input files, all converted to Julian Date (days).
//!
//! - `jd`: Julian Date, used internally everywhere.
//! - `mjd`: Modified Julian Date, MJD = JD - 2400000.5.
//! - `jyear`: Julian epoch, J = 2000.0 + (JD - 2451545.0) / 365.25.
//! - `byear`: Besselian epoch, B = 1900.0 + (JD - 2415020.31352) / 365.242198781
//!   (J. H. Lieske, "Precession matrix based on IAU (1976) system of
//!   astronomical constants", A&A 73, 282, 1979, eq. 7).
//!
//! No time-scale distinction (TT, UTC, TDB) is made: binary-star orbits are
//! far too slow for the seconds involved to matter.

use crate::constants::{J2000_JD, JULIAN_YEAR_DAYS, MJD_OFFSET};

/// Julian Date of the Besselian epoch B1900.0 (Lieske 1979, A&A 73, 282).
pub const B1900_JD: f64 = 2_415_020.313_52;

/// Length of the Besselian (tropical) year in days at B1900 (Lieske 1979).
pub const BESSELIAN_YEAR_DAYS: f64 = 365.242_198_781;

/// The way a time column expresses an epoch.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeScale {
    /// Julian Date in days.
    Jd,
    /// Modified Julian Date in days (JD - 2400000.5).
    Mjd,
    /// Julian epoch in years (J2000.0 = JD 2451545.0, 365.25 d per year).
    JulianYear,
    /// Besselian epoch in years (Lieske 1979).
    BesselianYear,
}

impl TimeScale {
    /// Every time scale, in the order of [`TimeScale::column_name`] listings.
    pub const ALL: [TimeScale; 4] = [
        TimeScale::Jd,
        TimeScale::Mjd,
        TimeScale::JulianYear,
        TimeScale::BesselianYear,
    ];

    /// Converts a value on this scale to a Julian Date.
    pub fn to_jd(self, value: f64) -> f64 {
        match self {
            TimeScale::Jd => value,
            TimeScale::Mjd => value + MJD_OFFSET,
            TimeScale::JulianYear => J2000_JD + (value - 2000.0) * JULIAN_YEAR_DAYS,
            TimeScale::BesselianYear => B1900_JD + (value - 1900.0) * BESSELIAN_YEAR_DAYS,
        }
    }

    /// Converts a Julian Date to a value on this scale.
    pub fn from_jd(self, jd: f64) -> f64 {
        match self {
            TimeScale::Jd => jd,
            TimeScale::Mjd => jd - MJD_OFFSET,
            TimeScale::JulianYear => 2000.0 + (jd - J2000_JD) / JULIAN_YEAR_DAYS,
            TimeScale::BesselianYear => 1900.0 + (jd - B1900_JD) / BESSELIAN_YEAR_DAYS,
        }
    }

    /// The input-file column name of this scale: `jd`, `mjd`, `jyear` or `byear`.
    pub fn column_name(self) -> &'static str {
        match self {
            TimeScale::Jd => "jd",
            TimeScale::Mjd => "mjd",
            TimeScale::JulianYear => "jyear",
            TimeScale::BesselianYear => "byear",
        }
    }

    /// The scale named by an input-file column (exact, lower-case match).
    pub fn from_column_name(name: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|s| s.column_name() == name)
    }
}
