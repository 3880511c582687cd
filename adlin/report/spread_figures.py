"""Figures of `adlin spread`: every sample's poles, and histograms.

- ``pole_scatter.png``: the poles of every converged sample in the s-plane
  (small translucent dots, so dense regions read darker), the median of
  each pole marked with a cross; the right half-plane shaded.
- ``histograms.png``: one panel per requested quantity and one for the
  dominant (slowest) pole frequency, with the mean and the 1st/99th
  percentiles marked.

Same look and object-oriented matplotlib use as `adlin.report.figures`.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from .figures import PALETTE, TEXT, _style, s_plane_frame, save_figures
from .sizing_figures import rate_scale
from .spread import SpreadSummary

SCATTER_FILE = "pole_scatter.png"
HISTOGRAM_FILE = "histograms.png"
# Dots drawn at most in the scatter (evenly thinned beyond it: PNG size and draw time).
MAX_SCATTER_SAMPLES = 20000


def pole_scatter_figure(s: SpreadSummary):
    """s-plane scatter of every converged sample's poles (rad/s)."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.6, 5.4), dpi=130, facecolor="white", layout="constrained")
    ax = fig.add_subplot()
    _style(ax)
    poles = np.asarray(s.poles, dtype=complex)
    if poles.ndim == 2 and poles.shape[0] > MAX_SCATTER_SAMPLES:
        poles = poles[np.linspace(0, poles.shape[0] - 1, MAX_SCATTER_SAMPLES).astype(int)]
    finite = poles[np.isfinite(poles)] if poles.size else poles
    factor, prefix = rate_scale(float(np.max(np.abs(finite))) if finite.size else 1.0)
    # denser clouds get fainter dots, so overlap reads as density
    alpha = float(np.clip(8.0 / math.sqrt(max(poles.shape[0], 1)), 0.06, 0.8))
    for j in range(poles.shape[1] if poles.ndim == 2 else 0):
        p = poles[:, j]
        p = p[np.isfinite(p)] * factor
        if not p.size:
            continue
        color = PALETTE[j % len(PALETTE)]
        ax.scatter(p.real, p.imag, s=7, color=color, alpha=alpha, linewidths=0, zorder=2)
        centre = np.median(p.real) + 1j * np.median(p.imag)
        ax.plot(centre.real, centre.imag, marker="+", markersize=11, markeredgewidth=1.6,
                color=TEXT, linestyle="none", zorder=3,
                label="median of each pole" if j == 0 else None)
    s_plane_frame(ax, prefix)
    if poles.size:
        ax.legend(frameon=False, fontsize=8.5, labelcolor=TEXT, loc="best")
    fig.suptitle(f"{s.name}: poles of {poles.shape[0] if poles.ndim == 2 else 0} samples",
                 color=TEXT, fontsize=11, x=0.01, ha="left")
    return fig


def _panels(s: SpreadSummary) -> list[tuple[str, str, np.ndarray]]:
    out = [(name, unit, np.asarray(s.quantities[:, k], dtype=float))
           for k, (name, unit) in enumerate(zip(s.quantity_names, s.quantity_units,
                                                strict=True))]
    out.append(("dominant pole frequency", "Hz", np.asarray(s.dominant_hz, dtype=float)))
    return out


def histogram_figure(s: SpreadSummary):
    """One histogram per quantity and one of the dominant pole frequency."""
    from matplotlib.figure import Figure

    from .._units import si

    panels = _panels(s)
    cols = 1 if len(panels) == 1 else 2
    rows = math.ceil(len(panels) / cols)
    fig = Figure(figsize=(3.9 * cols + 0.4, 2.9 * rows + 0.5), dpi=130, facecolor="white",
                 layout="constrained")
    axes = fig.subplots(rows, cols, squeeze=False).reshape(-1)
    for ax, (k, (name, unit, v)) in zip(axes, enumerate(panels), strict=False):
        _style(ax)
        v = v[np.isfinite(v)]
        color = PALETTE[k % len(PALETTE)]
        if v.size:
            bins = int(np.clip(np.sqrt(v.size), 5, 60))
            ax.hist(v, bins=bins, color=color, alpha=0.85, edgecolor="white", linewidth=0.4)
            mean = float(v.mean())
            p1, p99 = np.percentile(v, (1.0, 99.0))
            ax.axvline(mean, color=TEXT, linewidth=1.4, label=f"mean {si(mean, unit)}")
            for edge in (p1, p99):
                ax.axvline(edge, color=TEXT, linewidth=0.9, linestyle=(0, (3, 2)))
            ax.plot([], [], color=TEXT, linewidth=0.9, linestyle=(0, (3, 2)),
                    label="1 % and 99 %")
            ax.legend(frameon=False, fontsize=7.5, labelcolor=TEXT, loc="best")
        else:
            ax.text(0.5, 0.5, "no converged samples", ha="center", va="center",
                    transform=ax.transAxes, color=TEXT)
        ax.set_xlabel(f"{name} [{unit}]" if unit else name)
        ax.set_ylabel("samples")
    for ax in axes[len(panels):]:
        ax.set_visible(False)
    fig.suptitle(f"{s.name}: spread over {s.n - s.failed} converged samples", color=TEXT,
                 fontsize=11, x=0.01, ha="left")
    return fig


def write_spread_figures(s: SpreadSummary, directory: str | Path) -> list[Path]:
    """Write ``pole_scatter.png`` and ``histograms.png`` into `directory`; returns the paths."""
    return save_figures(directory, [(SCATTER_FILE, lambda: pole_scatter_figure(s)),
                                    (HISTOGRAM_FILE, lambda: histogram_figure(s))])
