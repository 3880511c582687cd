"""Terminal summary of a `Summary`, as `rich` tables.

Sections, in the order an engineer reads them: bias point, device
small-signal parameters, poles, zeros, DC gains, normalized model, notes,
warnings, and the safety note.  Values are in engineering notation with SI
units.
"""

from __future__ import annotations

import math
from collections.abc import Iterable

from rich import box
from rich.console import Console, Group
from rich.rule import Rule
from rich.table import Table
from rich.text import Text

from .._linear.pole_table import Root
from .._units import si
from . import Quantity, Summary

# Our own palette: teal headings, slate borders, amber warnings.
HEADING = "bold #2a9d8f"
BORDER = "#5c6f7b"
ACCENT = "#e9c46a"
DIM = "#8a9ba8"

_UNIT_SYMBOLS = {"ohm": "Ω", "Ohm": "Ω", "ohms": "Ω"}


def unit_text(unit: str) -> str:
    return _UNIT_SYMBOLS.get(unit, unit)


def value_text(value: float, unit: str = "") -> str:
    """Engineering notation; plain significant digits for ratios such as V/V."""
    if unit and "/" in unit:
        num, _, den = unit.partition("/")
        if num == den:
            return _plain(value) + f" {unit}"
    if not unit:
        return _plain(value)
    if 0.0 < abs(value) < 1e-18:  # below the smallest prefix: numerically zero, say so plainly
        return f"{value:.3g} {unit_text(unit)}"
    return si(value, unit_text(unit))


def _plain(value: float) -> str:
    if not math.isfinite(value):
        return "nan" if math.isnan(value) else ("-inf" if value < 0 else "inf")
    return f"{value:.4g}"


def eng(value: float) -> str:
    """A number with an SI prefix and no unit: -227100 -> '-227.1k'."""
    if value == 0.0:
        return "0"
    if not math.isfinite(value):
        return _plain(value)
    return si(value, "#").replace(" ", "").rstrip("#")


def _table(title: str, *columns: tuple[str, str]) -> Table:
    table = Table(
        title=None,
        box=box.SIMPLE_HEAD,
        border_style=BORDER,
        header_style="bold",
        pad_edge=False,
        show_edge=False,
    )
    for name, justify in columns:
        table.add_column(name, justify=justify)  # type: ignore[arg-type]
    table.caption = None
    return table


def _heading(text: str) -> Rule:
    return Rule(Text(text, style=HEADING), style=BORDER, align="left")


def _quantities(rows: Iterable[Quantity]) -> Table:
    table = _table("", ("quantity", "left"), ("value", "right"))
    for q in rows:
        table.add_row(q.name, value_text(q.value, q.unit))
    return table


def _bias(summary: Summary) -> list:
    s = summary.solver
    status = "converged" if s["converged"] else s["message"]
    # a strategy other than plain Newton is worth naming with its cost
    long_names = {"conductance": "conductance stepping", "source": "source stepping",
                  "pseudo-transient": "pseudo-transient continuation",
                  "homotopy": "Newton homotopy"}
    method = long_names.get(s["method"], s["method"])
    effort = (f" in {s['iterations']} iteration{'' if s['iterations'] == 1 else 's'}, "
              if s["method"] == "newton" else
              f" and a Newton polish, {s['iterations']} steps, "
              f"{s.get('evaluations', 0)} residual evaluations over every strategy tried, ")
    head = Text.assemble(
        ("Solved by ", DIM),
        (method, "bold"),
        (effort, DIM),
        (status, DIM),
        (f"; largest residual {s['residual_norm']:.2g}.", DIM),
    )
    out: list = [_heading("Bias point"), head]
    grid = Table.grid(padding=(0, 4))
    grid.add_column()
    grid.add_column()
    left = _quantities(summary.bias)
    right_rows = summary.outputs + summary.inputs
    right = _table("", ("output / input", "left"), ("value", "right"))
    for q in summary.outputs:
        right.add_row(Text(q.name, style="bold"), value_text(q.value, q.unit))
    for q in summary.inputs:
        right.add_row(Text(q.name + " (input)", style=DIM), value_text(q.value, q.unit))
    if right_rows:
        grid.add_row(left, right)
        out.append(grid)
    else:
        out.append(left)
    return out


def _devices(summary: Summary) -> list:
    if not summary.devices:
        return []
    out: list = [_heading("Device small-signal parameters")]
    # Devices with the same quantities (all MOSFETs, all BJTs) share one table.
    groups: dict[tuple[str, ...], list[str]] = {}
    for element, rows in summary.devices.items():
        groups.setdefault(tuple(q.name for q in rows), []).append(element)
    for names, elements in groups.items():
        table = _table("", ("device", "left"), *[(n, "right") for n in names])
        for element in elements:
            table.add_row(element, *[value_text(q.value, q.unit) for q in summary.devices[element]])
        out.append(table)
    return out


