//! Property tests (proptest, modest case counts so they stay fast in debug).
//! Each property is an analytic identity of the two-body problem; sources
//! are named beside each.

use dyad_orbit::constants::{AU_KM, DAY_S};
use dyad_orbit::kepler::reduce_mean_anomaly;
use dyad_orbit::{
    laws, solve_kepler, CampbellElements, KeplerSolver, Orbit, OrbitState, ThieleInnes,
};
use proptest::prelude::*;
use std::f64::consts::{PI, TAU};

fn config(cases: u32) -> ProptestConfig {
    ProptestConfig {
        cases,
        ..ProptestConfig::default()
    }
}

/// |E - e sin E - M| with M reduced the same way as the solver's input.
fn residual(m: f64, e: f64) -> f64 {
    let sol = solve_kepler(m, e);
    (sol.e_anom - e * sol.e_anom.sin() - reduce_mean_anomaly(m)).abs()
}

fn elements() -> impl Strategy<Value = CampbellElements> {
    (
        1.0f64..1e5,
        2_440_000.0f64..2_470_000.0,
        0.0f64..0.95,
        0.1f64..1000.0,
        0.0f64..PI,
        -TAU..TAU,
        -TAU..TAU,
    )
        .prop_map(
            |(period_days, t_peri_jd, e, a, inc_rad, omega_rad, node_rad)| CampbellElements {
                period_days,
                t_peri_jd,
                e,
                a,
                inc_rad,
                omega_rad,
                node_rad,
            },
        )
}

/// Distance behind the primary, z = r sin(nu + omega) sin i, computed from
/// the true anomaly with the half-angle formula (Meeus 1998, eq. 30.1),
/// independently of the crate's rv_shape.
fn line_of_sight(el: &CampbellElements, orbit: &Orbit, t: f64) -> f64 {
    let ea = orbit.eccentric_anomaly(t);
    let e = el.e;
    let nu = 2.0
        * ((1.0 + e).sqrt() * (0.5 * ea.e_anom).sin())
            .atan2((1.0 - e).sqrt() * (0.5 * ea.e_anom).cos());
    let r = el.a * (1.0 - e * ea.e_anom.cos());
    r * (nu + el.omega_rad).sin() * el.inc_rad.sin()
}

/// Angle difference wrapped to (-pi, pi].
fn wrap(x: f64) -> f64 {
    let y = x.rem_euclid(TAU);
    if y > PI {
        y - TAU
    } else {
        y
    }
}

proptest! {
    #![proptest_config(config(2000))]

    // Kepler's equation, any M (|M| <= 1e4) and any e in [0, 1).
    #[test]
    fn kepler_residual_whole_domain(m in -1e4f64..1e4, e in 0.0f64..1.0) {
        prop_assert!(residual(m, e) <= 1e-12, "M={m} e={e} r={:e}", residual(m, e));
    }

    // The hard corner: e in [0.99, 0.999999], M near periastron.
    #[test]
    fn kepler_residual_high_e_near_periastron(m in -0.05f64..0.05, e in 0.99f64..0.999_999) {
        prop_assert!(residual(m, e) <= 1e-12, "M={m} e={e} r={:e}", residual(m, e));
    }

    #[test]
    fn kepler_residual_high_e_anywhere(m in -1e4f64..1e4, e in 0.99f64..0.999_999) {
        prop_assert!(residual(m, e) <= 1e-12, "M={m} e={e} r={:e}", residual(m, e));
    }

    // The returned sine and cosine are those of the returned E (libm reference).
    #[test]
    fn kepler_sin_cos_consistent(m in -1e4f64..1e4, e in 0.0f64..0.999_999) {
        let sol = solve_kepler(m, e);
        prop_assert!((sol.sin_e - sol.e_anom.sin()).abs() <= 1e-14);
        prop_assert!((sol.cos_e - sol.e_anom.cos()).abs() <= 1e-14);
        prop_assert!(sol.e_anom.abs() <= PI + 1e-12);
    }

    // The same bounds for the precomputed per-eccentricity solver used by
    // `Orbit`, whole domain and corner.
    #[test]
    fn solver_residual_whole_domain(m in -1e4f64..1e4, e in 0.0f64..1.0) {
        let sol = KeplerSolver::new(e).unwrap().solve(m);
        let r = (sol.e_anom - e * sol.e_anom.sin() - reduce_mean_anomaly(m)).abs();
        prop_assert!(r <= 1e-12, "M={m} e={e} r={r:e}");
        prop_assert!((sol.sin_e - sol.e_anom.sin()).abs() <= 1e-14);
        prop_assert!((sol.cos_e - sol.e_anom.cos()).abs() <= 1e-14);
    }

    #[test]
    fn solver_residual_high_e_near_periastron(m in -0.2f64..0.2, e in 0.99f64..0.999_999) {
        let sol = KeplerSolver::new(e).unwrap().solve(m);
        let r = (sol.e_anom - e * sol.e_anom.sin() - m).abs();
        prop_assert!(r <= 1e-12, "M={m} e={e} r={r:e}");
    }

    // The per-eccentricity solver agrees with the free function.
    #[test]
    fn solver_matches_free_function(m in -1e4f64..1e4, e in 0.0f64..0.999_999) {
        let solver = KeplerSolver::new(e).unwrap();
        let a = solver.solve(m);
        let b = solve_kepler(m, e);
        prop_assert!((a.e_anom - b.e_anom).abs() <= 1e-12);
    }
}

