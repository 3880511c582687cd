"""Figures of a `Summary`: Bode plot and pole-zero map as PNG files.

matplotlib is imported only when a figure is drawn (``import adlin`` stays
fast), and only its object-oriented API is used (``Figure`` rendered by the
Agg canvas), so no GUI backend or global pyplot state is involved.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from . import Summary

# Our own look: a light, warm background, teal/coral/indigo lines.
PALETTE = ("#1f7a70", "#d1495b", "#3d5a98", "#e09f3e", "#6c4f8f", "#4f6d3a")
BACKGROUND = "#fbfaf7"
GRID = "#d9d4ca"
TEXT = "#2b2d33"
RHP_SHADE = "#f3dede"

BODE_FILE = "bode.png"
POLE_ZERO_FILE = "poles_zeros.png"


def _style(ax) -> None:
    ax.set_facecolor(BACKGROUND)
    ax.grid(True, which="major", color=GRID, linewidth=0.8)
    ax.grid(True, which="minor", color=GRID, linewidth=0.4, alpha=0.6)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color("#8b8f98")
    ax.tick_params(colors=TEXT, labelsize=8.5)
    ax.xaxis.label.set_color(TEXT)
    ax.yaxis.label.set_color(TEXT)


def frequency_grid(summary: Summary, points_per_decade: int = 60) -> np.ndarray:
    """Hz grid from 1.5 decades below the slowest pole or zero, at most 10 decades wide."""
    roots = list(summary.poles)
    for pair_roots in summary.zeros.values():
        roots += pair_roots
    f = [r.frequency_hz for r in roots if r.frequency_hz > 0 and math.isfinite(r.frequency_hz)]
    if not f:
        lo, hi = 0.0, 6.0
    else:
        lo = math.floor(math.log10(min(f)) - 1.5)
        hi = math.ceil(math.log10(max(f)) + 1.0)
        hi = min(max(hi, lo + 3), lo + 10)
    n = int((hi - lo) * points_per_decade) + 1
    return np.logspace(lo, hi, n)


def bode_figure(summary: Summary):
    """Two stacked panels, magnitude (dB) and phase (degrees) against frequency (Hz)."""
    from matplotlib.figure import Figure
    from matplotlib.ticker import MultipleLocator

    model = summary.model
    f = frequency_grid(summary)
    H = np.asarray(model.freq_response(f))
    fig = Figure(figsize=(8.0, 6.2), dpi=120, facecolor="white", layout="constrained")
    mag_ax, ph_ax = fig.subplots(2, 1, sharex=True, height_ratios=(3, 2))
    phase_span = [0.0, 0.0]
    for k, (o, i) in enumerate(summary.pairs):
        h = H[model.output_names.index(o), model.input_names.index(i)]
        color = PALETTE[k % len(PALETTE)]
        mag = 20 * np.log10(np.maximum(np.abs(h), 1e-300))
        phase = np.degrees(np.unwrap(np.angle(h)))
        # Start the phase in (-180, 180] at the low-frequency end.
        phase -= 360.0 * np.round(phase[0] / 360.0)
        label = f"{i} → {o}"
        mag_ax.semilogx(f, mag, color=color, linewidth=1.8, label=label)
        ph_ax.semilogx(f, phase, color=color, linewidth=1.6)
        phase_span = [min(phase_span[0], float(phase.min())), max(phase_span[1], float(phase.max()))]
    for ax in (mag_ax, ph_ax):
        _style(ax)
        ax.set_xlim(f[0], f[-1])
    # Pole frequencies as small marks along the top of the magnitude panel.
    pole_f = [r.frequency_hz for r in summary.poles if f[0] <= r.frequency_hz <= f[-1]]
    if pole_f:
        mag_ax.plot(pole_f, [1.0] * len(pole_f), linestyle="none", marker="v", markersize=5,
                    color="#8b8f98", transform=mag_ax.get_xaxis_transform(), clip_on=False,
                    label="pole frequencies")
    mag_ax.set_ylabel("magnitude (dB)")
    ph_ax.set_ylabel("phase (degrees)")
    ph_ax.set_xlabel("frequency (Hz)")
    span = phase_span[1] - phase_span[0]
    ph_ax.yaxis.set_major_locator(MultipleLocator(45 if span <= 360 else 90))
    mag_ax.legend(frameon=False, fontsize=8.5, loc="best", labelcolor=TEXT)
    fig.suptitle(f"{summary.name}: small-signal frequency response", color=TEXT, fontsize=11,
                 x=0.02, ha="left")
    return fig


def pole_zero_figure(summary: Summary):
    """The s-plane with poles (x) and zeros (o), on symmetric logarithmic axes."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.2, 5.6), dpi=120, facecolor="white", layout="constrained")
    ax = fig.subplots()
    _style(ax)
    values = [r.value for r in summary.poles]
    zero_sets = list(summary.zeros.items())
    for _, roots in zero_sets:
        values += [r.value for r in roots]
    comps = [abs(c) for v in values for c in (v.real, v.imag) if c != 0.0]
    lin = 10 ** math.floor(math.log10(min(comps))) if comps else 1.0
    big = max(comps) if comps else 10.0
    lim = 10 ** math.ceil(math.log10(big) + 0.3)
    ax.set_xscale("symlog", linthresh=lin, linscale=0.6)
    ax.set_yscale("symlog", linthresh=lin, linscale=0.6)
    ax.axvspan(0, lim, color=RHP_SHADE, alpha=0.7, linewidth=0, zorder=0)
    ax.axvline(0, color="#6b6f78", linewidth=1.2, zorder=1)
    ax.axhline(0, color="#6b6f78", linewidth=0.8, zorder=1)
    ax.text(0.985, 0.97, "right half plane\n(unstable poles)", transform=ax.transAxes,
            ha="right", va="top", fontsize=8, color="#a04050")

    def both(roots):
        xs, ys = [], []
        for r in roots:
            xs.append(r.value.real)
            ys.append(r.value.imag)
            if r.pair:
                xs.append(r.value.real)
                ys.append(-r.value.imag)
        return xs, ys

    px, py = both(summary.poles)
    ax.plot(px, py, linestyle="none", marker="x", markersize=9, markeredgewidth=2.0,
            color=PALETTE[1], label="poles", zorder=4)
    markers = ("o", "s", "D", "^", "v", "P")
    for k, ((o, i), roots) in enumerate(zero_sets):
        zx, zy = both(roots)
        ax.plot(zx, zy, linestyle="none", marker=markers[k % len(markers)], markersize=8,
                markerfacecolor="none", markeredgewidth=1.6, color=PALETTE[(k + 2) % len(PALETTE)],
                label=f"zeros {i} → {o}", zorder=3)
    ax.set_xlim(-lim, lim)
    ax.set_ylim(-lim, lim)
    ax.set_xlabel("real part σ (rad/s)")
    ax.set_ylabel("imaginary part ω (rad/s)")
    ax.legend(frameon=True, facecolor="white", edgecolor=GRID, fontsize=8.5, loc="lower left",
              labelcolor=TEXT)
    fig.suptitle(f"{summary.name}: poles and zeros (axes linear within ±{lin:.0e} rad/s, "
                 "logarithmic beyond)", color=TEXT, fontsize=10, x=0.02, ha="left")
    return fig


def write_figures(summary: Summary, directory: str | Path) -> list[Path]:
    """Write ``bode.png`` and ``poles_zeros.png`` into `directory` (created if needed).

    **Returns:** the two paths.  The Bode plot needs at least one input and
    output; without them only the pole-zero map is written.
    """
    out_dir = Path(directory)
    out_dir.mkdir(parents=True, exist_ok=True)
    paths = []
    if summary.pairs:
        path = out_dir / BODE_FILE
        bode_figure(summary).savefig(path, facecolor="white")
        paths.append(path)
    path = out_dir / POLE_ZERO_FILE
    pole_zero_figure(summary).savefig(path, facecolor="white")
    paths.append(path)
    return paths
