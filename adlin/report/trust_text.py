"""Terminal report of `adlin check`: linear range per polarity, distortion table."""

from __future__ import annotations

import math

from rich.console import Console, Group
from rich.text import Text

from .text import ACCENT, DIM, _heading, _table, value_text
from .trust import CheckSummary


def _limit(value: float, bracket, unit: str) -> Text | str:
    if math.isinf(bracket[1]):
        return Text(f"none up to {value_text(abs(value), unit)}", style=DIM)
    return value_text(value, unit)


def _kind(r) -> str:
    return "step" if r.kind == "step" else f"sine {value_text(r.f_hz, 'Hz')}"


def _ranges(s: CheckSummary) -> list:
    table = _table("", ("stimulus", "left"), ("positive limit", "right"),
                   ("negative limit", "right"), ("limits first", "left"), ("run", "right"))
    for r in s.ranges:
        first = r.limiting
        table.add_row(_kind(r), _limit(r.positive, r.positive_bracket, s.input_unit),
                      _limit(r.negative, r.negative_bracket, s.input_unit),
                      Text(first, style="bold" if first in ("positive", "negative") else DIM),
                      value_text(r.t_end, "s"))
    head = Text.assemble(
        ("Largest input amplitudes on ", DIM), (s.input, "bold"),
        (f" (bias {value_text(s.bias_input, s.input_unit)}) for which ", DIM),
        (s.output, "bold"),
        (f" stays within {100 * s.tol:g} % of the linear model's swing.", DIM))
    notes = [Text(f"note ({_kind(r)}): {n}", style=DIM) for r in s.ranges for n in r.notes]
    return [_heading("Linear range"), head, table, *notes]


def _percent(v: float | None) -> str:
    if v is None or not math.isfinite(v):
        return "—"
    return f"{100 * v:.3g} %"


def _distortion(s: CheckSummary) -> list:
    d = s.distortion
    if d is None:
        return []
    table = _table("", ("amplitude", "right"), ("HD2 predicted", "right"),
                   ("HD2 measured", "right"), ("HD3 predicted", "right"),
                   ("HD3 measured", "right"), ("THD predicted", "right"),
                   ("THD measured", "right"))
    for row in d.rows():
        table.add_row(value_text(row["amplitude"], s.input_unit),
                      _percent(row["predicted_hd2"]), _percent(row.get("measured_hd2")),
                      _percent(row["predicted_hd3"]), _percent(row.get("measured_hd3")),
                      _percent(row["predicted_thd"]), _percent(row.get("measured_thd")))
    head = Text(f"Harmonic distortion of {s.output} for a sine on {s.input} at "
                f"{value_text(d.f_hz, 'Hz')}: predicted from the model's second and third "
                "derivatives at the bias point, measured by FFT of the periodic transient.",
                style=DIM)
    notes = [Text("note: " + n, style=ACCENT) for n in d.notes]
    return [_heading("Distortion"), head, table, *notes]


def check_renderables(s: CheckSummary) -> Group:
    parts: list = [Text.assemble(("adlin", "bold #2a9d8f"), ("  linear-model check of ", DIM),
                                 (s.name, "bold"))]
    parts += _ranges(s) + _distortion(s)
    parts += [Text("note: " + n, style=DIM) for n in s.notes]
    parts.append(Text(""))
    parts.append(Text("Note: " + s.safety_note, style=DIM))
    return Group(*parts)


def render_check(s: CheckSummary, console: Console) -> None:
    console.print(check_renderables(s))
