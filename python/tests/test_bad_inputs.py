"""Bad input from Python raises ValueError naming the argument and, for a
value, its index; nothing panics across the boundary (a Rust panic would
surface as pyo3's PanicException, which is no ValueError and fails these
tests). None of these cases gets as far as sampling."""

from __future__ import annotations

import re
from typing import Any, Callable, Dict

import numpy as np
import pytest

import dyad
from conftest import PRIORS, write_config


def astrometry(**changes: Any) -> Dict[str, Any]:
    table: Dict[str, Any] = {
        "jyear": np.array([2001.5, 2003.25, 2005.0, 2007.5, 2009.0, 2011.0]),
        "sep_mas": np.array([120.0, 130.0, 140.0, 150.0, 160.0, 170.0]),
        "sep_err_mas": np.full(6, 2.0),
        "pa_deg": np.array([10.0, 20.0, 30.0, 40.0, 50.0, 60.0]),
        "pa_err_deg": np.full(6, 0.5),
    }
    for name, value in changes.items():
        if value is None:
            del table[name]
        else:
            table[name] = value
    return table


def velocities(**changes: Any) -> Dict[str, Any]:
    table: Dict[str, Any] = {
        "jd": np.array([2455000.5, 2455100.5, 2455200.5, 2455300.5, 2455400.5]),
        "rv_kms": np.array([1.0, 2.0, 3.0, 2.0, 1.0]),
        "rv_err_kms": np.full(5, 0.3),
        "star": np.array(["primary"] * 5),
        "instrument": np.array(["bench"] * 5),
    }
    table.update(changes)
    return table


def with_value(values: np.ndarray, index: int, value: Any) -> np.ndarray:
    out = np.array(values, dtype=object if isinstance(value, str) else values.dtype)
    out[index] = value
    return out


def fit(**kwargs: Any) -> Callable[[], Any]:
    def call() -> Any:
        kwargs.setdefault("priors", PRIORS)
        kwargs.setdefault("sampler", {"walkers": 32, "max_steps": 100})
        return dyad.fit_arrays(progress=False, **kwargs)

    return call


ELEMENTS = dict(
    period_days=1000.0,
    t_peri_jd=2451545.0,
    eccentricity=0.3,
    semi_major_axis=100.0,
    inclination_deg=60.0,
    omega_deg=40.0,
    node_deg=120.0,
)


def positions(t: Any = 2451600.0, **changes: Any) -> Callable[[], Any]:
    return lambda: dyad.positions(t, **{**ELEMENTS, **changes})


A = astrometry()
V = velocities()

