"""The vectorised kinematics from Python equal the Rust crate's, bit for
bit, on 10^5 random cases: the reference is computed by a separate Rust
program (crates/dyad-orbit/examples/kinematics_reference.rs) calling
dyad-orbit one epoch at a time, and compared as float64 bits."""

from __future__ import annotations

import subprocess

import numpy as np
import pytest

import dyad

CASES = 100_000


def random_cases(rng: np.random.Generator, n: int) -> np.ndarray:
    """Rows (t, P, T, e, a, i, omega, Omega, K1, K2, gamma) over wide ranges,
    a tenth of them with 0.9 <= e < 0.999 where Kepler's equation is hardest."""
    e = rng.uniform(0.0, 0.9, n)
    hard = rng.random(n) < 0.1
    e[hard] = rng.uniform(0.9, 0.999, hard.sum())
    e[:3] = [0.0, 0.5, 0.999]
    return np.column_stack(
        [
            rng.uniform(2_400_000.0, 2_470_000.0, n),  # t, JD
            np.exp(rng.uniform(np.log(0.5), np.log(1e6), n)),  # P, days
            rng.uniform(2_440_000.0, 2_460_000.0, n),  # T, JD
            e,
            np.exp(rng.uniform(np.log(0.01), np.log(1e5), n)),  # a, mas
            rng.uniform(0.0, 180.0, n),  # i, deg
            rng.uniform(-360.0, 720.0, n),  # omega, deg (any turn)
            rng.uniform(0.0, 360.0, n),  # Omega, deg
            rng.uniform(0.01, 200.0, n),  # K1, km/s
            rng.uniform(0.01, 200.0, n),  # K2, km/s
            rng.uniform(-100.0, 100.0, n),  # gamma, km/s
        ]
    )


def reference(program, tmp_path, rows: np.ndarray) -> np.ndarray:
    src, out = tmp_path / "cases.f64", tmp_path / "reference.f64"
    np.ascontiguousarray(rows, dtype="<f8").tofile(src)
    subprocess.run([str(program), str(src), str(out)], check=True)
    return np.fromfile(out, dtype="<u8").reshape(-1, 4)


def bits(x: np.ndarray) -> np.ndarray:
    return np.ascontiguousarray(x, dtype="<f8").view("<u8")


def python_values(rows: np.ndarray, one_orbit: bool):
    c = rows.T
    pick = (lambda v: v[0]) if one_orbit else (lambda v: v)
    dra, ddec = dyad.positions(
        c[0],
        period_days=pick(c[1]),
        t_peri_jd=pick(c[2]),
        eccentricity=pick(c[3]),
        semi_major_axis=pick(c[4]),
        inclination_deg=pick(c[5]),
        omega_deg=pick(c[6]),
        node_deg=pick(c[7]),
    )
    v1, v2 = dyad.velocities(
        c[0],
        period_days=pick(c[1]),
        t_peri_jd=pick(c[2]),
        eccentricity=pick(c[3]),
        omega_deg=pick(c[6]),
        k1_kms=pick(c[8]),
        k2_kms=pick(c[9]),
        gamma_kms=pick(c[10]),
    )
    return [dra, ddec, v1, v2]


def assert_bitwise(python, expected):
    for k, name in enumerate(["dra", "ddec", "v1", "v2"]):
        mismatched = np.flatnonzero(bits(python[k]) != expected[:, k])
        assert mismatched.size == 0, f"{name}: {mismatched.size} cases differ, first {mismatched[:5]}"


def test_random_elements_per_epoch_equal_the_crate_bit_for_bit(kinematics_reference, tmp_path):
    rows = random_cases(np.random.default_rng(20261202), CASES)
    expected = reference(kinematics_reference, tmp_path, rows)
    assert_bitwise(python_values(rows, one_orbit=False), expected)


@pytest.mark.parametrize("e", [0.0, 0.37, 0.97])
def test_one_orbit_over_many_epochs_equals_the_crate_bit_for_bit(kinematics_reference, tmp_path, e):
    # One orbit: the binding takes the batch solver path; the reference
    # solves every epoch alone. 10^5 epochs in all.
    rng = np.random.default_rng(7)
    rows = random_cases(rng, 33_334)
    rows[:, 1:] = rows[0, 1:]
    rows[:, 3] = e
    expected = reference(kinematics_reference, tmp_path, rows)
    assert_bitwise(python_values(rows, one_orbit=True), expected)


def test_a_face_on_circular_orbit_moves_from_north_through_east():
    # Analytic (DESIGN.md formulas, Thiele-Innes A = a, G = a for i = omega
    # = Omega = 0): at periastron the companion is a to the North; a quarter
    # period later a to the East; position angle increases for i < 90.
    p, t0, a = 400.0, 2451545.0, 50.0
    t = t0 + p * np.array([0.0, 0.25, 0.5])
    dra, ddec = dyad.positions(
        t, period_days=p, t_peri_jd=t0, eccentricity=0.0, semi_major_axis=a,
        inclination_deg=0.0, omega_deg=0.0, node_deg=0.0,
    )
    np.testing.assert_allclose(dra, [0.0, a, 0.0], atol=1e-12)
    np.testing.assert_allclose(ddec, [a, 0.0, -a], atol=1e-12)


def test_velocities_at_periastron_of_a_circular_orbit_are_gamma_minus_k1_and_plus_k2():
    # s = cos(nu + omega) + e cos omega = 1 at nu = omega = 0 (Hilditch 2001, eq. 2.45).
    v1, v2 = dyad.velocities(
        2451545.0, period_days=10.0, t_peri_jd=2451545.0, eccentricity=0.0,
        omega_deg=0.0, k1_kms=12.5, k2_kms=20.0, gamma_kms=-3.0,
    )
    assert (v1, v2) == (-15.5, 17.0)


def test_shapes_follow_the_epochs():
    t = np.full((2, 3), 2451545.0) + np.arange(6).reshape(2, 3)
    dra, ddec = dyad.positions(t, **dict(
        period_days=100.0, t_peri_jd=2451545.0, eccentricity=0.2, semi_major_axis=10.0,
        inclination_deg=30.0, omega_deg=10.0, node_deg=20.0))
    assert dra.shape == ddec.shape == (2, 3)
    x, y = dyad.positions(2451545.0, period_days=100.0, t_peri_jd=2451545.0, eccentricity=0.2,
                          semi_major_axis=10.0, inclination_deg=30.0, omega_deg=10.0, node_deg=20.0)
    assert isinstance(x, float) and isinstance(y, float)
    # Integer and float32 inputs are read as float64.
    x32, _ = dyad.positions(np.float32(2451545.0), period_days=np.int64(100), t_peri_jd=2451545,
                            eccentricity=0.2, semi_major_axis=10, inclination_deg=30,
                            omega_deg=10, node_deg=20)
    assert x32 == x
