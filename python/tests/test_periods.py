"""Period windows compared by evidence from Python, on the invented sparse
system "Pebble Wren" (demo-data/; true period 3.1 yr by its scenario file
demo-data/pebble-wren.scenario.toml, an alias near 1.5 yr): the windows'
evidences and probabilities equal `dyad periods` bit for bit."""

from __future__ import annotations

import json
import subprocess

import numpy as np

import dyad
from conftest import REPO


def short_sparse_config(folder):
    text = (REPO / "configs" / "sparse.toml").read_text()
    text = text.replace('"../demo-data', f'"{REPO / "demo-data"}')
    text = text.replace("max_steps = 8000", "max_steps = 1500")
    text = text.replace(
        "period_windows_years = [[0.5, 0.68], [0.68, 0.95], [1.2, 1.9], [2.4, 4.5]]",
        "period_windows_years = [[1.2, 1.9], [2.4, 4.5]]",
    )
    text = text.replace('folder = "../runs/sparse"', f'folder = "{folder / "run"}"')
    path = folder / "sparse-short.toml"
    path.write_text(text)
    return path


def test_period_windows_from_python_equal_the_command_line(tmp_path, dyad_binary):
    config = short_sparse_config(tmp_path)
    subprocess.run(
        [str(dyad_binary), "periods", str(config), "--quiet", "--output", str(tmp_path / "cli")],
        check=True,
        capture_output=True,
    )
    cli = json.loads((tmp_path / "cli" / "periods.json").read_text())["windows"]
    comparison = dyad.compare_periods(config, output=tmp_path / "py", progress=False)
    assert (tmp_path / "py" / "periods.json").is_file()
    assert len(comparison.windows) == len(cli) == 2
    for ours, theirs in zip(comparison.windows, cli):
        assert ours["lo_days"] == theirs["period_min_days"]
        for method in ("stepping_stone", "thermodynamic_integration"):
            for key in ("ln_z", "posterior_probability"):
                assert ours[method][key] == theirs[method][key], (method, key)
    p = comparison.probabilities
    assert abs(p.sum() - 1.0) < 1e-12
    # The window holding the true period (3.1 yr) is the more probable.
    best = comparison.windows[int(np.argmax(p))]
    assert best["lo_days"] <= 3.1 * 365.25 <= best["hi_days"]
    assert "M₁+M₂" in {m["name"] for m in best["masses"]}
    for m in best["masses"]:
        assert m["q95"][0] <= m["q68"][0] <= m["median"] <= m["q68"][1] <= m["q95"][1]
