"""Time per epoch of dyad.positions from Python, one orbit over N epochs
(the batch Kepler solver) and one orbit per epoch (an orbit set up for
every epoch), for N from 1 to 10^6. Prints a table; with matplotlib
installed also writes the figure benchmarks/python-positions.png.

    python benchmarks/python_positions.py     # with the dyad package installed

A benchmark, not a test: the numbers depend on the machine and its load.
"""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np

import dyad

SIZES = [1, 10, 100, 1_000, 10_000, 100_000, 1_000_000]
ELEMENTS = dict(
    period_days=10_254.0,
    t_peri_jd=2_454_979.0,
    eccentricity=0.42,
    semi_major_axis=296.0,
    inclination_deg=57.8,
    omega_deg=125.1,
    node_deg=71.9,
)


def best_time(call, n: int) -> float:
    """The best of three repeats of about 2 * 10^4 epochs each."""
    call()
    repeats = max(1, int(2e4 // n))
    best = float("inf")
    for _ in range(3):
        start = time.perf_counter()
        for _ in range(repeats):
            call()
        best = min(best, (time.perf_counter() - start) / repeats)
    return best


def main() -> None:
    rng = np.random.default_rng(1)
    rows = []
    print(f"{'epochs':>9} {'one orbit ns/epoch':>19} {'orbit per epoch ns/epoch':>25}")
    for n in SIZES:
        t = rng.uniform(2_440_000.0, 2_470_000.0, n)
        one = best_time(lambda: dyad.positions(t, **ELEMENTS), n)
        per = {k: np.full(n, v) for k, v in ELEMENTS.items()}
        many = best_time(lambda: dyad.positions(t, **per), n)
        rows.append((n, 1e9 * one / n, 1e9 * many / n))
        print(f"{n:>9} {rows[-1][1]:>19.1f} {rows[-1][2]:>25.1f}")
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        return
    n, one, many = (np.array(c) for c in zip(*rows))
    fig, ax = plt.subplots(figsize=(6, 3.8))
    ax.loglog(n, one, "o-", label="one orbit, N epochs")
    ax.loglog(n, many, "s-", label="elements per epoch")
    ax.set_xlabel("epochs per call N")
    ax.set_ylabel("time per epoch [ns]")
    ax.set_title("dyad.positions from Python")
    ax.grid(True, which="both", alpha=0.3)
    ax.legend()
    out = Path(__file__).with_name("python-positions.png")
    fig.savefig(out, dpi=110, bbox_inches="tight")
    print(f"wrote {out}")


if __name__ == "__main__":
    main()
