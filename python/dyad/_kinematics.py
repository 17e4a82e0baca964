"""Kinematics for given elements, vectorised over NumPy arrays: the
positions and velocities that dyad's fits compute, from the same Rust code
(dyad-orbit), for users who only need the orbit."""

from __future__ import annotations

from typing import Any, Tuple

import numpy as np

from . import _native


def _shaped(t_jd: Any, x: np.ndarray, y: np.ndarray) -> Tuple[Any, Any]:
    """The results in the shape of the epochs (floats for one number)."""
    if isinstance(t_jd, np.ndarray):
        if t_jd.ndim == 1:
            return x, y
        return x.reshape(t_jd.shape), y.reshape(t_jd.shape)
    if isinstance(t_jd, (float, int, np.generic)):
        return float(x[0]), float(y[0])
    shape = np.shape(t_jd)
    return x.reshape(shape), y.reshape(shape)


def _flat(value: Any) -> Any:
    """Arrays of more than one dimension, flattened (the native module
    takes one)."""
    if isinstance(value, np.ndarray) and value.ndim > 1:
        return value.ravel()
    return value


def positions(
    t_jd: Any,
    *,
    period_days: Any,
    t_peri_jd: Any,
    eccentricity: Any,
    semi_major_axis: Any,
    inclination_deg: Any,
    omega_deg: Any,
    node_deg: Any,
) -> Tuple[Any, Any]:
    """Offsets ``(dra, ddec)`` of the secondary from the primary at the
    Julian Dates ``t_jd``: dRA* = dRA cos Dec towards East and dDec towards
    North, in the unit of ``semi_major_axis``.

    Elements (Campbell, relative orbit): period (days), a periastron time
    (JD), eccentricity (0 <= e < 1), semi-major axis (> 0), inclination
    (i < 90: position angle increasing), the secondary's argument of
    periastron, and the position angle of the ascending node (the node where
    the secondary recedes), angles in degrees. Each is a number or an array
    with one value per epoch. Separation and position angle are
    ``numpy.hypot(dra, ddec)`` and ``numpy.degrees(numpy.arctan2(dra, ddec)) % 360``.
    """
    x, y = _native.positions(
        _flat(t_jd),
        _flat(period_days),
        _flat(t_peri_jd),
        _flat(eccentricity),
        _flat(semi_major_axis),
        _flat(inclination_deg),
        _flat(omega_deg),
        _flat(node_deg),
    )
    return _shaped(t_jd, x, y)


def velocities(
    t_jd: Any,
    *,
    period_days: Any,
    t_peri_jd: Any,
    eccentricity: Any,
    omega_deg: Any,
    k1_kms: Any,
    k2_kms: Any,
    gamma_kms: Any = 0.0,
) -> Tuple[Any, Any]:
    """Radial velocities ``(v1, v2)`` of the primary and the secondary in
    km/s (positive receding) at the Julian Dates ``t_jd``:
    ``v1 = gamma - K1 s`` and ``v2 = gamma + K2 s`` with
    ``s = cos(nu + omega) + e cos omega``, ``omega`` being the secondary's
    argument of periastron in degrees (the primary's is omega + 180).
    Each element is a number or an array with one value per epoch.
    """
    x, y = _native.velocities(
        _flat(t_jd),
        _flat(period_days),
        _flat(t_peri_jd),
        _flat(eccentricity),
        _flat(omega_deg),
        _flat(k1_kms),
        _flat(k2_kms),
        _flat(gamma_kms),
    )
    return _shaped(t_jd, x, y)
