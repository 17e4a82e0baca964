"""Fits from Python against the command line: same seed and configuration,
same draws bit for bit; results as arrays, dicts and data frames; progress
reports; Ctrl-C stops with a checkpoint that resumes."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

import dyad
from conftest import PRIORS, read_csv_columns, write_config


def bits(values: np.ndarray) -> np.ndarray:
    return np.ascontiguousarray(values, dtype="f8").view(np.uint64)


@pytest.fixture(scope="module")
def command_line_run(tmp_path_factory, dyad_binary):
    """The short demo fit run by `dyad fit`."""
    folder = tmp_path_factory.mktemp("cli")
    config = write_config(folder, folder / "run")
    subprocess.run([str(dyad_binary), "fit", str(config)], check=True, capture_output=True)
    return folder / "run"


def assert_draws_equal_samples_csv(result: dyad.FitResult, run: Path) -> None:
    samples = read_csv_columns(run / "samples.csv")
    names = list(samples)
    draws = result.posterior
    assert draws is not None
    # samples.csv: every quantity (names made file-safe), then
    # log_posterior and mode; the same order as the draws' fields.
    assert len(names) == len(draws.names) + 2
    assert len(draws) == len(samples[names[0]]) > 1000
    for k, name in enumerate(draws.names):
        assert np.array_equal(bits(draws[name]), bits(samples[names[k]])), name
    assert np.array_equal(bits(draws.log_posterior), bits(samples["log_posterior"]))
    assert np.array_equal(draws.mode_labels, samples["mode"].astype(np.uint64))


def test_a_configuration_fitted_from_python_gives_the_command_lines_draws_bit_for_bit(
    command_line_run, tmp_path
):
    config = write_config(tmp_path, tmp_path / "run")
    result = dyad.fit(config, progress=False)
    assert result.folder == tmp_path / "run"
    assert (tmp_path / "run" / "chain.bin").read_bytes() == (
        command_line_run / "chain.bin"
    ).read_bytes()
    assert_draws_equal_samples_csv(result, command_line_run)


def test_arrays_fitted_in_memory_give_the_command_lines_draws_bit_for_bit(
    command_line_run, demo_tables
):
    result = dyad.fit_arrays(
        astrometry=demo_tables["astrometry"],
        velocities=demo_tables["velocities"],
        data={"catalogue_parallax_mas": 24.3, "catalogue_parallax_err_mas": 0.6},
        priors=PRIORS,
        sampler={"walkers": 32, "max_steps": 600, "thinning": 2, "seed": 11},
        progress=False,
    )
    assert result.folder is None and result.plots == []
    assert_draws_equal_samples_csv(result, command_line_run)


def test_data_frames_read_with_pandas_give_the_same_draws(command_line_run):
    pandas = pytest.importorskip("pandas")
    data = Path(__file__).resolve().parents[2] / "demo-data"

    def read(name: str):
        # Before pandas 3 the default float parser may be off in the last
        # bit; "round_trip" is exact (and the default, deprecated, from 3 on).
        exact = {} if int(pandas.__version__.split(".")[0]) >= 3 else {"float_precision": "round_trip"}
        return pandas.read_csv(data / name, comment="#", **exact)

    result = dyad.fit_arrays(
        astrometry=read("hollins-lantern-positions.csv"),
        velocities=read("hollins-lantern-velocities.csv"),
        data={"catalogue_parallax_mas": 24.3, "catalogue_parallax_err_mas": 0.6},
        priors=PRIORS,
        sampler={"walkers": 32, "max_steps": 600, "thinning": 2, "seed": 11},
        progress=False,
    )
    assert_draws_equal_samples_csv(result, command_line_run)
    frame = result.to_pandas()
    assert list(frame.columns[-2:]) == ["log_posterior", "mode"]
    assert frame["mass_primary_msun"].to_numpy().tobytes() == result.draws[
        "mass_primary_msun"
    ].tobytes()


def test_results_are_arrays_with_named_columns_and_plain_dicts(finished_run):
    r = finished_run
    assert r.status in ("converged", "step cap") and not r.cancelled
    assert r.steps == 600 and r.burn_in == 300
    s = r.summary["mass_primary_msun"]
    assert s["q95"][0] < s["q68"][0] < s["median"] < s["q68"][1] < s["q95"][1]
    assert s["label"] == "M₁"
    m1 = r.draws["mass_primary_msun"]
    # The summary's median is that of the draws (Hyndman & Fan 1996 type 7
    # is numpy's default "linear" method).
    assert s["median"] == pytest.approx(float(np.median(m1)), rel=1e-12)
    d = r.diagnostics
    assert len(d["split_rhat"]) == len(d["tau"]) == 15
    assert json.loads(json.dumps(d)) == d
    assert r.evidence is None and r.inverse_temperatures == [1.0]
    assert [m["number"] for m in r.modes] == sorted(set(r.posterior.mode_labels.tolist()))
    names = {p.name for p in r.plots}
    assert {"masses.png", "sky.png", "velocities.png"} <= names
    # The report redrawn from the folder holds the same draws.
    again = dyad.report(r.folder)
    assert np.array_equal(bits(again.draws["period_days"]), bits(r.draws["period_days"]))


def test_predictions_equal_the_command_lines(finished_run, dyad_binary):
    epochs = [2027.5, 2031.25]
    p = finished_run.predict(epochs, scale="jyear")
    assert p.folder.name.startswith("prediction-")
    subprocess.run(
        [str(dyad_binary), "predict", str(finished_run.folder), "2027.5", "2031.25"],
        check=True,
        capture_output=True,
    )
    numbers = sorted(int(f.name.split("-")[1]) for f in finished_run.folder.glob("prediction-*"))
    cli = read_csv_columns(finished_run.folder / f"prediction-{numbers[-1]}" / "predictions.csv")
    assert p.quantities[:2] == ["sep_mas", "pa_deg"]
    assert len(p.bands) == len(p.modes) >= 1
    for mode, table in zip(p.modes, p.bands):
        rows = cli["mode"] == mode["number"]
        assert len(table) == rows.sum() == 2
        assert np.array_equal(bits(table["epoch_jd"]), bits(cli["jd"][rows]))
        for field in table.dtype.names[1:]:
            assert np.array_equal(bits(table[field]), bits(cli[field][rows])), field
        assert np.all(table["sep_mas_lo95"] <= table["sep_mas_median"])
        assert np.all(table["sep_mas_median"] <= table["sep_mas_hi95"])
    frame = pytest.importorskip("pandas") and p.to_pandas()
    assert len(frame) == 2 * len(p.modes)


class Recorder(dyad.Reporter):
    def __init__(self) -> None:
        self.calls: list = []

    def message(self, text):
        self.calls.append(("message", text))

    def warning(self, text):
        self.calls.append(("warning", text))

    def started(self, max_steps):
        self.calls.append(("started", max_steps))

    def progress(self, step, max_steps, acceptance, eta_seconds):
        self.calls.append(("progress", step))

    def finished(self):
        self.calls.append(("finished",))


def test_a_reporter_hears_the_start_the_progress_and_the_end(tmp_path):
    recorder = Recorder()
    dyad.fit(write_config(tmp_path, tmp_path / "run"), progress=recorder)
    kinds = [c[0] for c in recorder.calls]
    assert kinds[0] == "message" and ("started", 600) in recorder.calls
    steps = [c[1] for c in recorder.calls if c[0] == "progress"]
    assert steps and steps == sorted(steps) and steps[-1] == 600
    assert kinds.index("finished") > kinds.index("started")
    # The short run ends at its step cap: the sampler says so.
    assert any("step cap" in c[1] for c in recorder.calls if c[0] == "warning")


class Failing(dyad.Reporter):
    def progress(self, step, max_steps, acceptance, eta_seconds):
        raise RuntimeError("the display broke")


def test_an_exception_in_the_reporter_stops_the_run_and_is_raised(tmp_path):
    config = write_config(tmp_path, tmp_path / "run", max_steps=400_000)
    started = time.monotonic()
    with pytest.raises(RuntimeError, match="the display broke"):
        dyad.fit(config, progress=Failing())
    assert time.monotonic() - started < 60
    assert (tmp_path / "run" / "checkpoint.bin").is_file()


INTERRUPTED = """
import sys, dyad
print("ready", flush=True)
try:
    dyad.fit(sys.argv[1], progress=dyad.LineReporter())
