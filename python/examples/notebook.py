"""A notebook session with copyloop, runnable as a script: ``python python/examples/notebook.py``.

It loads the bundled gland loop (an invented hormone, velorin, secreted by an invented gland
that its free level inhibits; every number in the file is invented for the demonstration), runs
an exact replicate ensemble, plots the mean time course of the free hormone and its carrier-bound
form with matplotlib where it is installed, then reconciles the loop's carrier motifs with their
Langmuir-form, total-QSSA and ODE predictions and prints the verdicts.

Environment (optional): COPYLOOP_EXAMPLE_OUT, the folder for the figure (default: the current
one); COPYLOOP_EXAMPLE_REPLICATES, the ensemble size (default 100).
"""

import os
from pathlib import Path

import copyloop

ROOT = Path(__file__).resolve().parents[2]
OUT = Path(os.environ.get("COPYLOOP_EXAMPLE_OUT", "."))
REPLICATES = int(os.environ.get("COPYLOOP_EXAMPLE_REPLICATES", "100"))

# %% Load the network and look at what the compiler found.
net = copyloop.load(ROOT / "reactions" / "gland_loop.crn")
view = net.check()
print("species:", ", ".join(view.species))
print("carrier motifs:", ", ".join(f"{m['carrier']}/{m['ligand']}" for m in view.motifs))

# %% An exact ensemble (Gillespie direct method) over one hour, sampled every minute.
run = net.simulate(3600, replicates=REPLICATES, grid=61, seed=1)
h, hg = run.species.index("H"), run.species.index("HG")
print(f"{run.replicates} replicates; free hormone at 1 h: {run.mean[-1, h]:.1f} "
      f"± {run.sd[-1, h]:.1f} molecules (mean ± sd across replicates)")

# %% The time course, mean ± one standard deviation across replicates.
try:
    import matplotlib.pyplot as plt
except ImportError:
    print("matplotlib is not installed: no figure (pip install matplotlib to draw one)")
else:
    fig, ax = plt.subplots(figsize=(6, 3.5))
    for i, label in ((h, "free hormone H"), (hg, "carrier-bound HG")):
        ax.plot(run.times / 60, run.mean[:, i], label=label)
        ax.fill_between(run.times / 60, run.mean[:, i] - run.sd[:, i],
                        run.mean[:, i] + run.sd[:, i], alpha=0.25)
    ax.set_xlabel("time (min)")
    ax.set_ylabel("molecules (1 pL)")
    ax.set_title(f"gland loop, {run.replicates} exact replicates (invented numbers)")
    ax.legend()
    fig.tight_layout()
    figure = OUT / "gland_loop_time_course.png"
    fig.savefig(figure, dpi=120)
    print(f"figure written to {figure}")

# %% Reconcile: does each motif's stationary flux follow the organ-level law?
rec = net.reconcile(replicates=max(REPLICATES // 5, 2), seed=1)
for m in rec.motifs:
    low, high = m.ensemble_ci95
    tqssa = "n/a" if m.tqssa is None else f"{m.tqssa:.3g}"
    print(f"{m.carrier}/{m.ligand} ({m.kind}, output {m.output}): ensemble {m.ensemble:.3g} "
          f"[{low:.3g}, {high:.3g}] /s; Langmuir {m.langmuir:.3g}, total QSSA {tqssa}, "
          f"ODE {m.ode:.3g} /s")
    print(f"    verdict: {m.verdict} (Langmuir form), total QSSA {m.verdicts['tqssa']}, "
          f"ODE {m.verdicts['ode']}")
