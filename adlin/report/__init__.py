"""Reports of a model at its bias point: terminal tables, JSON, figures.

`summarize` gathers everything a report shows into one `Summary` (plain
Python and NumPy values, no JAX arrays); `text.render`, `json.to_dict` and
`figures.write_figures` turn a `Summary` into a terminal summary, a
JSON-serializable dict and PNG files.  Reports never import the command line;
the command line imports reports.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import jax
import numpy as np

from .._errors import AnalysisError, ParameterError, did_you_mean
from .._linear.pole_table import Root, group_roots

SAFETY_NOTE = (
    "Results are models: measure prototypes before relying on them; mains or high-energy "
    "designs follow local electrical codes and licensed practice."
)

# Pairs (output, input) beyond this many are left out of zero tables and plots.
MAX_PAIRS = 6


@dataclass(frozen=True)
class Quantity:
    """A named value with its unit (SI)."""

    name: str
    value: float
    unit: str = ""


@dataclass(frozen=True)
class Gain:
    """DC small-signal gain d output / d input at the bias point."""

    output: str
    input: str
    value: float
    unit: str


@dataclass(frozen=True)
class Normalized:
    """The dimensionless model: scales and what survives of the numbers."""

    time_scale_s: float
    scales: tuple[tuple[str, str, float, str, str], ...]  # (kind, name, value, unit, origin)
    gains: tuple[tuple[str, float], ...]  # ("output/input", dimensionless DC gain)
    time_constant_ratios: tuple[float, ...]  # tau_k / T, slowest first
    poles: tuple[complex, ...]  # dimensionless poles


@dataclass
class Summary:
    """Everything a report shows about one model at one bias point.

    - `name`: the model's name.  `inputs`, `params`: values used.
    - `bias`: unknowns and outputs at the bias point, with units.
    - `solver`: how the bias point was found (method, iterations, residual).
    - `devices`: element -> small-signal quantities (empty for a plain System).
    - `poles`: grouped poles (conjugate pairs once); `zeros`: per
      (output, input) pair.
    - `dc_gains`: every output/input pair.
    - `normalized`: the dimensionless model, or None if it could not be formed.
    - `pairs`: the (output, input) pairs shown in zero tables and figures.
    - `notes`: extra named results (e.g. a loop gain and phase margin).
    - `model`: the `LinearModel` itself, for figures.
    - `states`: the other steady states at these values
      (`adlin.report.states.StatesSummary`), or None when not searched.
    """

    name: str
    inputs: list[Quantity]
    params: list[Quantity]
    bias: list[Quantity]
    outputs: list[Quantity]
    solver: dict[str, Any]
    devices: dict[str, list[Quantity]]
    poles: list[Root]
    zeros: dict[tuple[str, str], list[Root]]
    dc_gains: list[Gain]
    normalized: Normalized | None
    pairs: list[tuple[str, str]]
    notes: list[Quantity] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    model: Any = None
    states: Any = None  # a report.states.StatesSummary when several states were searched
    safety_note: str = SAFETY_NOTE


def _ratio_unit(out_unit: str, in_unit: str) -> str:
    if out_unit == in_unit:
        return f"{out_unit}/{in_unit}" if out_unit else ""
    if not in_unit:
        return out_unit
    return f"{out_unit or '1'}/{in_unit}"


def choose_pairs(
    model, input: str | None = None, output: str | None = None
) -> list[tuple[str, str]]:
    """(output, input) pairs to show: the one asked for, else all (at most `MAX_PAIRS`).

    **Raises:** `ParameterError` for an input or output name the model does not have.
    """
    ins, outs = model.input_names, model.output_names
    for kind, name, names in (("input", input, ins), ("output", output, outs)):
        if name is not None and name not in names:
            raise ParameterError(f"the model has no {kind} {name!r}: {did_you_mean(name, names)}.")
    chosen_in = [input] if input is not None else list(ins)
    chosen_out = [output] if output is not None else list(outs)
    return [(o, i) for o in chosen_out for i in chosen_in][:MAX_PAIRS]


def summarize(
    system,
    op,
    model=None,
    *,
    devices: Any = None,
    input: str | None = None,
    output: str | None = None,
    notes: Sequence[Quantity] = (),
    normalize: bool = True,
) -> Summary:
    """Collect a report's content for `system` at the operating point `op`.

    **Arguments:**

    - `system`: the `adlin.System`.
    - `op`: its `OperatingPoint` (un-batched, concrete values).
    - `model`: the `LinearModel` at `op` (computed if None).
    - `devices`: small-signal table of the devices, as returned by
      `Circuit.small_signal` (anything with `.items()` and `.units`), or None.
    - `input`, `output`: restrict zero tables and figures to one pair.
    - `notes`: extra named results to show.
    - `normalize`: include the normalized model.

    **Returns:** a `Summary`.

    **Raises:** `AdlinError` subclasses from linearization and analysis (a
    model of index > 1 at this bias, an unknown input or output name).
    """
    from .._linear.linearize import linearize

    if model is None:
        model = linearize(system, op)
    warnings: list[str] = []
    units = system.units

    def unit_of(name: str) -> str:
        return units.get(name) or system.unit(name)

    inputs = [
        Quantity(k, float(v), unit_of(k))
        for k, v in zip(op.input_names, np.asarray(op.u), strict=True)
    ]
    params = [
        Quantity(k, float(v), unit_of(k))
        for k, v in zip(op.param_names, np.asarray(op.p), strict=True)
    ]
    bias = [
        Quantity(k, float(v), unit_of(k))
        for k, v in zip(op.unknown_names, np.asarray(op.x), strict=True)
    ]
    outputs = [
        Quantity(k, float(v), unit_of(k))
        for k, v in zip(op.output_names, np.asarray(op.y), strict=True)
    ]
    solver = {
        "method": op.method,
        "converged": bool(op.converged),
        "iterations": int(op.iterations),
        "evaluations": int(op.evaluations),
        "residual_norm": float(op.residual_norm),
        "message": op.message,
    }

    device_rows: dict[str, list[Quantity]] = {}
    if devices is not None:
        dev_units = devices.units
        for element, quantities in devices.items():
            device_rows[element] = [
                Quantity(q, float(np.asarray(v)), dev_units.get(element, {}).get(q, ""))
                for q, v in quantities.items()
            ]

    # Reduce once (checks the index at this bias); poles, zeros, gains and the
    # normalized form of the reduced model are those of the full one.
    # Host (numpy) copies of the reduced matrices: the per-pair column and row
    # picks below are then numpy slices, not one small compiled program each.
    reduced = jax.tree.map(np.asarray, model.reduce())
    poles = group_roots(np.asarray(reduced.poles()))
    unstable = [r for r in poles if r.value.real > 0]
    if unstable:
        warnings.append(
            f"{len(unstable)} pole(s) in the right half plane: the bias point is unstable, so "
            "the circuit will not stay there (it oscillates or latches)."
        )
    pairs = choose_pairs(model, input, output)
    zeros = {(o, i): group_roots(np.asarray(reduced.zeros(input=i, output=o))) for o, i in pairs}

    dc_gains: list[Gain] = []
    if len(model.input_names):
        G = _dc_gain(reduced, poles, warnings)
        for a, o in enumerate(model.output_names):
            for b, i in enumerate(model.input_names):
                dc_gains.append(Gain(o, i, float(G[a, b]), _ratio_unit(unit_of(o), unit_of(i))))

    norm = None
    if normalize and poles:
        norm = _normalized(reduced, unit_of, warnings)

    return Summary(
        name=system.name,
        inputs=inputs,
        params=params,
        bias=bias,
        outputs=outputs,
        solver=solver,
        devices=device_rows,
        poles=poles,
        zeros=zeros,
        dc_gains=dc_gains,
        normalized=norm,
        pairs=pairs,
        notes=list(notes),
        warnings=warnings,
        model=model,
    )


def _dc_gain(model, poles: list[Root], warnings: list[str]) -> np.ndarray:
    # A pole at the origin (an integrator) makes the DC gain infinite.
    if any(r.magnitude_rad_s == 0.0 for r in poles):
        warnings.append("a pole sits at s = 0 (an integrator): the DC gains are infinite.")
        shape = (len(model.output_names), len(model.input_names))
        return np.full(shape, math.inf)
    return np.asarray(model.dc_gain())


def _normalized(model, unit_of, warnings: list[str]) -> Normalized | None:
    try:
        nm = model.normalize()
    except AnalysisError as err:
        warnings.append(f"normalized model left out: {err}")
        return None
    origin = dict(nm.scale_origin)
    scales = []
    for kind, names, values in (
        ("state", nm.state_names, nm.state_scales),
        ("input", nm.input_names, nm.input_scales),
        ("output", nm.output_names, nm.output_scales),
    ):
        for name, value in zip(names, np.asarray(values), strict=True):
            scales.append((kind, name, float(value), unit_of(name), origin.get(name, "")))
    # nm.gains() and nm.time_constant_ratios() in numpy, from one evaluation each
    # of dc_gain and poles: indexing JAX arrays here would compile a small
    # program per operation on every run.
    G = np.asarray(nm.dc_gain())
    gains = tuple((f"{o}/{i}", float(G[a, b])) for a, o in enumerate(nm.output_names)
                  for b, i in enumerate(nm.input_names))
    dimensionless = np.asarray(nm.poles())
    ratios = tuple(float(r) for r in 1.0 / np.abs(dimensionless))  # slowest first
    poles = tuple(complex(p) for p in dimensionless)
    return Normalized(float(nm.time_scale), tuple(scales), gains, ratios, poles)
