"""The README's phase diagram of the filling-1/3 wire array, drawn with
matplotlib from a scan run in Python (a notebook-style script: run it cell
by cell in Jupyter, or as `python examples/phase_diagram.py [OUT.png]`).

Needs the package (`pip install ./python`) and matplotlib. The numbers are
those of `pinflow scan flows/laughlin_third.toml`; only the drawing is
matplotlib's.
"""

import sys
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt
import numpy as np
from matplotlib.colors import ListedColormap

import pinflow

# %% The model and the scan: the plane of the model's [scan] table.
here = Path(__file__).resolve().parent
m = pinflow.Model.load(here.parent / "flows" / "laughlin_third.toml")
s = m.scan(x=("lambda", 0.3, 0.95, 27), y=("g", 0.0, 0.95, 39))
print(s.summary["outcomes"], s.summary["winners"])

# %% Phases: one colour per phase label of the final pinned set, most
# points first (the summary's order); unphysical points stay white.
(xname, xs), (yname, ys) = s.axes
phases = [p for p in s.summary["phases"] if p["label"]]
labels = [p["label"] for p in phases]
code = {label: i for i, label in enumerate(labels)}
phase = s.grid("phase")
index = np.full(phase.shape, np.nan)
for label, i in code.items():
    index[phase == label] = i
colours = plt.get_cmap("tab10").colors[: max(len(labels), 1)]

dx, dy = xs[1] - xs[0], ys[1] - ys[0]
extent = (xs[0] - dx / 2, xs[-1] + dx / 2, ys[0] - dy / 2, ys[-1] + dy / 2)
fig, ax = plt.subplots(figsize=(8, 6))
ax.imshow(
    np.ma.masked_invalid(index),
    origin="lower",
    extent=extent,
    aspect="auto",
    cmap=ListedColormap(colours),
    vmin=-0.5,
    vmax=len(colours) - 0.5,
    interpolation="nearest",
)
for i, p in enumerate(phases):
    note = " (target phase)" if p["target"] else ""
    ax.fill_between([], [], color=colours[i], label=p["label"] + note)
if s.summary["outcomes"].get("unphysical"):
    ax.fill_between([], [], facecolor="white", edgecolor="0.3", label="unphysical (V not positive definite)")

# %% Tree-level lines: where each listed term's bare dimension is 2.
X, Y = np.meshgrid(xs, ys)
styles = ["-", "--", "-.", ":"]
for t, style in zip(m.terms, styles * 4):
    d0 = s.grid(f"dimension0:{t}")
    if np.nanmin(d0) < 2 < np.nanmax(d0):
        ax.contour(X, Y, d0, levels=[2.0], colors="k", linestyles=style)
        ax.plot([], [], "k", linestyle=style, label=f"Δ0({t}) = 2")

ax.set_xlabel(xname)
ax.set_ylabel(yname)
ax.set_title(f"{m.name}: phase after successive pinning")
ax.legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), frameon=False)
fig.tight_layout()
out = sys.argv[1] if len(sys.argv) > 1 else "phase_diagram.png"
fig.savefig(out, dpi=120)
print(f"written to {out}")
