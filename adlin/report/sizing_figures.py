"""Figures of `adlin size`: the loss of every start, and how the poles moved.

- ``loss_history.png``: total target loss against iteration, one line per
  start (log scale), the winning start drawn bold.
- ``pole_path.png``: the best start's poles in the s-plane, one dot per
  iteration shaded from pale (first) to dark (last), the start ringed and
  the end marked with a diamond; the right half-plane is shaded.

Same look and object-oriented matplotlib use as `adlin.report.figures`.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .figures import PALETTE, TEXT, _style, s_plane_frame, save_figures
from .sizing import SizingSummary

LOSS_FILE = "loss_history.png"
POLE_PATH_FILE = "pole_path.png"


def rate_scale(largest: float) -> tuple[float, str]:
    """A factor and prefix so that rad/s values read in the units or thousands."""
    for factor, prefix in ((1e-9, "G"), (1e-6, "M"), (1e-3, "k")):
        if largest * factor >= 1.0:
            return factor, prefix
    return 1.0, ""


def loss_figure(s: SizingSummary):
    """Loss against iteration for every start, log y; zero losses drawn at a floor."""
    from matplotlib.figure import Figure
    from matplotlib.ticker import MaxNLocator

    fig = Figure(figsize=(7.2, 4.4), dpi=130, facecolor="white", layout="constrained")
    ax = fig.add_subplot()
    _style(ax)
    positive = [v for h in s.losses for v in h if np.isfinite(v) and v > 0]
    floor = (min(positive) * 1e-2) if positive else 1e-12
    floored = False
    for k, h in enumerate(s.losses):
        h = np.asarray(h, dtype=float)
        shown = np.where(np.isfinite(h), np.maximum(h, floor), np.nan)
        floored = floored or bool(np.any(h[np.isfinite(h)] < floor))
        best = k == s.best
        ax.plot(np.arange(len(h)), shown, marker="o" if len(h) < 40 else None, markersize=3,
                linewidth=2.2 if best else 1.0, alpha=1.0 if best else 0.65,
                color=PALETTE[0] if best else PALETTE[1 + k % (len(PALETTE) - 1)],
                label=f"start {k}" + (" (best)" if best else ""), zorder=3 if best else 2)
    if floored:
        ax.axhline(floor, color=TEXT, linewidth=0.8, linestyle=":",
                   label="loss 0 (drawn at this floor)")
    ax.set_yscale("log")
    ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    ax.set_xlabel("iteration")
    ax.set_ylabel("total target loss")
    ax.legend(frameon=False, fontsize=8.5, labelcolor=TEXT, loc="best")
    fig.suptitle(f"{s.name}: sizing loss per iteration", color=TEXT, fontsize=11, x=0.01,
                 ha="left")
    return fig


def pole_path_figure(s: SizingSummary):
    """The best start's poles per iteration in the s-plane (rad/s)."""
    from matplotlib.colors import LinearSegmentedColormap
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.6, 5.4), dpi=130, facecolor="white", layout="constrained")
    ax = fig.add_subplot()
    _style(ax)
    poles = np.asarray(s.poles, dtype=complex)
    finite = poles[np.isfinite(poles)] if poles.size else poles
    largest = float(np.max(np.abs(finite))) if finite.size else 1.0
    factor, prefix = rate_scale(largest)
    shade = LinearSegmentedColormap.from_list("path", ["#bfe0db", PALETTE[0], "#0b3b36"])
    m = poles.shape[0] if poles.ndim == 2 else 0
    for j in range(poles.shape[1] if poles.ndim == 2 else 0):
        p = poles[:, j] * factor
        keep = np.isfinite(p)
        if not keep.any():
            continue
        ax.plot(p.real[keep], p.imag[keep], color="#b9b4aa", linewidth=0.7, zorder=1)
        ax.scatter(p.real[keep], p.imag[keep], c=np.arange(m)[keep], cmap=shade,
                   vmin=0, vmax=max(m - 1, 1), s=14, zorder=2, linewidths=0)
    if m:
        first, last = poles[0] * factor, poles[-1] * factor
        first, last = first[np.isfinite(first)], last[np.isfinite(last)]
        ax.plot(first.real, first.imag, linestyle="none", marker="o", markersize=10,
                markerfacecolor="none", markeredgecolor=PALETTE[3], markeredgewidth=1.8,
                label="start", zorder=4)
        ax.plot(last.real, last.imag, linestyle="none", marker="D", markersize=7,
                color=PALETTE[1], markeredgecolor=TEXT, label="sized", zorder=5)
    goal = np.asarray(s.target_poles, dtype=complex) * factor
    if goal.size:
        ax.plot(goal.real, goal.imag, linestyle="none", marker="x", markersize=11,
                markeredgewidth=2.0, color=TEXT, label="target", zorder=6)
    s_plane_frame(ax, prefix)
    ax.legend(frameon=False, fontsize=8.5, labelcolor=TEXT, loc="best")
    fig.suptitle(f"{s.name}: poles of the best start, pale = first iteration", color=TEXT,
                 fontsize=11, x=0.01, ha="left")
    return fig


def write_sizing_figures(s: SizingSummary, directory: str | Path) -> list[Path]:
    """Write ``loss_history.png`` and ``pole_path.png`` into `directory`; returns the paths."""
    return save_figures(directory, [(LOSS_FILE, lambda: loss_figure(s)),
                                    (POLE_PATH_FILE, lambda: pole_path_figure(s))])
