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
        phase_span = [
            min(phase_span[0], float(phase.min())),
            max(phase_span[1], float(phase.max())),
        ]
    for ax in (mag_ax, ph_ax):
        _style(ax)
        ax.set_xlim(f[0], f[-1])
    # Pole frequencies as small marks along the top of the magnitude panel.
    pole_f = [r.frequency_hz for r in summary.poles if f[0] <= r.frequency_hz <= f[-1]]
    if pole_f:
        mag_ax.plot(
            pole_f,
            [1.0] * len(pole_f),
            linestyle="none",
            marker="v",
            markersize=5,
            color="#8b8f98",
            transform=mag_ax.get_xaxis_transform(),
            clip_on=False,
            label="pole frequencies",
        )
    mag_ax.set_ylabel("magnitude (dB)")
    ph_ax.set_ylabel("phase (degrees)")
    ph_ax.set_xlabel("frequency (Hz)")
    span = phase_span[1] - phase_span[0]
    ph_ax.yaxis.set_major_locator(MultipleLocator(45 if span <= 360 else 90))
    mag_ax.legend(
        frameon=False,
        fontsize=8.5,
        labelcolor=TEXT,
        loc="lower left",
        bbox_to_anchor=(0.0, 1.04),
        ncol=min(len(summary.pairs) + 1, 4),
        borderaxespad=0.0,
    )
    fig.suptitle(
        f"{summary.name}: small-signal frequency response",
        color=TEXT,
        fontsize=11,
        x=0.02,
        ha="left",
    )
    return fig


def _points(roots) -> tuple[list[float], list[float]]:
    """Real and imaginary parts, a conjugate pair as two points."""
    xs, ys = [], []
    for r in roots:
        xs.append(r.value.real)
        ys.append(r.value.imag)
        if r.pair:
            xs.append(r.value.real)
            ys.append(-r.value.imag)
    return xs, ys


def _prefix_for(value: float) -> tuple[float, str]:
    """An SI scale and prefix that bring `value` into [1, 1000)."""
    for scale, prefix in (
        (1e12, "T"),
        (1e9, "G"),
        (1e6, "M"),
        (1e3, "k"),
        (1.0, ""),
        (1e-3, "m"),
        (1e-6, "µ"),
    ):
        if value >= scale:
            return scale, prefix
    return 1e-9, "n"


def _dominant_radius(summary: Summary) -> float:
    """Radius (rad/s) that frames the three slowest poles (a pair counts twice)."""
    mags, count = [], 0
    for r in summary.poles:
        mags.append(r.magnitude_rad_s)
        count += 2 if r.pair else 1
        if count >= 3:
            break
    finite = [m for m in mags if m > 0 and math.isfinite(m)]
    return 1.25 * max(finite) if finite else 1.0


