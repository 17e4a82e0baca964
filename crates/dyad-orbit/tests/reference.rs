//! Checks against published values; the source is named beside each check.
//! Values quoted from docs/REFERENCE-VALUES.md unless said otherwise.

use dyad_orbit::constants::{AU_KM, DEG, GM_SUN_AU3_YR2, KEPLER_THIRD_LAW_FACTOR};
use dyad_orbit::kepler::reduce_mean_anomaly;
use dyad_orbit::{laws, solve_kepler, CampbellElements, Orbit, TimeScale};
use std::f64::consts::FRAC_PI_2;

fn assert_close(actual: f64, expected: f64, tol: f64, what: &str) {
    assert!(
        (actual - expected).abs() <= tol,
        "{what}: expected {expected}, got {actual} (diff {:e}, tol {tol:e})",
        actual - expected
    );
}

#[test]
fn meeus_example_30a() {
    // J. Meeus, Astronomical Algorithms (2nd ed., 1998), Example 30.a:
    // e = 0.1, M = 5 deg -> E = 5.554589 deg (printed to 6 decimals).
    let sol = solve_kepler(5.0 * DEG, 0.1);
    assert_close(sol.e_anom / DEG, 5.554_589, 5e-7, "E (deg)");
}

#[test]
fn meeus_ch30_high_eccentricity() {
    // Meeus (1998) ch. 30: e = 0.99, M = 0.2 rad -> E = 1.066997365282 rad.
    let sol = solve_kepler(0.2, 0.99);
    assert_close(sol.e_anom, 1.066_997_365_282, 5e-13, "E (rad)");
    // Meeus (1998) ch. 30 tables: e = 0.99, M = 2 deg -> E = 32.361007 deg.
    let sol = solve_kepler(2.0 * DEG, 0.99);
    assert_close(sol.e_anom / DEG, 32.361_007, 5e-7, "E (deg)");
}

#[test]
fn kepler_e075_m70() {
    // docs/REFERENCE-VALUES.md: e = 0.75, M = 70 deg -> E = 110.302228 deg
    // (computed there by Newton iteration to 1e-15; no book value).
    let sol = solve_kepler(70.0 * DEG, 0.75);
    assert_close(sol.e_anom / DEG, 110.302_228, 5e-7, "E (deg)");
}

#[test]
fn reduction_of_large_mean_anomalies() {
    // Reference: M - 2 pi round(M / 2 pi) evaluated with 40 digits in mpmath
    // (general-purpose arbitrary-precision library), computed here.
    assert_close(
        reduce_mean_anomaly(1e6),
        -0.357_564_167_085_735,
        1e-15,
        "1e6",
    );
    assert_close(
        reduce_mean_anomaly(-123_456.789),
        1.519_100_771_690_377_7,
        1e-15,
        "-123456.789",
    );
    assert_close(
        reduce_mean_anomaly(10_000.5),
        -2.331_009_029_901_671_3,
        1e-15,
        "10000.5",
    );
}

#[test]
fn meeus_example_57a_eta_crb() {
    // Meeus (1998) Example 57.a, eta Coronae Borealis at 1980.0: the book
    // prints theta = 318.4 deg, rho = 0.411"; full precision (computed in
    // docs/REFERENCE-VALUES.md): theta = 318.42426 deg, rho = 0.4110178".
    // The book uses decimal years directly, so build every JD with the same
    // 365.25-day year: M = 2 pi (t - T) / P exactly as in the book.
    let year = TimeScale::JulianYear;
    let el = CampbellElements {
        period_days: 41.623 * 365.25,
        t_peri_jd: year.to_jd(1934.008),
        e: 0.2763,
        a: 0.907,
        inc_rad: 59.025 * DEG,
        omega_rad: 219.907 * DEG,
        node_rad: 23.717 * DEG,
    };
    let orbit = Orbit::new(&el).unwrap();
    let p = orbit.sky_offset(year.to_jd(1980.0));
    assert_close(
        p.position_angle_rad() / DEG,
        318.424_26,
        1e-5,
        "theta (deg)",
    );
    assert_close(p.separation(), 0.411_017_8, 1e-7, "rho (arcsec)");
    // The printed values too.
    assert_close(p.position_angle_rad() / DEG, 318.4, 0.05, "theta printed");
    assert_close(p.separation(), 0.411, 0.0005, "rho printed");
}

