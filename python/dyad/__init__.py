"""dyad: orbits and masses of binary stars, with honest credible intervals,
from relative astrometry, radial velocities and a parallax.

Fit a configuration file (as the ``dyad`` command line does, into a run
folder that can be resumed and predicted from) or measurements given as
pandas DataFrames or NumPy arrays (in memory)::

    import dyad
    result = dyad.fit("configs/demo.toml")
    m1 = result.summary["mass_primary_msun"]
    print(m1["median"], m1["q68"])
    frame = result.to_pandas()

Workflows: :func:`fit`, :func:`fit_arrays`, :func:`resume`, :func:`report`,
:func:`compare_periods`, :func:`predict`. Kinematics for given elements:
:func:`positions`, :func:`velocities`. Bad input raises ``ValueError``
naming the argument (and index); other failures raise :class:`DyadError`.
"""

from ._native import DyadError, __version__
from ._kinematics import positions, velocities
from ._progress import LineReporter, Reporter, SamplerWarning, TqdmReporter
from ._results import FitResult, PeriodComparison, Posterior, Prediction
from ._workflows import compare_periods, fit, fit_arrays, predict, report, resume

__all__ = [
    "DyadError",
    "FitResult",
    "LineReporter",
    "PeriodComparison",
    "Posterior",
    "Prediction",
    "Reporter",
    "SamplerWarning",
    "TqdmReporter",
    "__version__",
    "compare_periods",
    "fit",
    "fit_arrays",
    "positions",
    "predict",
    "report",
    "resume",
    "velocities",
]
