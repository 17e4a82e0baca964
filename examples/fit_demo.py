"""Fits the demo system (configs/demo.toml, the invented binary "Hollin's
Lantern") from Python and draws the posterior of the two masses with
matplotlib, when it is installed.

    pip install ./python matplotlib     # or the built wheel
    python examples/fit_demo.py         # from the repository root

The run folder is the configuration's (runs/demo); a second run reuses it.
Ctrl-C stops the sampler with a checkpoint: dyad.resume("runs/demo") continues.
"""

from pathlib import Path

import dyad

root = Path(__file__).resolve().parents[1]
result = dyad.fit(root / "configs" / "demo.toml", overwrite=True)
print(result)

m1 = result.draws["mass_primary_msun"]
m2 = result.draws["mass_secondary_msun"]
for name in ("mass_primary_msun", "mass_secondary_msun"):
    s = result.summary[name]
    print(f"{name}: {s['median']:.3f} (68 %: {s['q68'][0]:.3f} to {s['q68'][1]:.3f})")

try:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
except ImportError:
    print("matplotlib is not installed: no figure (the run folder has plots/masses.png)")
else:
    fig, ax = plt.subplots(figsize=(6, 4))
    ax.hist(m1, bins=60, histtype="step", density=True, label="primary $M_1$")
    ax.hist(m2, bins=60, histtype="step", density=True, label="secondary $M_2$")
    ax.set_xlabel("mass [$M_\\odot$]")
    ax.set_ylabel("posterior density")
    ax.legend()
    out = result.folder.resolve() / "masses-matplotlib.png"
    fig.savefig(out, dpi=120, bbox_inches="tight")
    print(f"wrote {out}")