#[test]
fn kepler_third_law_iau_nominal() {
    // docs/REFERENCE-VALUES.md (from IAU 2015 B3 and IAU 2012 B2):
    // GM_sun = 39.4769264089 au^3/yr^2, k = 1.0000377738.
    assert_close(GM_SUN_AU3_YR2, 39.476_926_408_9, 1e-9, "GM_sun au^3/yr^2");
    assert_close(KEPLER_THIRD_LAW_FACTOR, 1.000_037_773_8, 1e-10, "k");
    assert_close(
        laws::total_mass_msun(1.0, 365.25),
        1.000_037_773_8,
        1e-10,
        "1 au, 1 yr",
    );
    assert_close(
        laws::semi_major_axis_au(1.000_037_773_8, 365.25),
        1.0,
        1e-10,
        "inverse",
    );
}

/// Reflex semi-amplitude of the Sun (m/s) due to a planet of GM `gm_planet`.
fn solar_reflex_ms(gm_planet: f64, period_days: f64, e: f64) -> f64 {
    let q = gm_planet / dyad_orbit::constants::GM_SUN_M3_S2;
    let a_au = laws::semi_major_axis_au(1.0 + q, period_days);
    laws::semi_amplitudes_kms(a_au, period_days, e, FRAC_PI_2, q).0 * 1000.0
}

#[test]
fn solar_reflex_velocity_jupiter_and_earth() {
    // Common practice (values in docs/REFERENCE-VALUES.md): the Sun's reflex
    // semi-amplitude is 12.47 m/s due to Jupiter and 0.0895 m/s due to the Earth.
    assert_close(
        solar_reflex_ms(1.266_865_3e17, 4332.589, 0.0489),
        12.47,
        0.005,
        "Jupiter",
    );
    assert_close(
        solar_reflex_ms(3.986_004e14, 365.256_363, 0.0167),
        0.0895,
        0.000_05,
        "Earth",
    );
}

#[test]
fn spectroscopic_constants() {
    // R. W. Hilditch, An Introduction to Close Binary Stars (2001): the
    // constants 1.0361e-7 (M sin^3 i, f(M)) and 13751 (a sin i); the values
    // from the IAU 2015 B3 GM_sun are 1.036149e-7 and 13750.9871
    // (docs/REFERENCE-VALUES.md).
    assert_close(
        laws::mass_function_msun(1.0, 1.0, 0.0),
        1.036_149e-7,
        5e-14,
        "f(M)",
    );
    assert_close(
        laws::a_sini_km(1.0, 1.0, 0.0),
        13_750.987_1,
        5e-5,
        "a sin i",
    );
    let (m1, m2) = laws::msini3_msun(1.0, 1.0, 1.0, 0.0);
    // (K1+K2)^2 K = 4 for K1 = K2 = 1.
    assert_close(m1, 4.0 * 1.036_149e-7, 2e-13, "M1 sin^3 i");
    assert_close(m2, m1, 0.0, "M2 sin^3 i");
    // Eccentricity factors (1-e^2)^(3/2) and (1-e^2)^(1/2) (Hilditch 2001).
    let e: f64 = 0.6;
    assert_close(
        laws::mass_function_msun(10.0, 100.0, e),
        1.036_149e-7 * (1.0 - e * e).powf(1.5) * 1000.0 * 100.0,
        1e-9,
        "f(M), e",
    );
    assert_close(
        laws::a_sini_km(10.0, 100.0, e),
        13_750.987_1 * 0.8 * 1000.0,
        1e-1,
        "a sin i, e",
    );
}

