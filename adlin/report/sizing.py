"""A sizing run as a report: free parameters, targets met, how the search went.

`summarize_sizing` turns an `adlin.SizingResult` into plain Python and NumPy
values (no JAX arrays), which the text, JSON and figure writers share:
the free parameters (start of the best run, final value, bounds, value after
rounding), the targets (achieved, met, after rounding), the loss of every
start per iteration and the best start's poles per iteration.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from . import SAFETY_NOTE


@dataclass(frozen=True)
class FreeRow:
    """One sized parameter: `start` (best start), `final`, bounds, `rounded` (or None)."""

    name: str
    unit: str
    start: float
    final: float
    low: float
    high: float
    rounded: float | None = None

    @property
    def at_bound(self) -> str | None:
        """"low" or "high" when the final value sits on a bound (within 0.1 % in log)."""
        span = math.log(self.high / self.low) if self.low > 0 and self.high > self.low else 0.0
        if span <= 0:
            return None
        for side, bound in (("low", self.low), ("high", self.high)):
            if abs(math.log(self.final / bound)) <= 1e-3 * span:
                return side
        return None


@dataclass(frozen=True)
class TargetRow:
    """One target: description, achieved text, met; and the same after rounding."""

    target: str
    achieved_text: str
    met: bool
    loss: float
    rounded_text: str | None = None
    rounded_met: bool | None = None


@dataclass(frozen=True)
class SizingSummary:
    """Everything a sizing report shows, as plain numbers.

    - `name`: model name; `free`: `FreeRow` per sized parameter; `targets`:
      `TargetRow` per target; `met`, `rounded_met` (None without rounding).
    - `series`: the preferred-number series rounded to, or None.
    - `losses`: per start, its loss history (a list of 1-D arrays, the padding
      dropped); `best`: the start that won; `final_losses` per start.
    - `poles`: the best start's finite poles per iteration, (m, r) complex
      (padding dropped; NaN where a pole is missing).
    - `evaluations`, `failed_evaluations`, `message`: effort and stop reason.
    - `target_poles`: where pole-placement targets put poles (rad/s, complex).
    """

    name: str
    free: list[FreeRow]
    targets: list[TargetRow]
    met: bool
    series: str | None
    rounded_met: bool | None
    losses: list[np.ndarray]
    final_losses: np.ndarray
    best: int
    poles: np.ndarray
    evaluations: int
    failed_evaluations: int = 0
    message: str = ""
    notes: list[str] = field(default_factory=list)
    safety_note: str = SAFETY_NOTE
    target_poles: np.ndarray = field(default_factory=lambda: np.zeros(0, complex))


def target_pole_positions(targets) -> np.ndarray:
    """The s-plane positions that `PolePair` and `RealPole` targets ask for (rad/s)."""
    from .._design.pole_targets import PolePair, RealPole

    out = []
    for t in targets:
        if isinstance(t, PolePair):
            out.extend(t.roots())
        elif isinstance(t, RealPole):
            out.append(complex(-2 * math.pi * t.f_hz, 0.0))
    return np.asarray(out, dtype=complex)


def summarize_sizing(system, result, notes=(), targets=()) -> SizingSummary:
    """Collect a `SizingResult`'s report values.

    **Arguments:**

    - `system`: the System that was sized (for units and the name).
    - `result`: the `adlin.SizingResult` of `adlin.size`.
    - `notes`: extra lines to print under the tables.
    - `targets`: the target objects, so the pole-path figure can mark where
      pole-placement targets put poles (optional).

    **Returns:** a `SizingSummary`.
    """
    best = int(result.best)
    values = np.asarray(result.values, dtype=float)
    starts = np.atleast_2d(np.asarray(result.start_values, dtype=float))
    low = np.asarray(result.low, dtype=float)
    high = np.asarray(result.high, dtype=float)
    rounded = (None if result.rounded_values is None
               else np.asarray(result.rounded_values, dtype=float))
    free = [FreeRow(name, system.unit(name), float(starts[best, k]), float(values[k]),
                    float(low[k]), float(high[k]),
                    None if rounded is None else float(rounded[k]))
            for k, name in enumerate(result.free_names)]
    rows = []
    for row in result.table():
        rows.append(TargetRow(row["target"], row["achieved_text"], bool(row["met"]),
                              float(row["loss"]), row.get("rounded_achieved_text"),
                              None if "rounded_met" not in row else bool(row["rounded_met"])))
    history = np.atleast_2d(np.asarray(result.loss_history, dtype=float))
    lengths = np.asarray(result.history_length, dtype=int).reshape(-1)
    losses = [history[s, : max(int(lengths[s]), 1)] for s in range(history.shape[0])]
    poles = np.asarray(result.pole_history)
    if poles.ndim == 2 and len(lengths) > best:
        poles = poles[: max(int(lengths[best]), 1)]
    return SizingSummary(
        name=system.name, free=free, targets=rows, met=bool(result.met),
        series=result.series,
        rounded_met=None if result.rounded_met is None else bool(result.rounded_met),
        losses=losses, final_losses=np.asarray(result.final_losses, dtype=float).reshape(-1),
        best=best, poles=poles.astype(complex) if poles.size else np.zeros((0, 0), complex),
        evaluations=int(result.evaluations),
        failed_evaluations=int(getattr(result, "failed_evaluations", 0)),
        message=str(result.message), notes=list(notes),
        target_poles=target_pole_positions(targets))


def _num(v) -> float | None:
    if v is None:
        return None
    v = float(v)
    return v if math.isfinite(v) else None


def sizing_to_dict(s: SizingSummary) -> dict[str, Any]:
    """The sizing report as JSON-ready data (non-finite numbers become None)."""
    return {
        "model": s.name,
        "free": [{"name": r.name, "unit": r.unit, "start": _num(r.start), "final": _num(r.final),
                  "low": _num(r.low), "high": _num(r.high), "rounded": _num(r.rounded),
                  "at_bound": r.at_bound} for r in s.free],
        "targets": [{"target": r.target, "achieved": r.achieved_text, "met": r.met,
                     "loss": _num(r.loss), "rounded_achieved": r.rounded_text,
                     "rounded_met": r.rounded_met} for r in s.targets],
        "met": s.met,
        "series": s.series,
        "rounded_met": s.rounded_met,
        "best_start": s.best,
        "final_losses": [_num(v) for v in s.final_losses],
        "loss_history": [[_num(v) for v in h] for h in s.losses],
        "evaluations": s.evaluations,
        "failed_evaluations": s.failed_evaluations,
        "message": s.message,
        "notes": list(s.notes),
        "safety_note": s.safety_note,
    }
