"""Type stubs of the native module (python/src in the dyad repository).
Call the functions of the ``dyad`` package instead: they wrap these."""

from typing import Any, Dict, Optional

import numpy as np
import numpy.typing as npt

__version__: str

class DyadError(RuntimeError): ...

def fit_file(
    config: str, folder: Optional[str] = None, overwrite: bool = False, reporter: Any = None
) -> Dict[str, Any]: ...
def fit_arrays(
    astrometry: Optional[Dict[str, Any]],
    velocities: Optional[Dict[str, Any]],
    settings: Dict[str, Any],
    reporter: Any = None,
) -> Dict[str, Any]: ...
def resume(folder: str, max_steps: Optional[int] = None, reporter: Any = None) -> Dict[str, Any]: ...
def report(folder: str) -> Dict[str, Any]: ...
def compare_periods(
    config: str, output: Optional[str] = None, overwrite: bool = False, reporter: Any = None
) -> str: ...
def predict(folder: str, epochs: npt.ArrayLike, scale: str = "jd") -> str: ...
def positions(
    t_jd: npt.ArrayLike,
    period_days: npt.ArrayLike,
    t_peri_jd: npt.ArrayLike,
    eccentricity: npt.ArrayLike,
    semi_major_axis: npt.ArrayLike,
    inclination_deg: npt.ArrayLike,
    omega_deg: npt.ArrayLike,
    node_deg: npt.ArrayLike,
) -> tuple[np.ndarray, np.ndarray]: ...
def velocities(
    t_jd: npt.ArrayLike,
    period_days: npt.ArrayLike,
    t_peri_jd: npt.ArrayLike,
    eccentricity: npt.ArrayLike,
    omega_deg: npt.ArrayLike,
    k1_kms: npt.ArrayLike,
    k2_kms: npt.ArrayLike,
    gamma_kms: npt.ArrayLike,
) -> tuple[np.ndarray, np.ndarray]: ...
