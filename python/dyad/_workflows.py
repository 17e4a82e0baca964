"""The workflows: fit a configuration file or arrays, resume, report,
compare period windows, predict. Each runs in native code with the GIL
released; Ctrl-C stops the sampler cleanly (a run folder keeps its
checkpoint, so :func:`resume` continues it) and then raises
``KeyboardInterrupt``."""

from __future__ import annotations

import os
import sys
from typing import Any, Dict, Mapping, Optional, Union

import numpy as np

from . import _native
from ._progress import ProgressArg, reporter_for
from ._results import FitResult, PeriodComparison, Posterior, Prediction

PathLike = Union[str, "os.PathLike[str]"]


def _interrupted(error: KeyboardInterrupt) -> None:
    folder = getattr(error, "run_folder", None)
    if folder is not None:
        print(
            f"\nstopped; the checkpoint in {folder} is kept: "
            f"dyad.resume({folder!r}) continues the run",
            file=sys.stderr,
        )


def fit(
    config: PathLike,
    *,
    folder: Optional[PathLike] = None,
    overwrite: bool = False,
    progress: ProgressArg = True,
) -> FitResult:
    """Fits the run configuration file ``config`` (TOML, keys in
    configs/README.md) as ``dyad fit`` does: the same seed and configuration
    give the same draws, bit for bit. The run folder (the configuration's
    ``[output] folder``, or ``folder``) gets the chain, checkpoints, summaries,
    the samples table and the plots; a folder holding files is reused only
    with ``overwrite=True``.

    ``progress``: True for a progress bar (tqdm if installed, else a line on
    standard error), False for none, or a :class:`dyad.Reporter`.
    """
    reporter = reporter_for(progress)
    try:
        native = _native.fit_file(
            os.fspath(config),
            None if folder is None else os.fspath(folder),
            overwrite,
            reporter,
        )
    except KeyboardInterrupt as e:
        _interrupted(e)
        raise
    return FitResult(native)


def _table(argument: str, value: Any) -> Optional[Dict[str, Any]]:
    """A measurement table as a dict of column name to values: from a
    dict, a pandas DataFrame or a NumPy structured array."""
    if value is None:
        return None
    if isinstance(value, np.ndarray) and value.dtype.names is not None:
        return {name: value[name] for name in value.dtype.names}
    columns = getattr(value, "columns", None)
    if columns is not None and hasattr(value, "__getitem__"):
        return {name: np.asarray(value[name]) for name in columns}
    if isinstance(value, Mapping):
        return dict(value)
    return value  # refused by the native module, naming the argument


def fit_arrays(
    *,
    astrometry: Any = None,
    velocities: Any = None,
    priors: Optional[Mapping[str, Any]] = None,
    sampler: Optional[Mapping[str, Any]] = None,
    data: Optional[Mapping[str, Any]] = None,
    astrometry_errors: Optional[Mapping[str, Any]] = None,
    start: Optional[Mapping[str, Any]] = None,
    progress: ProgressArg = True,
) -> FitResult:
    """Fits measurements given as tables, in memory (nothing is written).

    ``astrometry`` and ``velocities`` are pandas DataFrames, dicts of
    arrays, or NumPy structured arrays, whose columns are those of the
    measurement files (README, "Input files"): one time column (``jd``,
    ``mjd``, ``jyear`` or ``byear``), then ``sep_mas``, ``sep_err_mas``,
    ``pa_deg``, ``pa_err_deg`` or ``dra_mas``, ``ddec_mas``,
    ``dra_err_mas``, ``ddec_err_mas``, optional ``corr`` and ``source``;
    ``rv_kms``, ``rv_err_kms``, ``star`` and ``instrument`` for velocities.
    The same checks apply as to the files: a bad value is a ``ValueError``
    naming the table, column and index.

    ``priors``, ``sampler``, ``data`` (``catalogue_parallax_mas``,
    ``catalogue_parallax_err_mas``, ``reference_epoch_jd``),
    ``astrometry_errors`` and ``start`` are the tables of a configuration
    file as dicts, e.g. ``priors={"period_years": {"shape": "log_uniform",
    "min": 1, "max": 1000}}``, ``sampler={"walkers": 32, "seed": 3}``.
    """
    settings = {
        key: dict(value)
        for key, value in (
            ("data", data),
            ("priors", priors),
            ("astrometry_errors", astrometry_errors),
            ("start", start),
            ("sampler", sampler),
        )
        if value is not None
    }
    reporter = reporter_for(progress)
    native = _native.fit_arrays(
        _table("astrometry", astrometry),
        _table("velocities", velocities),
        settings,
        reporter,
    )
    return FitResult(native)


def resume(
    folder: PathLike, *, max_steps: Optional[int] = None, progress: ProgressArg = True
) -> FitResult:
    """Continues the stopped run in ``folder`` from its checkpoint, up to its
    step cap (or the new total ``max_steps``), bit for bit as if it had never
    stopped."""
    reporter = reporter_for(progress)
    try:
        native = _native.resume(os.fspath(folder), max_steps, reporter)
    except KeyboardInterrupt as e:
        _interrupted(e)
        raise
    return FitResult(native)


def report(folder: PathLike) -> Posterior:
    """Redraws the summaries and plots of the finished run in ``folder``
    (as ``dyad report``) and returns its posterior."""
    return Posterior(_native.report(os.fspath(folder)))


def compare_periods(
    config: PathLike,
    *,
    output: Optional[PathLike] = None,
    overwrite: bool = False,
    progress: ProgressArg = True,
) -> PeriodComparison:
    """Compares the period windows of the configuration file ``config``
    (``[sampler] period_windows_days``) by evidence, as ``dyad periods``
    does: one tempered run per window, into ``output`` (default: the run
    folder's name with ``-periods``)."""
    import json

    reporter = reporter_for(progress)
    text = _native.compare_periods(
        os.fspath(config),
        None if output is None else os.fspath(output),
        overwrite,
        reporter,
    )
    return PeriodComparison(json.loads(text))


def predict(folder: PathLike, epochs: Any, *, scale: str = "jd") -> Prediction:
    """Predictive bands of separation, position angle, offsets and velocities
    at ``epochs`` (in the time scale ``scale``: ``jd``, ``mjd``, ``jyear`` or
    ``byear``) from the finished run in ``folder``, per period mode, as
    ``dyad predict`` does (the files go into a new ``prediction-N`` folder)."""
    import json

    text = _native.predict(os.fspath(folder), epochs, scale)
    return Prediction(json.loads(text))
