"""Branch diagram: the watched unknown against the parameter, stable runs solid.

Unstable runs are dashed, folds are marked with diamonds and Hopf points
with rings labelled by their frequency.  Same look and the same
object-oriented matplotlib use as `adlin.report.figures`.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from .._units import si
from .branch import BranchSummary
from .figures import BACKGROUND, PALETTE, TEXT, _style

BRANCH_FILE = "branch.png"


def _label(name: str, unit: str) -> str:
    return f"{name} [{unit}]" if unit else name


def branch_figure(s: BranchSummary):
    """One panel: parameter on x, watched column on y."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.2, 4.6), dpi=130, facecolor="white", layout="constrained")
    ax = fig.add_subplot()
    _style(ax)
    stable_color, unstable_color = PALETTE[0], PALETTE[1]
    # a hairline through every sample keeps the walk order visible across runs
    ax.plot(s.values, s.levels, color="#b9b4aa", linewidth=0.6, zorder=1)
    shown = set()
    for r in s.runs:
        # extend each run by one sample so consecutive runs meet
        sl = slice(r.first, min(r.last + 2, len(s.values)))
        label = "stable" if r.stable else "unstable"
        ax.plot(s.values[sl], s.levels[sl],
                color=stable_color if r.stable else unstable_color,
                linestyle="-" if r.stable else (0, (4, 2.5)),
                linewidth=2.2 if r.stable else 1.6, zorder=2,
                label=None if label in shown else label)
        shown.add(label)
    for p in s.points:
        if p.kind == "fold":
            ax.plot([p.value], [p.level], marker="D", markersize=7, color=PALETTE[3],
                    markeredgecolor=TEXT, linestyle="none", zorder=3,
                    label=None if "fold" in shown else "fold")
            shown.add("fold")
        else:
            ax.plot([p.value], [p.level], marker="o", markersize=9, markerfacecolor="none",
                    markeredgewidth=2.0, color=PALETTE[2], linestyle="none", zorder=3,
                    label=None if "Hopf" in shown else "Hopf")
            shown.add("Hopf")
            if p.omega is not None and math.isfinite(p.omega):
                ax.annotate(si(p.omega / (2 * math.pi), "Hz"), (p.value, p.level),
                            xytext=(6, 8), textcoords="offset points", fontsize=8, color=TEXT)
    ax.set_xlabel(_label(s.param, s.param_unit))
    ax.set_ylabel(_label(s.show, s.show_unit))
    if len(s.values):
        lo, hi = float(np.min(s.values)), float(np.max(s.values))
        pad = 0.03 * (hi - lo) if hi > lo else 1.0
        ax.set_xlim(lo - pad, hi + pad)
    ax.legend(frameon=False, fontsize=8.5, labelcolor=TEXT, loc="best")
    end = "" if s.complete else " (incomplete)"
    fig.suptitle(f"{s.name}: steady states along {s.param}{end}", color=TEXT, fontsize=11,
                 x=0.01, ha="left")
    ax.set_facecolor(BACKGROUND)
    return fig


def write_branch_figure(s: BranchSummary, directory: str | Path) -> Path:
    """Write ``branch.png`` into `directory` (created if needed); returns its path."""
    out = Path(directory)
    out.mkdir(parents=True, exist_ok=True)
    path = out / BRANCH_FILE
    branch_figure(s).savefig(path, facecolor="white")
    return path
