"""Terminal report of a followed branch: how it ended, special points, runs, samples."""

from __future__ import annotations

import math

from rich.console import Console, Group
from rich.text import Text

from .branch import BranchSummary
from .text import ACCENT, DIM, _heading, _table, value_text


def _num(value: float, unit: str) -> str:
    return value_text(value, unit) if math.isfinite(value) else str(value)


def _rate(value: float) -> str:
    """A real part in rad/s, signed, in engineering notation."""
    if not math.isfinite(value):
        return "none" if value < 0 else str(value)
    return value_text(value, "rad/s")


def _header(s: BranchSummary) -> list:
    ended = Text.assemble(
        (f"{len(s.values)} steady states followed in ", DIM),
        (s.param, "bold"),
        (f" from {_num(s.start, s.param_unit)} towards {_num(s.stop, s.param_unit)}; ", DIM),
        ("complete" if s.complete else "incomplete", "bold" if s.complete else ACCENT),
        (f": {s.reason}.", DIM),
    )
    out: list = [_heading(f"Branch of {s.name} in {s.param}"), ended]
    out.extend(Text("note: " + n, style=ACCENT) for n in s.notes)
    return out


def _points(s: BranchSummary) -> list:
    if not s.points:
        return [_heading("Folds and Hopf points"),
                Text("none on this branch", style=DIM)]
    table = _table("", ("kind", "left"), (s.param, "right"), (s.show, "right"),
                   ("frequency", "right"), ("located", "left"))
    for p in s.points:
        freq = ("" if p.omega is None else
                f"{_num(p.omega, 'rad/s')} ({_num(p.omega / (2 * math.pi), 'Hz')})")
        table.add_row(Text(p.kind, style="bold"), _num(p.value, s.param_unit),
                      _num(p.level, s.show_unit), freq,
                      "extended system" if p.exact else Text("approximate", style=ACCENT))
    return [_heading("Folds and Hopf points"), table]


def _runs(s: BranchSummary) -> list:
    table = _table("", ("stability", "left"), ("from", "right"), ("to", "right"),
                   ("samples", "right"))
    for r in s.runs:
        table.add_row(Text("stable", style="bold") if r.stable else Text("unstable", style=ACCENT),
                      _num(r.start, s.param_unit), _num(r.stop, s.param_unit),
                      f"{r.first}..{r.last}")
    return [_heading("Stable and unstable ranges"), table]


def _samples(s: BranchSummary) -> list:
    idx = s.table_indices()
    table = _table("", ("#", "right"), (s.param, "right"), (s.show, "right"),
                   ("max Re(pole)", "right"), ("stable", "left"))
    for i in idx:
        table.add_row(str(i), _num(float(s.values[i]), s.param_unit),
                      _num(float(s.levels[i]), s.show_unit), _rate(float(s.max_real[i])),
                      "yes" if s.stable[i] else Text("no", style=ACCENT))
    title = "Samples" if len(idx) == len(s.values) else (
        f"Samples ({len(idx)} of {len(s.values)}, evenly spread)")
    return [_heading(title), table]


def branch_renderables(s: BranchSummary) -> Group:
    parts = _header(s)
    if len(s.values):
        parts += _points(s) + _runs(s) + _samples(s)
    parts.append(Text("Note: " + s.safety_note, style=DIM))
    return Group(*parts)


def render_branch(s: BranchSummary, console: Console) -> None:
    console.print(branch_renderables(s))
