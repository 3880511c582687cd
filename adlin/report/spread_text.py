"""Terminal report of `adlin spread`: tolerances, spreads, yield, failed samples."""

from __future__ import annotations

import math

from rich.console import Console, Group
from rich.text import Text

from .spread import MAX_FAILURES_SHOWN, SpreadSummary
from .text import ACCENT, DIM, _heading, _table, value_text


def _v(value: float, unit: str) -> str:
    return value_text(value, unit) if math.isfinite(value) else "—"


def _percent(v: float) -> str:
    return f"{100 * v:.4g} %"


def _header(s: SpreadSummary) -> list:
    devices = f" over {s.n_devices} devices" if s.n_devices > 1 else ""
    head = Text.assemble((f"{s.n} samples{devices}, seed {s.seed}; ", DIM),
                         (f"{s.n - s.failed} converged", "bold"),
                         (", ", DIM),
                         (f"{s.failed} failed", ACCENT if s.failed else DIM), (".", DIM))
    table = _table("", ("varied", "left"), ("nominal", "right"), ("tolerance", "left"))
    for t in s.tolerances:
        table.add_row(Text(t.name, style="bold"), _v(t.nominal, t.unit), t.tolerance)
    return [_heading("Tolerances"), head, table]


def _rows(s: SpreadSummary) -> list:
    if not s.rows:
        return []
    table = _table("", ("quantity", "left"), ("mean", "right"), ("std", "right"),
                   ("min", "right"), ("1 %", "right"), ("median", "right"), ("99 %", "right"),
                   ("max", "right"))
    for r in s.rows:
        table.add_row(r.name, _v(r.mean, r.unit), _v(r.std, r.unit), _v(r.min, r.unit),
                      _v(r.p1, r.unit), _v(r.median, r.unit), _v(r.p99, r.unit),
                      _v(r.max, r.unit))
    head = Text("Over the converged samples; std with n - 1; percentiles interpolated "
                "linearly between samples.", style=DIM)
    return [_heading("Spread"), head, table]


def _yield(s: SpreadSummary) -> list:
    if s.yield_fraction is None:
        return []
    table = _table("", ("target", "left"), ("samples meeting it", "right"))
    for t, y in zip(s.targets, s.target_yield, strict=False):
        table.add_row(t, _percent(y))
    total = Text.assemble(("Yield (every target met; failed samples count as not met): ", DIM),
                          (_percent(s.yield_fraction), "bold"), (".", DIM))
    return [_heading("Yield"), table, total]


def _failures(s: SpreadSummary) -> list:
    if not s.failed:
        return []
    shown = s.failures[:MAX_FAILURES_SHOWN]
    table = _table("", ("sample", "right"), ("reason", "left"), ("values", "left"))
    units = {t.name: t.unit for t in s.tolerances}
    for f in shown:
        values = ", ".join(f"{k} {_v(v, units.get(k, ''))}" for k, v in f.values.items())
        table.add_row(str(f.index), f.reason, values)
    title = ("Failed samples" if len(shown) == s.failed
             else f"Failed samples (first {len(shown)} of {s.failed})")
    return [_heading(title), table]


def spread_renderables(s: SpreadSummary) -> Group:
    parts: list = [Text.assemble(("adlin", "bold #2a9d8f"), ("  tolerance spread of ", DIM),
                                 (s.name, "bold"))]
    parts += _header(s) + _rows(s) + _yield(s) + _failures(s)
    parts += [Text("note: " + n, style=DIM) for n in s.notes]
    parts.append(Text(""))
    parts.append(Text("Note: " + s.safety_note, style=DIM))
    return Group(*parts)


def render_spread(s: SpreadSummary, console: Console) -> None:
    console.print(spread_renderables(s))
