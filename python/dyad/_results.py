"""What the workflows return: posterior draws as NumPy structured arrays
(with ``to_pandas()`` when pandas is installed), summaries and
diagnostics as plain dicts, period modes, evidences and predictions."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any, Dict, List, Optional

import numpy as np


def _pandas() -> Any:
    try:
        import pandas
    except ImportError as e:  # pragma: no cover - depends on the environment
        raise ImportError("to_pandas() needs pandas: pip install pandas") from e
    return pandas


def _nan_for_none(value: Any) -> Any:
    """JSON has no NaN: the native module writes null for it."""
    if value is None:
        return float("nan")
    if isinstance(value, list):
        return [_nan_for_none(v) for v in value]
    return value


class Posterior:
    """Posterior draws after burn-in, their summary and period modes.

    ``draws`` is a structured array with one float64 field per quantity
    (sampled and derived, the columns of ``samples.csv``); ``draws[name]``
    or ``posterior[name]`` is one column. ``summary[name]`` is a dict with
    ``median``, ``mean``, ``sd``, ``q68`` and ``q95`` (equal-tailed
    intervals), ``map`` (the value at the draw of highest posterior density),
    ``unit`` and ``label``. ``modes`` lists the separate period modes
    (``weight``, ``period_days``, ``range_days``, ...) and ``mode_labels``
    gives the mode of every draw.
    """

    def __init__(self, native: Dict[str, Any]) -> None:
        self.names: List[str] = list(native["names"])
        self.units: List[str] = list(native["units"])
        values = native["values"]
        self.draws: np.ndarray = np.empty(
            values.shape[0], dtype=[(name, "f8") for name in self.names]
        )
        for k, name in enumerate(self.names):
            self.draws[name] = values[:, k]
        self.log_posterior: np.ndarray = native["log_posterior"]
        self.mode_labels: np.ndarray = native["mode_labels"]
        self.walkers: int = native["walkers"]
        summary = json.loads(native["summary_json"])
        self.n_draws: int = summary["n_draws"]
        self.summary: Dict[str, Dict[str, Any]] = {
            p["name"]: {k: _nan_for_none(v) for k, v in p.items() if k != "name"}
            for p in summary["parameters"]
        }
        self.modes: List[Dict[str, Any]] = json.loads(native["modes_json"])
        self.text: str = native["text"]

    def __getitem__(self, name: str) -> np.ndarray:
        return self.draws[name]

    def __len__(self) -> int:
        return len(self.draws)

    def to_pandas(self) -> Any:
        """The draws as a pandas DataFrame, with ``log_posterior`` and
        ``mode`` columns."""
        frame = _pandas().DataFrame(self.draws)
        frame["log_posterior"] = self.log_posterior
        frame["mode"] = self.mode_labels
        return frame

    def __repr__(self) -> str:
        return f"<dyad.Posterior: {len(self)} draws of {len(self.names)} quantities>\n{self.text}"


class FitResult:
    """How a fit ended and what it found.

    ``status`` is "converged", "step cap" or "stopped by the user";
    ``diagnostics`` holds the cold chain's autocorrelation times, split
    R-hat, effective sample sizes and acceptance; ``evidence`` the
    thermodynamic-integration and stepping-stone estimates of a tempered
    run (else None); ``posterior`` the draws (None for a stopped run:
    resume it first). A fit into a run folder also has ``folder`` and the
    report's ``plots`` there.
    """

    def __init__(self, native: Dict[str, Any]) -> None:
        self.status: str = native["status"]
        self.steps: int = native["steps"]
        self.burn_in: int = native["burn_in"]
        self.cancelled: bool = native["cancelled"]
        self.warnings: List[str] = list(native["warnings"])
        self.diagnostics: Dict[str, Any] = json.loads(native["diagnostics_json"])
        self.evidence: Optional[Dict[str, Any]] = json.loads(native["evidence_json"])
        self.inverse_temperatures: List[float] = list(native["inverse_temperatures"])
        self.swap_acceptance_rate: List[float] = list(native["swap_acceptance_rate"])
        folder = native["folder"]
        self.folder: Optional[Path] = Path(folder) if folder is not None else None
        posterior = native["posterior"]
        self.posterior: Optional[Posterior] = (
            Posterior(posterior) if posterior is not None else None
        )

    @property
    def plots(self) -> List[Path]:
        """The report's plots (PNG files) of a fit into a run folder."""
        if self.folder is None:
            return []
        return sorted((self.folder / "plots").glob("*.png"))

    def _posterior(self) -> Posterior:
        if self.posterior is None:
            raise ValueError(
                "the run was stopped before it finished: resume it with "
                f"dyad.resume({str(self.folder)!r}) first"
            )
        return self.posterior

    @property
    def draws(self) -> np.ndarray:
        """The posterior draws (see :class:`Posterior`)."""
        return self._posterior().draws

    @property
    def summary(self) -> Dict[str, Dict[str, Any]]:
        """Median, intervals and MAP of every quantity."""
        return self._posterior().summary

    @property
    def modes(self) -> List[Dict[str, Any]]:
        """The period modes of the posterior."""
        return self._posterior().modes

    def to_pandas(self) -> Any:
        """The draws as a pandas DataFrame."""
        return self._posterior().to_pandas()

    def predict(self, epochs: Any, scale: str = "jd") -> "Prediction":
        """Predictions at ``epochs`` from this run (a fit into a run folder)."""
        from ._workflows import predict

        if self.folder is None:
            raise ValueError(
                "predictions are made from a run folder: fit a configuration file "
                "(dyad.fit) to get one"
            )
        return predict(self.folder, epochs, scale=scale)

    def __repr__(self) -> str:
        head = f"<dyad.FitResult: {self.status} after {self.steps} steps"
        if self.folder is not None:
            head += f", in {self.folder}"
        head += ">"
        if self.posterior is not None:
            head += "\n" + self.posterior.text
        return head