except KeyboardInterrupt:
    print("interrupted", flush=True)
    sys.exit(3)
"""


def test_ctrl_c_stops_the_fit_keeps_the_checkpoint_and_the_run_resumes(tmp_path):
    config = write_config(tmp_path, tmp_path / "run", max_steps=400_000)
    process = subprocess.Popen(
        [sys.executable, "-c", INTERRUPTED, str(config)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    assert process.stdout is not None and process.stdout.readline().strip() == "ready"
    chain = tmp_path / "run" / "chain.bin"
    deadline = time.monotonic() + 120
    while not (chain.is_file() and chain.stat().st_size > 0) and time.monotonic() < deadline:
        time.sleep(0.05)
    time.sleep(0.5)
    os.kill(process.pid, signal.SIGINT)
    sent = time.monotonic()
    out, err = process.communicate(timeout=120)
    assert process.returncode == 3, err
    assert "interrupted" in out
    assert time.monotonic() - sent < 30
    assert "checkpoint" in err and "dyad.resume" in err
    outcome = json.loads((tmp_path / "run" / "outcome.json").read_text())
    assert outcome["status"] == "stopped by the user"
    done = outcome["steps"]
    assert 0 < done < 400_000
    resumed = dyad.resume(tmp_path / "run", max_steps=done + 200, progress=False)
    assert resumed.steps == done + 200 and not resumed.cancelled
    assert resumed.posterior is not None and len(resumed.posterior) > 0
