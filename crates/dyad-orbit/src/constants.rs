//! Physical and astronomical constants, each with its source.
//!
//! Masses in dyad are nominal solar masses: the IAU 2015 Resolution B3 value
//! of GM_sun is taken as exact, so no Newtonian constant G is ever needed.

use std::f64::consts::PI;

/// Nominal solar mass parameter GM_sun in m^3 s^-2 (IAU 2015 Resolution B3).
pub const GM_SUN_M3_S2: f64 = 1.3271244e20;

/// Astronomical unit in metres (IAU 2012 Resolution B2, exact).
pub const AU_M: f64 = 149_597_870_700.0;

/// Astronomical unit in kilometres (IAU 2012 Resolution B2, exact).
pub const AU_KM: f64 = AU_M / 1000.0;

/// Seconds per day (SI day of 86400 s).
pub const DAY_S: f64 = 86_400.0;

/// Days per Julian year (IAU definition).
pub const JULIAN_YEAR_DAYS: f64 = 365.25;

/// Seconds per Julian year.
pub const JULIAN_YEAR_S: f64 = JULIAN_YEAR_DAYS * DAY_S;

/// Julian Date of the epoch J2000.0 (2000 January 1.5 TT).
pub const J2000_JD: f64 = 2_451_545.0;

/// Offset between Julian Date and Modified Julian Date: MJD = JD - 2400000.5.
pub const MJD_OFFSET: f64 = 2_400_000.5;

/// Milliarcseconds per radian (180/pi * 3600 * 1000).
pub const MAS_PER_RAD: f64 = 180.0 / PI * 3_600_000.0;

/// Radians per degree.
pub const DEG: f64 = PI / 180.0;

/// GM_sun in au^3 per Julian year squared (from the two IAU values above).
///
/// docs/REFERENCE-VALUES.md: 39.4769264089.
pub const GM_SUN_AU3_YR2: f64 =
    GM_SUN_M3_S2 / (AU_M * AU_M * AU_M) * (JULIAN_YEAR_S * JULIAN_YEAR_S);

/// The exact factor k in Kepler's third law `M[M_sun] = k a_au^3 / P_yr^2`:
/// k = 4 pi^2 / (GM_sun in au^3 yr^-2) = 1.0000377738...
pub const KEPLER_THIRD_LAW_FACTOR: f64 = 4.0 * PI * PI / GM_SUN_AU3_YR2;