proptest! {
    #![proptest_config(config(300))]

    // Radial velocity is the time derivative of the line-of-sight coordinate
    // (two-body problem, e.g. Hilditch 2001, sect. 2.5): central difference
    // of z against K * rv_shape, K = 2 pi a sin i / (P sqrt(1-e^2)).
    #[test]
    fn velocity_is_derivative_of_line_of_sight(el in elements(), frac in 0.0f64..1.0) {
        let orbit = Orbit::new(&el).unwrap();
        let t = el.t_peri_jd + frac * el.period_days;
        let h = el.period_days * 1e-5;
        let dz_dt = (line_of_sight(&el, &orbit, t + h) - line_of_sight(&el, &orbit, t - h)) / (2.0 * h);
        let k = TAU * el.a * el.inc_rad.sin() / (el.period_days * (1.0 - el.e * el.e).sqrt());
        let v = k * orbit.rv_shape(t);
        // Central-difference error ~ (2 pi 1e-5 / (1-e)^2)^2 relative to K.
        let tol = 1e-5 * k.abs().max(1e-300) + 1e-9 * el.a / el.period_days;
        prop_assert!((dz_dt - v).abs() <= tol, "dz/dt={dz_dt} v={v}");
        // The same with the semi-amplitude in km/s for a in au.
        let k_kms = laws::relative_semi_amplitude_kms(el.a, el.period_days, el.e, el.inc_rad);
        prop_assert!((k_kms - k * AU_KM / DAY_S).abs() <= 1e-12 * k_kms.abs().max(1e-300) * 10.0);
    }

    // Positions and velocities repeat after one period.
    #[test]
    fn states_repeat_after_one_period(el in elements(), frac in 0.0f64..1.0) {
        let orbit = Orbit::new(&el).unwrap();
        let t = el.t_peri_jd + frac * el.period_days;
        let s0 = orbit.state(t);
        let s1 = orbit.state(t + el.period_days);
        let s2 = orbit.state(t - 7.0 * el.period_days);
        // Rounding of t + P (JD ~ 2.4e6, ulp 5e-10 d) moves M by 2 pi ulp / P.
        let tol = el.a * 1e-6;
        for s in [s1, s2] {
            prop_assert!((s.dra - s0.dra).abs() <= tol && (s.ddec - s0.ddec).abs() <= tol);
            prop_assert!((s.rv_shape - s0.rv_shape).abs() <= 1e-6);
        }
    }

    // Thiele-Innes -> Campbell -> Thiele-Innes is the identity (every
    // quadruple A, B, F, G is a valid orbit; Heintz 1978, Double Stars).
    #[test]
    fn thiele_innes_round_trip(a in -100.0f64..100.0, b in -100.0f64..100.0, f in -100.0f64..100.0, g in -100.0f64..100.0) {
        let ti = ThieleInnes { a, b, f, g };
        let geo = ti.to_campbell();
        prop_assert!((0.0..PI).contains(&geo.node_rad));
        prop_assert!((0.0..TAU).contains(&geo.omega_rad));
        prop_assert!((0.0..=PI).contains(&geo.inc_rad));
        let el = CampbellElements {
            period_days: 1.0, t_peri_jd: 0.0, e: 0.0, a: geo.a,
            inc_rad: geo.inc_rad, omega_rad: geo.omega_rad, node_rad: geo.node_rad,
        };
        let back = el.thiele_innes();
        let scale = 1e-12 * 400.0;
        prop_assert!((back.a - a).abs() <= scale && (back.b - b).abs() <= scale);
        prop_assert!((back.f - f).abs() <= scale && (back.g - g).abs() <= scale);
    }

    // Campbell -> Thiele-Innes -> Campbell recovers (a, i) and (omega, Omega)
    // up to the (omega + pi, Omega + pi) ambiguity of astrometry.
    #[test]
    fn campbell_round_trip(el in elements()) {
        prop_assume!(el.inc_rad > 1e-3 && el.inc_rad < PI - 1e-3);
        let geo = el.thiele_innes().to_campbell();
        prop_assert!((geo.a - el.a).abs() <= 1e-12 * el.a * 10.0);
        prop_assert!((geo.inc_rad - el.inc_rad).abs() <= 1e-9);
        let same = wrap(geo.omega_rad - el.omega_rad).abs() <= 1e-9 && wrap(geo.node_rad - el.node_rad).abs() <= 1e-9;
        let flipped = wrap(geo.omega_rad - el.omega_rad - PI).abs() <= 1e-9 && wrap(geo.node_rad - el.node_rad - PI).abs() <= 1e-9;
        prop_assert!(same || flipped, "{el:?} -> {geo:?}");
    }

    // i < 90 deg: position angle increases with time; i > 90 deg: decreases
    // (docs/DESIGN.md; d theta/dt = h cos i / rho^2 by the area law).
    #[test]
    fn direct_motion_for_low_inclination(mut el in elements(), frac in 0.0f64..1.0, low in 0.0f64..(85.0f64.to_radians())) {
        el.e = el.e.min(0.9);
        let t = el.t_peri_jd + frac * el.period_days;
        let dt = el.period_days * 1e-6;
        el.inc_rad = low;
        let orbit = Orbit::new(&el).unwrap();
        let d = wrap(orbit.sky_offset(t + dt).position_angle_rad() - orbit.sky_offset(t).position_angle_rad());
        prop_assert!(d > 0.0, "direct: {d}");
        el.inc_rad = PI - low;
        let orbit = Orbit::new(&el).unwrap();
        let d = wrap(orbit.sky_offset(t + dt).position_angle_rad() - orbit.sky_offset(t).position_angle_rad());
        prop_assert!(d < 0.0, "retrograde: {d}");
    }

    // At the ascending node (nu + omega = 0) the secondary lies at position
    // angle Omega and recedes (docs/DESIGN.md convention).
    #[test]
    fn ascending_node_is_receding(el in elements()) {
        prop_assume!(el.inc_rad > 0.05 && el.inc_rad < PI - 0.05);
        let e = el.e;
        let nu = -el.omega_rad;
        // Eccentric and mean anomaly from the true anomaly (Meeus 1998, ch. 30).
        let ecc = 2.0 * ((1.0 - e).sqrt() * (0.5 * nu).sin()).atan2((1.0 + e).sqrt() * (0.5 * nu).cos());
        let m = ecc - e * ecc.sin();
        let t = el.t_peri_jd + m / TAU * el.period_days;
        let orbit = Orbit::new(&el).unwrap();
        let pa = orbit.sky_offset(t).position_angle_rad();
        prop_assert!(wrap(pa - el.node_rad).abs() <= 1e-6, "pa {pa} node {}", el.node_rad);
        prop_assert!(orbit.rv_shape(t) > 0.0);
    }

    // The batch solver equals one-by-one solving, bit for bit, corner included.
    #[test]
    fn solve_many_equals_solve(e in 0.0f64..0.999_999, ms in proptest::collection::vec(-10.0f64..10.0, 0..40), tiny in proptest::collection::vec(-0.05f64..0.05, 0..12)) {
        let solver = KeplerSolver::new(e).unwrap();
        let all: Vec<f64> = ms.iter().chain(&tiny).copied().collect();
        let mut out = vec![solve_kepler(0.0, 0.0); all.len()];
        solver.solve_many(&all, &mut out);
        for (o, &m) in out.iter().zip(&all) {
            prop_assert_eq!(*o, solver.solve(m));
        }
    }

    // The batch equals one-by-one evaluation.
    #[test]
    fn batch_equals_single(el in elements(), times in proptest::collection::vec(2_440_000.0f64..2_470_000.0, 0..50)) {
        let orbit = Orbit::new(&el).unwrap();
        let mut out = vec![OrbitState::default(); times.len()];
        orbit.states_into(&times, &mut out);
        for (s, &t) in out.iter().zip(&times) {
            prop_assert_eq!(*s, orbit.state(t));
        }
    }
}

#[test]
fn invalid_elements_are_rejected() {
    let good = CampbellElements {
        period_days: 10.0,
        t_peri_jd: 0.0,
        e: 0.5,
        a: 1.0,
        inc_rad: 1.0,
        omega_rad: 1.0,
        node_rad: 1.0,
    };
    assert!(Orbit::new(&good).is_ok());
    for bad in [
        CampbellElements { e: 1.0, ..good },
        CampbellElements { e: -0.1, ..good },
        CampbellElements {
            e: f64::NAN,
            ..good
        },
        CampbellElements {
            period_days: 0.0,
            ..good
        },
        CampbellElements {
            period_days: f64::INFINITY,
            ..good
        },
        CampbellElements { a: -1.0, ..good },
        CampbellElements {
            node_rad: f64::NAN,
            ..good
        },
    ] {
        assert!(Orbit::new(&bad).is_err(), "{bad:?}");
    }
    assert!(KeplerSolver::new(1.0).is_err());
}
