"""Terminal report of `adlin size`: free parameters, targets, the search itself."""

from __future__ import annotations

import math

from rich.console import Console, Group
from rich.text import Text

from .sizing import SizingSummary
from .text import ACCENT, DIM, _heading, _table, value_text


def _yes(met: bool | None) -> Text:
    if met is None:
        return Text("—", style=DIM)
    return Text("yes", style="bold") if met else Text("no", style=ACCENT)


def _free(s: SizingSummary) -> list:
    columns = [("parameter", "left"), ("start", "right"), ("sized", "right"),
               ("low bound", "right"), ("high bound", "right")]
    if s.series:
        columns.append((f"{s.series} value", "right"))
    table = _table("", *columns)
    for r in s.free:
        final = Text(value_text(r.final, r.unit))
        if r.at_bound:
            final.append(f" (at {r.at_bound} bound)", style=ACCENT)
        cells = [Text(r.name, style="bold"), value_text(r.start, r.unit), final,
                 Text(value_text(r.low, r.unit), style=DIM),
                 Text(value_text(r.high, r.unit), style=DIM)]
        if s.series:
            cells.append(value_text(r.rounded, r.unit) if r.rounded is not None else "—")
        table.add_row(*cells)
    return [_heading("Free parameters"), table]


def _targets(s: SizingSummary) -> list:
    columns = [("target", "left"), ("achieved", "right"), ("met", "left")]
    if s.series:
        columns += [(f"with {s.series} values", "right"), ("met", "left")]
    table = _table("", *columns)
    for r in s.targets:
        cells = [r.target, r.achieved_text, _yes(r.met)]
        if s.series:
            cells += [r.rounded_text or "—", _yes(r.rounded_met)]
        table.add_row(*cells)
    verdict = Text.assemble(("All targets ", DIM), ("met" if s.met else "not met",
                                                     "bold" if s.met else ACCENT))
    if s.series:
        verdict.append(f"; after rounding to {s.series}: ", style=DIM)
        verdict.append("met" if s.rounded_met else "not met",
                       style="bold" if s.rounded_met else ACCENT)
    verdict.append(".", style=DIM)
    return [_heading("Targets"), table, verdict]


def _loss(v: float) -> str:
    return f"{v:.3g}" if math.isfinite(v) else "no steady state"


def _search(s: SizingSummary) -> list:
    n = len(s.losses)
    iterations = len(s.losses[s.best]) - 1 if s.losses else 0
    failed = (f", {s.failed_evaluations} of them without a steady state"
              if s.failed_evaluations else "")
    head = Text.assemble(
        (f"{n} start{'s' if n != 1 else ''}, ", DIM), (f"{s.evaluations}", "bold"),
        (f" loss-and-gradient evaluations{failed}; best: start {s.best} after "
         f"{iterations} iteration{'s' if iterations != 1 else ''} ({s.message}).", DIM))
    table = _table("", ("start", "right"), ("first loss", "right"), ("final loss", "right"),
                   ("iterations", "right"))
    for k, h in enumerate(s.losses):
        mark = " (best)" if k == s.best else ""
        table.add_row(f"{k}{mark}", _loss(float(h[0])) if len(h) else "—",
                      _loss(float(s.final_losses[k])), str(max(len(h) - 1, 0)))
    return [_heading("Search"), head, table]


def sizing_renderables(s: SizingSummary) -> Group:
    parts: list = [Text.assemble(("adlin", "bold #2a9d8f"), ("  sizing of ", DIM),
                                 (s.name, "bold"))]
    parts += _free(s) + _targets(s) + _search(s)
    parts += [Text("note: " + n, style=DIM) for n in s.notes]
    parts.append(Text(""))
    parts.append(Text("Note: " + s.safety_note, style=DIM))
    return Group(*parts)


def render_sizing(s: SizingSummary, console: Console) -> None:
    console.print(sizing_renderables(s))
