"""Progress displays for running fits: a tqdm bar when tqdm is installed
(``tqdm.auto`` picks the notebook widget or the terminal bar), otherwise
one line on standard error rewritten in place. A reporter is any object
with the five methods of :class:`Reporter`; the native module calls them
from the thread that started the fit."""

from __future__ import annotations

import sys
import time
import warnings
from typing import Any, Optional, Union


class SamplerWarning(UserWarning):
    """Something to know about a result: an unconverged chain, a stuck
    walker, a sparse orbit sampled without tempering."""


class Reporter:
    """Receives what a running workflow reports; this one shows nothing
    but turns the workflow's warnings into :class:`SamplerWarning`."""

    def message(self, text: str) -> None:
        """What the workflow is doing ("searching for a starting point")."""

    def warning(self, text: str) -> None:
        """A warning about the result."""
        warnings.warn(text, SamplerWarning, stacklevel=2)

    def started(self, max_steps: int) -> None:
        """Sampling of at most ``max_steps`` steps starts."""

    def progress(
        self, step: int, max_steps: int, acceptance: float, eta_seconds: Optional[float]
    ) -> None:
        """``step`` of (at most) ``max_steps`` steps are done."""

    def finished(self) -> None:
        """Sampling returned."""


def _duration(seconds: Optional[float]) -> str:
    if seconds is None:
        return "?"
    seconds = int(seconds)
    if seconds >= 3600:
        return f"{seconds // 3600}h{seconds % 3600 // 60:02d}m"
    return f"{seconds // 60}m{seconds % 60:02d}s"


class LineReporter(Reporter):
    """One line on standard error, rewritten at most twice a second."""

    def __init__(self, stream: Any = None) -> None:
        self._stream = stream if stream is not None else sys.stderr
        self._last = 0.0
        self._width = 0

    def message(self, text: str) -> None:
        print(text, file=self._stream, flush=True)

    def progress(
        self, step: int, max_steps: int, acceptance: float, eta_seconds: Optional[float]
    ) -> None:
        now = time.monotonic()
        if now - self._last < 0.5 and step < max_steps:
            return
        self._last = now
        line = (
            f"step {step} of {max_steps} ({100.0 * step / max(max_steps, 1):.0f} %), "
            f"acceptance {acceptance:.2f}, about {_duration(eta_seconds)} left"
        )
        self._width = max(self._width, len(line))
        print("\r" + line.ljust(self._width), end="", file=self._stream, flush=True)

    def finished(self) -> None:
        if self._width:
            print(file=self._stream, flush=True)
            self._width = 0


class TqdmReporter(Reporter):
    """A tqdm bar (``tqdm.auto``: a widget in a notebook, a bar in a terminal)."""

    def __init__(self) -> None:
        from tqdm.auto import tqdm

        self._tqdm = tqdm
        self._bar: Any = None

    def message(self, text: str) -> None:
        self._tqdm.write(text, file=sys.stderr)

    def started(self, max_steps: int) -> None:
        self._bar = self._tqdm(total=max_steps, unit="step", desc="sampling", leave=True)

    def progress(
        self, step: int, max_steps: int, acceptance: float, eta_seconds: Optional[float]
    ) -> None:
        if self._bar is None:
            self.started(max_steps)
        bar = self._bar
        # The total is what the stopping rule expects to need, capped at the
        # step cap: it moves as the run learns its autocorrelation times.
        if bar.total != max_steps:
            bar.total = max_steps
        bar.n = step
        bar.set_postfix(acceptance=f"{acceptance:.2f}", refresh=False)
        bar.refresh()

    def finished(self) -> None:
        if self._bar is not None:
            self._bar.close()
            self._bar = None


ProgressArg = Union[bool, Reporter, Any]


def reporter_for(progress: ProgressArg) -> Reporter:
    """The reporter for a ``progress`` argument: ``True`` for the default
    display (tqdm if installed, else a line on standard error), ``False``
    for none, or a reporter object of one's own."""
    if progress is True:
        try:
            return TqdmReporter()
        except ImportError:
            return LineReporter()
    if progress is False or progress is None:
        return Reporter()
    for method in ("message", "warning", "started", "progress", "finished"):
        if not callable(getattr(progress, method, None)):
            raise ValueError(
                f"progress: expected True, False or an object with a {method}() method"
            )
    return progress
