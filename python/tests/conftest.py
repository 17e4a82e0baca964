"""Shared fixtures: the repository, the command-line binary and the
kinematics reference program (both built by cargo before these tests run:
.ci/python-tests), and a small configuration of the demo system."""

from __future__ import annotations

import csv
import os
from pathlib import Path
from typing import Dict

import numpy as np
import pytest

REPO = Path(__file__).resolve().parents[2]


def _binary(variable: str, relative: str) -> Path:
    path = Path(os.environ.get(variable, REPO / relative))
    if not path.is_file():
        pytest.fail(f"{path} is missing: build it first (see .ci/python-tests) or set {variable}")
    return path


@pytest.fixture(scope="session")
def dyad_binary() -> Path:
    """The `dyad` command line (target/release/dyad)."""
    return _binary("DYAD_BIN", "target/release/dyad")


@pytest.fixture(scope="session")
def kinematics_reference() -> Path:
    """The Rust reference program of crates/dyad-orbit/examples."""
    return _binary("DYAD_KINEMATICS_REFERENCE", "target/release/examples/kinematics_reference")


# The demo system (demo-data/, invented) with the demo's priors; a short
# run (walkers and steps cut down) keeps CI fast: the tests compare runs
# with each other, not with the truth.
SETTINGS = """
[priors]
period_years = { shape = "log_uniform", min = 1.0, max = 1000.0 }
total_mass_msun = { shape = "log_uniform", min = 0.1, max = 20.0 }
mass_ratio = { shape = "uniform", min = 0.0, max = 1.5 }
jitter_kms = { shape = "log_uniform", min = 0.01, max = 5.0 }

[sampler]
walkers = 32
max_steps = {max_steps}
thinning = 2
seed = 11
"""

PRIORS = {
    "period_years": {"shape": "log_uniform", "min": 1.0, "max": 1000.0},
    "total_mass_msun": {"shape": "log_uniform", "min": 0.1, "max": 20.0},
    "mass_ratio": {"shape": "uniform", "min": 0.0, "max": 1.5},
    "jitter_kms": {"shape": "log_uniform", "min": 0.01, "max": 5.0},
}


def write_config(folder: Path, output: Path, max_steps: int = 600) -> Path:
    """A configuration of the demo data into ``output``."""
    data = REPO / "demo-data"
    text = f"""
[data]
astrometry = "{data / 'hollins-lantern-positions.csv'}"
velocities = ["{data / 'hollins-lantern-velocities.csv'}"]
catalogue_parallax_mas = 24.3
catalogue_parallax_err_mas = 0.6

[output]
folder = "{output}"
""" + SETTINGS.replace("{max_steps}", str(max_steps))
    path = folder / "demo-short.toml"
    path.write_text(text)
    return path


def read_csv_columns(path: Path) -> Dict[str, np.ndarray]:
    """A measurement or samples file as columns (comment lines skipped);
    numbers are parsed by Python's float, which is exact."""
    with open(path, newline="") as f:
        rows = [r for r in csv.reader(f) if r and not r[0].lstrip().startswith("#")]
    header, body = rows[0], rows[1:]
    columns: Dict[str, np.ndarray] = {}
    for k, name in enumerate(header):
        values = [r[k] for r in body]
        try:
            columns[name] = np.array([float(v) for v in values], dtype="f8")
        except ValueError:
            columns[name] = np.array(values, dtype=object)
    return columns


@pytest.fixture(scope="session")
def demo_tables() -> Dict[str, Dict[str, np.ndarray]]:
    """The demo measurements as columns, as a notebook would hold them."""
    data = REPO / "demo-data"
    return {
        "astrometry": read_csv_columns(data / "hollins-lantern-positions.csv"),
        "velocities": read_csv_columns(data / "hollins-lantern-velocities.csv"),
    }


@pytest.fixture(scope="session")
def finished_run(tmp_path_factory: pytest.TempPathFactory):
    """A short fit of the demo configuration into a run folder, from Python."""
    import dyad

    folder = tmp_path_factory.mktemp("finished")
    config = write_config(folder, folder / "run")
    return dyad.fit(config, progress=False)