#[test]
fn sirius_dynamical_mass() {
    // H. E. Bond et al. 2017, ApJ 840, 70, Table 4: a = 7.4957", P = 50.1284 yr,
    // M_A + M_B = 2.063 + 1.018 = 3.081 M_sun (sigma ~ 0.025); parallax
    // 378.9 mas as in docs/REFERENCE-VALUES.md, where (a/plx)^3/P^2 = 3.0810.
    let m = laws::total_mass_from_angular(7495.7, 378.9, 50.1284 * 365.25);
    assert_close(m, 3.081, 0.025, "total mass vs published");
    assert_close(m, 3.0810, 5e-4, "total mass vs docs/REFERENCE-VALUES.md");
}

#[test]
fn time_scales() {
    // Common practice: J2000.0 = JD 2451545.0; B1950.0 = JD 2433282.4235;
    // MJD = JD - 2400000.5 (IAU 1997).
    assert_close(
        TimeScale::JulianYear.to_jd(2000.0),
        2_451_545.0,
        0.0,
        "J2000.0",
    );
    assert_close(
        TimeScale::BesselianYear.to_jd(1950.0),
        2_433_282.423_5,
        1e-4,
        "B1950.0",
    );
    assert_close(
        TimeScale::BesselianYear.to_jd(1900.0),
        2_415_020.313_52,
        0.0,
        "B1900.0",
    );
    assert_close(
        TimeScale::Mjd.to_jd(51_544.5),
        2_451_545.0,
        0.0,
        "MJD of J2000.0",
    );
    assert_close(
        TimeScale::JulianYear.to_jd(2025.0),
        2_451_545.0 + 25.0 * 365.25,
        0.0,
        "J2025",
    );
    for scale in TimeScale::ALL {
        let jd = 2_460_123.456_789;
        assert_close(
            scale.to_jd(scale.from_jd(jd)),
            jd,
            1e-8,
            scale.column_name(),
        );
        assert_eq!(
            TimeScale::from_column_name(scale.column_name()),
            Some(scale)
        );
    }
    assert_eq!(TimeScale::from_column_name("JD"), None);
    assert_eq!(TimeScale::from_column_name("year"), None);
}

#[test]
fn semi_amplitude_and_orbital_parallax_are_consistent() {
    // Analytic: for a relative orbit of a_au with total mass M, the sum of the
    // spectroscopic a1 sin i + a2 sin i equals a_au sin i, so the orbital
    // parallax recovers a_mas / a_au; M_{1,2} sin^3 i equal the masses times
    // sin^3 i (Hilditch 2001, ch. 2).
    let (m1, m2): (f64, f64) = (1.3, 0.8);
    let q = m2 / m1;
    let (p, e, inc): (f64, f64, f64) = (812.0, 0.37, 63.0 * DEG);
    let a_au = laws::semi_major_axis_au(m1 + m2, p);
    let (k1, k2) = laws::semi_amplitudes_kms(a_au, p, e, inc, q);
    let (m1s, m2s) = laws::msini3_msun(k1, k2, p, e);
    let s3 = inc.sin().powi(3);
    assert_close(m1s, m1 * s3, 1e-12, "M1 sin^3 i");
    assert_close(m2s, m2 * s3, 1e-12, "M2 sin^3 i");
    let plx = 12.5;
    let a_mas = a_au * plx;
    assert_close(
        laws::orbital_parallax_mas(a_mas, inc, k1, k2, p, e),
        plx,
        1e-11,
        "parallax",
    );
    assert_close(
        laws::a_sini_km(k1 + k2, p, e),
        a_au * AU_KM * inc.sin(),
        1e-3,
        "a sin i",
    );
    // Mass function f = M2^3 sin^3 i / (M1 + M2)^2.
    let f = laws::mass_function_msun(k1, p, e);
    assert_close(f, m2.powi(3) * s3 / (m1 + m2).powi(2), 1e-13, "f(M)");
}
