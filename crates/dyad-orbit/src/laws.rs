//! Kepler's third law and the spectroscopic-binary relations.
//!
//! Units: semi-major axes in au (or km where the name says so), periods in
//! days, semi-amplitudes in km/s, masses in nominal solar masses. All
//! constants follow from IAU 2015 Resolution B3 (GM_sun) and IAU 2012 B2
//! (au); see [`crate::constants`].

use crate::constants::{AU_KM, DAY_S, GM_SUN_M3_S2, JULIAN_YEAR_DAYS, KEPLER_THIRD_LAW_FACTOR};
use std::f64::consts::PI;

/// Constant C of the spectroscopic mass relations,
/// `f(M) = C (1-e^2)^(3/2) K^3 P` with K in km/s, P in days, f in M_sun:
/// `C = 1e9 DAY_S / (2 pi GM_sun) = 1.036149e-7` (cf. R. W. Hilditch,
/// An Introduction to Close Binary Stars, 2001, who gives 1.0361e-7).
pub const SPECTROSCOPIC_MASS_CONSTANT: f64 = 1e9 * DAY_S / (2.0 * PI * GM_SUN_M3_S2);

/// Constant of `a sin i [km] = C (1-e^2)^(1/2) K P` with K in km/s, P in days:
/// `C = DAY_S / (2 pi) = 13750.9871` (textbook value 13751, e.g. Hilditch 2001).
pub const SPECTROSCOPIC_AXIS_CONSTANT: f64 = DAY_S / (2.0 * PI);

/// Total mass M1 + M2 from Kepler's third law, `k a^3 / P_yr^2` with the exact
/// factor [`KEPLER_THIRD_LAW_FACTOR`] (1 au and 1 Julian year give 1.0000377738).
pub fn total_mass_msun(a_au: f64, period_days: f64) -> f64 {
    let p_yr = period_days / JULIAN_YEAR_DAYS;
    KEPLER_THIRD_LAW_FACTOR * a_au * a_au * a_au / (p_yr * p_yr)
}

/// Relative semi-major axis in au of a binary of the given total mass and
/// period (inverse of [`total_mass_msun`]).
pub fn semi_major_axis_au(total_mass_msun: f64, period_days: f64) -> f64 {
    let p_yr = period_days / JULIAN_YEAR_DAYS;
    (total_mass_msun * p_yr * p_yr / KEPLER_THIRD_LAW_FACTOR).cbrt()
}

/// Total mass from the angular semi-major axis and the parallax (same angular
/// unit, e.g. mas): a_au = a / parallax (docs/DESIGN.md).
pub fn total_mass_from_angular(a_mas: f64, parallax_mas: f64, period_days: f64) -> f64 {
    total_mass_msun(a_mas / parallax_mas, period_days)
}

/// Semi-amplitude of the relative line-of-sight velocity in km/s,
/// `K = 2 pi a sin i / (P sqrt(1-e^2))` (docs/DESIGN.md; e.g. Hilditch 2001, ch. 2).
pub fn relative_semi_amplitude_kms(a_au: f64, period_days: f64, e: f64, inc_rad: f64) -> f64 {
    2.0 * PI * a_au * AU_KM * inc_rad.sin() / (period_days * DAY_S * (1.0 - e * e).sqrt())
}

/// Semi-amplitudes (K1, K2) of the primary and the secondary in km/s, from the
/// relative orbit and the mass ratio q = M2/M1: `K1 = K q/(1+q)`, `K2 = K/(1+q)`.
pub fn semi_amplitudes_kms(
    a_au: f64,
    period_days: f64,
    e: f64,
    inc_rad: f64,
    mass_ratio: f64,
) -> (f64, f64) {
    let k = relative_semi_amplitude_kms(a_au, period_days, e, inc_rad);
    (k * mass_ratio / (1.0 + mass_ratio), k / (1.0 + mass_ratio))
}

/// Spectroscopic mass function in M_sun,
/// `f(M) = M2^3 sin^3 i / (M1 + M2)^2 = C (1-e^2)^(3/2) K1^3 P`.
pub fn mass_function_msun(k1_kms: f64, period_days: f64, e: f64) -> f64 {
    let s = (1.0 - e * e).sqrt();
    SPECTROSCOPIC_MASS_CONSTANT * s * s * s * k1_kms * k1_kms * k1_kms * period_days
}

/// Minimum masses (M1 sin^3 i, M2 sin^3 i) in M_sun of a double-lined binary,
/// `M_{1,2} sin^3 i = C (1-e^2)^(3/2) (K1 + K2)^2 K_{2,1} P` (Hilditch 2001).
pub fn msini3_msun(k1_kms: f64, k2_kms: f64, period_days: f64, e: f64) -> (f64, f64) {
    let s = (1.0 - e * e).sqrt();
    let ksum = k1_kms + k2_kms;
    let common = SPECTROSCOPIC_MASS_CONSTANT * s * s * s * ksum * ksum * period_days;
    (common * k2_kms, common * k1_kms)
}

/// Projected semi-major axis in km of the orbit with semi-amplitude K,
/// `a sin i = C (1-e^2)^(1/2) K P` with C = 13750.9871 (Hilditch 2001).
pub fn a_sini_km(k_kms: f64, period_days: f64, e: f64) -> f64 {
    SPECTROSCOPIC_AXIS_CONSTANT * (1.0 - e * e).sqrt() * k_kms * period_days
}

/// Orbital parallax in mas from the angular orbit and both semi-amplitudes:
/// `plx = a_mas sin i / ((a1 + a2) sin i in au)`, where
/// (a1 + a2) sin i = [`a_sini_km`] of K1 + K2.
pub fn orbital_parallax_mas(
    a_mas: f64,
    inc_rad: f64,
    k1_kms: f64,
    k2_kms: f64,
    period_days: f64,
    e: f64,
) -> f64 {
    let a_sini_au = a_sini_km(k1_kms + k2_kms, period_days, e) / AU_KM;
    a_mas * inc_rad.sin().abs() / a_sini_au
}