# (case, call, words the message must contain: the argument and index)
CASES = [
    ("NaN separation", fit(astrometry=astrometry(sep_mas=with_value(A["sep_mas"], 3, np.nan))),
     ["astrometry['sep_mas'][3]", "finite"]),
    ("negative error", fit(astrometry=astrometry(sep_err_mas=with_value(A["sep_err_mas"], 2, -1.0))),
     ["astrometry['sep_err_mas'][2]", "positive"]),
    ("zero velocity error", fit(velocities=velocities(rv_err_kms=with_value(V["rv_err_kms"], 1, 0.0))),
     ["velocities['rv_err_kms'][1]", "positive"]),
    ("mismatched lengths", fit(astrometry=astrometry(pa_deg=A["pa_deg"][:5])),
     ["astrometry['pa_deg']", "5 values", "6"]),
    ("unknown column", fit(astrometry=astrometry(sepp_mas=A["sep_mas"])),
     ["astrometry['sepp_mas']", "unknown"]),
    ("missing column", fit(astrometry=astrometry(pa_err_deg=None)),
     ["astrometry['pa_err_deg']", "missing"]),
    ("complex dtype", fit(astrometry=astrometry(pa_deg=A["pa_deg"].astype(complex))),
     ["astrometry['pa_deg']", "complex128"]),
    ("bool dtype", fit(astrometry=astrometry(corr=np.zeros(6, dtype=bool))),
     ["astrometry['corr']", "bool"]),
    ("datetime dtype", fit(velocities=velocities(jd=np.array(["2020-01-01"] * 5, dtype="datetime64[D]"))),
     ["velocities['jd']", "datetime64"]),
    ("two-dimensional column", fit(astrometry=astrometry(sep_mas=np.ones((6, 2)))),
     ["astrometry['sep_mas']", "one-dimensional"]),
    ("text among numbers", fit(velocities=velocities(rv_kms=with_value(V["rv_kms"], 4, "fast"))),
     ["velocities['rv_kms'][4]", "not a number"]),
    ("position angle out of range", fit(astrometry=astrometry(pa_deg=with_value(A["pa_deg"], 5, 400.0))),
     ["astrometry['pa_deg'][5]", "[0, 360)"]),
    ("correlation of 1.5", fit(astrometry=astrometry(corr=with_value(np.zeros(6), 0, 1.5))),
     ["astrometry['corr'][0]", "between -1 and 1"]),
    ("implausible epoch", fit(astrometry=astrometry(jyear=with_value(A["jyear"], 1, 20.0))),
     ["astrometry['jyear'][1]", "time column"]),
    ("unknown star", fit(velocities=velocities(star=with_value(V["star"], 4, "tertiary"))),
     ["velocities['star'][4]", "tertiary"]),
    ("empty instrument", fit(velocities=velocities(instrument=with_value(V["instrument"], 2, ""))),
     ["velocities['instrument'][2]", "instrument"]),
    ("an object that is no value", fit(astrometry=astrometry(source=np.array(["a", {}, "c", "d", "e", "f"], dtype=object))),
     ["astrometry['source'][1]", "dict"]),
    ("a table that is a list", fit(astrometry=[1.0, 2.0]),
     ["astrometry", "mapping"]),
    ("no measurements", fit(),
     ["astrometry", "no measurements"]),
    ("unknown settings key", fit(astrometry=A, priors={"period_dayz": 10.0}),
     ["settings['priors']['period_dayz']", "unknown key"]),
    ("settings value of the wrong type", fit(astrometry=A, sampler={"walkers": "many"}),
     ["settings['sampler']['walkers']"]),
    ("None in the settings", fit(astrometry=A, sampler={"seed": None}),
     ["settings['sampler']['seed']", "None"]),
    ("a data file in array settings", fit(astrometry=A, data={"astrometry": "positions.csv"}),
     ["settings['data']['astrometry']", "arrays"]),
    ("prior with reversed bounds", fit(astrometry=A, priors={"eccentricity": {"shape": "uniform", "min": 0.9, "max": 0.1}}),
     ["settings['priors']['eccentricity']"]),
    ("instrument prior for no instrument", fit(velocities=V, priors={**PRIORS, "instruments": {"elsewhere": {"offset_kms": 0.0}}}),
     ["settings['priors']['instruments']['elsewhere']", "no instrument"]),
    ("NaN epoch for the kinematics", positions(t=np.array([2451600.0, 2451601.0, np.nan])),
     ["t_jd[2]", "finite"]),
    ("eccentricity of 1.2 at one epoch", positions(t=np.zeros(10) + 2451600.0, eccentricity=with_value(np.full(10, 0.3), 7, 1.2)),
     ["eccentricity[7]", "[0, 1)"]),
    ("elements of the wrong length", positions(t=np.zeros(4) + 2451600.0, period_days=np.ones(3)),
     ["period_days", "3 values", "4"]),
    ("epochs as text", positions(t=np.array(["2020.5"])),
     ["t_jd", "not numbers"]),
    ("negative semi-major axis", positions(semi_major_axis=-5.0),
     ["semi_major_axis", "-5"]),
    ("infinite semi-amplitude", lambda: dyad.velocities(
        np.zeros(3) + 2451600.0, period_days=100.0, t_peri_jd=2451545.0, eccentricity=0.1,
        omega_deg=10.0, k1_kms=np.array([1.0, np.inf, 1.0]), k2_kms=2.0),
     ["k1_kms[1]", "finite"]),
]


def test_at_least_fifteen_cases():
    assert len(CASES) >= 15


@pytest.mark.parametrize("case, call, words", CASES, ids=[c[0] for c in CASES])
def test_bad_input_raises_a_value_error_naming_argument_and_index(case, call, words):
    with pytest.raises(ValueError) as info:
        call()
    message = str(info.value)
    for word in words:
        assert word in message, f"{case}: {word!r} not in {message!r}"


def test_a_bad_configuration_file_names_the_file_and_key(tmp_path):
    config = write_config(tmp_path, tmp_path / "run")
    config.write_text(config.read_text().replace("seed = 11", "seeed = 11"))
    with pytest.raises(ValueError, match=re.escape("demo-short.toml") + r".*'sampler\.seeed'"):
        dyad.fit(config, progress=False)
    assert not (tmp_path / "run").exists()


def test_a_missing_run_folder_is_an_os_error_or_value_error_not_a_panic(tmp_path):
    with pytest.raises((OSError, ValueError)):
        dyad.resume(tmp_path / "nowhere", progress=False)
    with pytest.raises((OSError, ValueError)):
        dyad.predict(tmp_path / "nowhere", [2027.0])


def test_predicting_at_a_nan_epoch_names_the_index(finished_run):
    with pytest.raises(ValueError, match=re.escape("epochs[1]")):
        dyad.predict(finished_run.folder, [2460000.5, float("nan")])