def pole_zero_figure(summary: Summary):
    """Two views of the poles (x) and zeros (o).

    Left, the s-plane around the slowest poles on linear, equal axes, with
    rays of constant damping ratio; right, every pole and zero by natural
    frequency (Hz, logarithmic) and damping ratio, so roots decades apart
    stay readable.  Negative damping is the right half plane.
    """
    from matplotlib.figure import Figure

    fig = Figure(figsize=(11.5, 4.6), dpi=120, facecolor="white", layout="constrained")
    plane, spread = fig.subplots(1, 2, width_ratios=(1.15, 1.3))
    zero_sets = list(summary.zeros.items())
    markers = ("o", "s", "D", "^", "v", "P")

    def zero_style(k):
        return dict(
            linestyle="none",
            marker=markers[k % len(markers)],
            markersize=8,
            markerfacecolor="none",
            markeredgewidth=1.6,
            color=PALETTE[(k + 2) % len(PALETTE)],
        )

    pole_style = dict(
        linestyle="none", marker="x", markersize=9, markeredgewidth=2.0, color=PALETTE[1]
    )

    # -- left: the dominant region of the s-plane (upper half: roots are symmetric) -----
    _style(plane)
    R = _dominant_radius(summary)
    scale, prefix = _prefix_for(R)
    shown = [r for r in summary.poles if r.magnitude_rad_s <= R]
    right = 0.3 * R
    for _, roots in zero_sets:
        right = max([right] + [1.15 * r.value.real for r in roots if r.magnitude_rad_s <= R])
    right /= scale
    top = R / scale
    plane.axvspan(0, right, color=RHP_SHADE, alpha=0.7, linewidth=0, zorder=0)
    plane.axvline(0, color="#6b6f78", linewidth=1.2, zorder=1)
    plane.axhline(0, color="#6b6f78", linewidth=0.8, zorder=1)
    for zeta in (0.2, 0.5, 0.707):
        angle = math.acos(zeta)
        x, y = -0.92 * top * math.cos(angle), 0.92 * top * math.sin(angle)
        plane.plot([0, x], [0, y], color="#9aa0a8", linewidth=0.8, linestyle=(0, (4, 3)), zorder=1)
        plane.annotate(
            f"ζ = {zeta:g}",
            (x, y),
            xytext=(-2, 3),
            textcoords="offset points",
            fontsize=7.5,
            color="#6b6f78",
            ha="right",
            va="bottom",
        )

    def upper(roots):
        keep = [r for r in roots if r.magnitude_rad_s <= R]
        return ([r.value.real / scale for r in keep], [abs(r.value.imag) / scale for r in keep])

    px, py = upper(shown)
    plane.plot(px, py, label="poles", zorder=4, clip_on=False, **pole_style)
    for k, (_, roots) in enumerate(zero_sets):
        zx, zy = upper(roots)
        plane.plot(zx, zy, zorder=3, clip_on=False, **zero_style(k))
    plane.set_xlim(-top * 1.02, right)
    plane.set_ylim(-0.06 * top, top * 1.02)
    plane.set_aspect("equal", adjustable="box")
    plane.set_xlabel(f"real part σ ({prefix}rad/s)")
    plane.set_ylabel(f"imaginary part ω ({prefix}rad/s)")
    hidden = len(summary.poles) - len(shown)
    plane.set_title(
        "slowest poles, upper half plane" + (f" ({hidden} faster off view)" if hidden else ""),
        fontsize=9,
        color=TEXT,
        loc="left",
    )

    # -- right: every root by natural frequency and damping ---------------------------
    _style(spread)
    spread.set_xscale("log")
    spread.axhspan(-1.1, 0, color=RHP_SHADE, alpha=0.7, linewidth=0, zorder=0)
    spread.axhline(0, color="#6b6f78", linewidth=1.0, zorder=1)

    def fz(roots):
        keep = [r for r in roots if r.frequency_hz > 0]
        return [r.frequency_hz for r in keep], [r.damping for r in keep]

    fx, fy = fz(summary.poles)
    spread.plot(fx, fy, label="poles", zorder=4, **pole_style)
    for k, ((o, i), roots) in enumerate(zero_sets):
        zx, zy = fz(roots)
        spread.plot(zx, zy, label=f"zeros {i} → {o}", zorder=3, **zero_style(k))
    spread.set_ylim(-1.1, 1.1)
    all_f = [f for f in fx if f > 0]
    for _, roots in zero_sets:
        all_f += [r.frequency_hz for r in roots if r.frequency_hz > 0]
    if all_f:  # room around the outermost markers
        spread.set_xlim(min(all_f) / 3.0, max(all_f) * 3.0)
    spread.set_xlabel("natural frequency |s| / 2π (Hz)")
    spread.set_ylabel("damping ratio ζ")
    spread.text(
        0.015,
        0.47,
        "right half plane (ζ < 0)",
        transform=spread.transAxes,
        ha="left",
        va="top",
        fontsize=8,
        color="#a04050",
    )
    spread.set_title("all poles and zeros", fontsize=9, color=TEXT, loc="left")
    spread.legend(
        frameon=True,
        facecolor="white",
        edgecolor=GRID,
        fontsize=8.5,
        loc="center left",
        bbox_to_anchor=(1.01, 0.5),
        labelcolor=TEXT,
    )
    fig.suptitle(f"{summary.name}: poles and zeros", color=TEXT, fontsize=11, x=0.01, ha="left")
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


def s_plane_frame(ax, prefix: str) -> None:
    """Axes of an s-plane plot: origin in view, right half-plane shaded, labelled axes."""
    x_lo, x_hi = ax.get_xlim()
    span = max(abs(x_lo), abs(x_hi), 1e-30)
    ax.set_xlim(min(x_lo, -0.05 * span), max(x_hi, 0.08 * span))
    ax.axvspan(0, ax.get_xlim()[1], color=RHP_SHADE, zorder=0, linewidth=0)
    ax.axvline(0, color="#8b8f98", linewidth=0.8)
    ax.axhline(0, color="#8b8f98", linewidth=0.8)
    ax.set_xlabel(f"real part [{prefix}rad/s]")
    ax.set_ylabel(f"imaginary part [{prefix}rad/s]")


def save_figures(directory, named) -> list:
    """Draw and save each (file name, figure function) into `directory`; returns the paths."""
    from pathlib import Path

    out = Path(directory)
    out.mkdir(parents=True, exist_ok=True)
    paths = []
    for name, draw in named:
        draw().savefig(out / name, facecolor="white")
        paths.append(out / name)
    return paths