_BAND_FIELDS = ("median", "lo68", "hi68", "lo90", "hi90", "lo95", "hi95")


class Prediction:
    """Predictive bands of the fitted orbit at given epochs, per period mode.

    ``bands[m]`` is a structured array for mode ``m`` (``modes[m]``) with
    the field ``epoch_jd`` and, for every quantity ``q`` of ``quantities``
    (``sep_mas``, ``pa_deg``, ``dra_mas``, ``ddec_mas``, ``rv_primary_kms``,
    ``rv_secondary_kms``, as the model can predict), the fields
    ``q_median``, ``q_lo68``, ``q_hi68``, ``q_lo90``, ``q_hi90``, ``q_lo95``
    and ``q_hi95``. The files (table, plots) are in ``folder``.
    """

    def __init__(self, native: Dict[str, Any]) -> None:
        self.folder = Path(native["folder"])
        self.epochs_jd: np.ndarray = np.asarray(native["epochs_jd"], dtype="f8")
        self.quantities: List[str] = list(native["quantities"])
        self.modes: List[Dict[str, Any]] = native["modes"]
        self.text: str = native["text"]
        fields = [("epoch_jd", "f8")] + [
            (f"{q}_{b}", "f8") for q in self.quantities for b in _BAND_FIELDS
        ]
        self.bands: List[np.ndarray] = []
        for per_epoch in native["bands"]:
            table = np.empty(len(self.epochs_jd), dtype=fields)
            table["epoch_jd"] = self.epochs_jd
            for i, quantities in enumerate(per_epoch):
                for q, (median, q68, q90, q95) in zip(self.quantities, quantities):
                    values = [median, *q68, *q90, *q95]
                    for b, v in zip(_BAND_FIELDS, values):
                        table[f"{q}_{b}"][i] = _nan_for_none(v)
            self.bands.append(table)

    def to_pandas(self) -> Any:
        """All modes' bands as one DataFrame with a ``mode`` column."""
        pandas = _pandas()
        frames = []
        for mode, table in zip(self.modes, self.bands):
            frame = pandas.DataFrame(table)
            frame.insert(0, "mode", mode["number"])
            frames.append(frame)
        return pandas.concat(frames, ignore_index=True)

    def __repr__(self) -> str:
        return f"<dyad.Prediction: {len(self.epochs_jd)} epochs, {len(self.modes)} mode(s)>\n{self.text}"


class PeriodComparison:
    """Period windows compared by evidence.

    ``windows`` lists, in order of increasing period, each window's
    ``lo_days`` and ``hi_days``, its global ``prior_mass``, its
    ``evidence`` (both estimators, with errors), its posterior probability
    among the windows from each estimator (``stepping_stone``,
    ``thermodynamic_integration``: ``ln_z``, ``posterior_probability`` and
    their errors) and the ``masses`` in it. The files are in ``folder``.
    """

    def __init__(self, native: Dict[str, Any]) -> None:
        self.folder = Path(native["folder"])
        self.windows: List[Dict[str, Any]] = native["windows"]
        self.table: str = native["table"]

    @property
    def probabilities(self) -> np.ndarray:
        """Posterior probability of each window (stepping-stone estimate)."""
        return np.array(
            [w["stepping_stone"]["posterior_probability"] for w in self.windows], dtype="f8"
        )

    def __repr__(self) -> str:
        return f"<dyad.PeriodComparison: {len(self.windows)} windows in {self.folder}>\n{self.table}"
