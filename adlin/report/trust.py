"""How far the linear model can be trusted, as a report: linear ranges and distortion.

`CheckSummary` gathers, for one input/output pair at one bias point, the
linear range of each stimulus kind (both polarities, with the error curve
behind it), a distortion table (predicted next to measured), and the
waveforms at the range's edge for the figures.  The text, JSON and figure
writers share it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from . import SAFETY_NOTE


@dataclass(frozen=True)
class Waveforms:
    """Nonlinear and linear responses to one stimulus, for a figure."""

    label: str
    t: np.ndarray
    nonlinear: np.ndarray
    linear: np.ndarray
    peak_error: float


@dataclass(frozen=True)
class CheckSummary:
    """Linear ranges, distortion and edge waveforms of one input/output pair.

    - `ranges`: `adlin.LinearRange` results (one per stimulus kind).
    - `distortion`: an `adlin.Distortion` (several amplitudes), or None.
    - `waveforms`: `Waveforms` at the edge of the range, per kind and polarity.
    """

    name: str
    input: str
    output: str
    input_unit: str
    output_unit: str
    bias_input: float
    bias_output: float
    tol: float
    ranges: list[Any]
    distortion: Any = None
    waveforms: list[Waveforms] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    safety_note: str = SAFETY_NOTE


def edge_amplitude(r) -> float | None:
    """The amplitude to show waveforms at: the larger finite limit of the two polarities.

    At that amplitude the polarity that limits first is already beyond the
    tolerance, so the figure shows the asymmetry.  None when no limit was found.
    """
    limits = [abs(v) for v, b in ((r.positive, r.positive_bracket),
                                  (r.negative, r.negative_bracket)) if math.isfinite(b[1])]
    return max(limits) if limits else None


def waveform_position(r, sign: float, a: float) -> str:
    """Where amplitude `a` of one polarity sits against that polarity's own limit.

    The waveform figure drives both polarities at `edge_amplitude` (the
    larger limit), so the polarity that limits first is shown beyond its
    limit; the panel title must say so rather than suggest both are at it.

    **Arguments:** `r`: an `adlin.LinearRange`; `sign`: +1 or -1; `a`: the
    amplitude shown (magnitude).

    **Returns:** e.g. ``"at its limit 6.976e-06"``, ``"beyond its limit
    3.741e-06"``, or ``"no limit found"``.
    """
    limit, bracket = ((r.positive, r.positive_bracket) if sign > 0
                      else (r.negative, r.negative_bracket))
    if not math.isfinite(bracket[1]):
        return "no limit found"
    limit = abs(float(limit))
    where = "beyond" if a > limit * (1 + r.precision) else "at"
    return f"{where} its limit {limit:.4g}"


def _num(v):
    if v is None:
        return None
    v = float(v)
    return v if math.isfinite(v) else None


def range_to_dict(r) -> dict[str, Any]:
    return {
        "kind": r.kind, "f_hz": _num(r.f_hz), "t_end_s": _num(r.t_end), "tol": r.tol,
        "positive": _num(r.positive), "positive_bracket": [_num(v) for v in r.positive_bracket],
        "negative": _num(r.negative), "negative_bracket": [_num(v) for v in r.negative_bracket],
        "limits_first": r.limiting,
        "curve": [{"amplitude": _num(a), "error": _num(e)}
                  for a, e in zip(np.asarray(r.amplitudes), np.asarray(r.errors), strict=True)],
        "notes": list(r.notes),
    }


def check_to_dict(s: CheckSummary) -> dict[str, Any]:
    """The check report as JSON-ready data (non-finite numbers become None)."""
    out: dict[str, Any] = {
        "model": s.name,
        "input": {"name": s.input, "unit": s.input_unit, "bias": s.bias_input},
        "output": {"name": s.output, "unit": s.output_unit, "bias": s.bias_output},
        "tol": s.tol,
        "linear_range": [range_to_dict(r) for r in s.ranges],
        "distortion": None,
        "notes": list(s.notes),
        "safety_note": s.safety_note,
    }
    d = s.distortion
    if d is not None:
        out["distortion"] = {
            "f_hz": d.f_hz,
            "rows": [{k: _num(v) for k, v in row.items()} for row in d.rows()],
            "notes": list(d.notes),
        }
    return out
