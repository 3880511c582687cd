"""Figures of `adlin check`: error versus amplitude, and waveforms at the range's edge.

Same look and object-oriented matplotlib use as `adlin.report.figures`.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .._units import si
from .figures import PALETTE, TEXT, _style
from .trust import CheckSummary

ERROR_FILE = "error_vs_amplitude.png"
WAVEFORM_FILE = "waveforms.png"


def _unit(name: str, unit: str) -> str:
    return f"{name} [{unit}]" if unit else name


def error_figure(s: CheckSummary):
    """|amplitude| against relative error, log-log, one line per kind and polarity."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.2, 4.6), dpi=130, facecolor="white", layout="constrained")
    ax = fig.add_subplot()
    _style(ax)
    styles = {"positive": "-", "negative": (0, (4, 2.5))}
    for k, r in enumerate(s.ranges):
        color = PALETTE[k % len(PALETTE)]
        what = "step" if r.kind == "step" else f"sine {si(r.f_hz, 'Hz')}"
        for polarity in ("positive", "negative"):
            a, e = r.curve(polarity)
            keep = np.isfinite(e) & (e > 0)
            if keep.any():
                ax.plot(a[keep], e[keep], linestyle=styles[polarity], marker="o", markersize=3,
                        color=color, label=f"{what}, {polarity}")
    ax.axhline(s.tol, color=TEXT, linewidth=0.9, linestyle=":",
               label=f"tolerance {100 * s.tol:g} %")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel(_unit(f"|amplitude| of {s.input}", s.input_unit))
    ax.set_ylabel(f"peak error of {s.output} / linear swing")
    ax.legend(frameon=False, fontsize=8.5, labelcolor=TEXT, loc="best")
    fig.suptitle(f"{s.name}: linear-model error against input amplitude", color=TEXT,
                 fontsize=11, x=0.01, ha="left")
    return fig


def waveform_figure(s: CheckSummary):
    """One panel per waveform pair: nonlinear solid, linear dashed."""
    from matplotlib.figure import Figure

    n = max(len(s.waveforms), 1)
    fig = Figure(figsize=(7.2, 2.3 * n + 0.6), dpi=130, facecolor="white", layout="constrained")
    axes = fig.subplots(n, 1, squeeze=False)[:, 0]
    for ax, w in zip(axes, s.waveforms, strict=False):
        _style(ax)
        scale, prefix = _time_scale(float(w.t[-1]) if len(w.t) else 1.0)
        ax.plot(w.t * scale, w.nonlinear, color=PALETTE[0], linewidth=1.8, label="nonlinear")
        ax.plot(w.t * scale, w.linear, color=PALETTE[1], linewidth=1.3, linestyle=(0, (4, 2.5)),
                label="linear model")
        ax.set_title(f"{w.label}: peak error {100 * w.peak_error:.3g} % of the swing",
                     fontsize=9, color=TEXT, loc="left")
        ax.set_ylabel(_unit(s.output, s.output_unit))
        ax.set_xlabel(f"time [{prefix}s]")
        ax.legend(frameon=False, fontsize=8, labelcolor=TEXT, loc="best")
    fig.suptitle(f"{s.name}: responses at the larger of the two polarities' limits", color=TEXT,
                 fontsize=11, x=0.01, ha="left")
    return fig


def _time_scale(t_end: float) -> tuple[float, str]:
    for factor, prefix in ((1.0, ""), (1e3, "m"), (1e6, "µ"), (1e9, "n"), (1e12, "p")):
        if t_end * factor >= 1.0:
            return factor, prefix
    return 1e15, "f"


def write_check_figures(s: CheckSummary, directory: str | Path) -> list[Path]:
    """Write ``error_vs_amplitude.png`` and (with waveforms) ``waveforms.png``."""
    out = Path(directory)
    out.mkdir(parents=True, exist_ok=True)
    paths = [out / ERROR_FILE]
    error_figure(s).savefig(paths[0], facecolor="white")
    if s.waveforms:
        paths.append(out / WAVEFORM_FILE)
        waveform_figure(s).savefig(paths[1], facecolor="white")
    return paths