def _roots(title: str, roots: list[Root], kind: str) -> list:
    out: list = [_heading(title)]
    if not roots:
        out.append(Text(f"no finite {kind}s", style=DIM))
        return out
    table = _table(
        "",
        ("#", "right"),
        ("s (rad/s)", "right"),
        ("|s|/2π (Hz)", "right"),
        ("damping ζ", "right"),
        ("Q", "right"),
        ("τ (s)", "right"),
        ("", "left"),
    )
    for k, r in enumerate(roots, 1):
        if r.pair:
            s = f"{eng(r.value.real)} ± j{eng(r.value.imag)}"
        else:
            s = eng(r.value.real)
        q = f"{r.q:.3g}" if r.pair and math.isfinite(r.q) else "—"
        tau = eng(r.time_constant_s) if math.isfinite(r.time_constant_s) else "∞"
        flag = ""
        if r.value.real > 0:
            flag = "right half plane" if kind == "pole" else "right half plane (non-minimum phase)"
        elif r.value.real == 0 and kind == "pole":
            flag = "on the jω axis"
        table.add_row(
            str(k),
            s,
            eng(r.frequency_hz),
            f"{r.damping:.3f}",
            q,
            tau,
            Text(flag, style=ACCENT if flag else ""),
        )
    out.append(table)
    return out


def _gains(summary: Summary) -> list:
    if not summary.dc_gains:
        return []
    table = _table("", ("output", "left"), ("input", "left"), ("DC gain", "right"), ("dB", "right"))
    for g in summary.dc_gains:
        db = "—"
        if g.value != 0 and math.isfinite(g.value):
            db = f"{20 * math.log10(abs(g.value)):.1f}".replace("-0.0", "0.0")
        table.add_row(g.output, g.input, value_text(g.value, g.unit), db)
    return [_heading("DC small-signal gains"), table]


def _normalized(summary: Summary) -> list:
    nm = summary.normalized
    if nm is None:
        return []
    out: list = [
        _heading("Normalized model"),
        Text.assemble(
            ("time scale T = ", DIM),
            (si(nm.time_scale_s, "s"), "bold"),
            (" (dominant time constant); every quantity divided by its scale below.", DIM),
        ),
    ]
    scales = _table("", ("quantity", "left"), ("", "left"), ("scale", "right"), ("origin", "left"))
    for kind, name, value, unit, origin in nm.scales:
        scales.add_row(
            name, Text(kind, style=DIM), value_text(value, unit), Text(origin, style=DIM)
        )
    gains = _table("", ("dimensionless gain", "left"), ("value", "right"))
    for name, value in nm.gains:
        gains.add_row(name.replace("/", " / "), _plain(value))
    ratios = _table("", ("#", "right"), ("τ_k / T", "right"))
    for k, r in enumerate(nm.time_constant_ratios, 1):
        ratios.add_row(str(k), f"{r:.3g}")
    columns = [scales, gains, ratios] if nm.gains else [scales, ratios]
    grid = Table.grid(padding=(0, 4))
    for _ in columns:
        grid.add_column(vertical="top")
    grid.add_row(*columns)
    out.append(grid)
    return out


def _states(summary: Summary) -> list:
    s = summary.states
    if s is None:
        return []
    if not s.several:
        return [Text(s.message(), style=DIM)]
    table = _table("", ("#", "right"), ("class", "left"), ("found by", "left"),
                   *((name, "right") for name, _ in s.columns), ("max Re(pole)", "right"))
    for r in s.rows:
        rate = "" if r.growth_rate is None else value_text(r.growth_rate, "rad/s")
        mark = Text(f"{r.index} ◀ used", style="bold") if r.used else str(r.index)
        table.add_row(mark, Text(r.label, style="bold" if r.stable else ACCENT), r.found_by,
                      *(value_text(r.values[name], unit) for name, unit in s.columns), rate)
    notes = [Text("note: " + n, style=DIM) for n in s.notes]
    return [_heading("Steady states at these values"), Text(s.message(), style=ACCENT), table,
            *notes]


def _notes(summary: Summary) -> list:
    if not summary.notes:
        return []
    return [_heading("Notes"), _quantities(summary.notes)]


def renderables(summary: Summary) -> Group:
    """The summary as one `rich` renderable."""
    parts: list = [
        Text.assemble(
            ("adlin", "bold #2a9d8f"), ("  small-signal summary of ", DIM), (summary.name, "bold")
        ),
    ]
    parts += _bias(summary)
    parts += _states(summary)
    parts += _devices(summary)
    parts += _roots("Poles", summary.poles, "pole")
    for (o, i), roots in summary.zeros.items():
        parts += _roots(f"Zeros  {i} → {o}", roots, "zero")
    parts += _gains(summary)
    parts += _normalized(summary)
    parts += _notes(summary)
    for w in summary.warnings:
        parts.append(Text("warning: " + w, style=ACCENT))
    parts.append(Text(""))
    parts.append(Text("Note: " + summary.safety_note, style=DIM))
    return Group(*parts)


def render(summary: Summary, console: Console | None = None) -> None:
    """Print the summary to `console` (default: standard output)."""
    console = console or make_console()
    console.print(renderables(summary))


def make_console(file=None) -> Console:
    """A console that keeps tables unwrapped when the output is not a terminal."""
    console = Console(file=file, highlight=False, soft_wrap=False)
    if not console.is_terminal:
        console = Console(file=file, highlight=False, soft_wrap=False, width=120)
    return console


def to_text(summary: Summary, width: int = 120) -> str:
    """The summary as plain text (no colours), e.g. for a log file."""
    console = Console(
        record=True, width=width, highlight=False, color_system=None, file=open_null()
    )
    console.print(renderables(summary))
    return console.export_text()


def open_null():
    import io

    return io.StringIO()
