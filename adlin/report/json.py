"""A `Summary` as a JSON-serializable dict.

Numbers are SI floats; a value that is not finite (the Q of a real pole, the
time constant of a pole at s = 0, an infinite DC gain) is ``null``.  Complex
poles and zeros are given by their real and imaginary parts in rad/s; a
conjugate pair appears once, with ``"pair": true`` and a positive imaginary
part.
"""

from __future__ import annotations

import json as _json
import math
from typing import Any

from .._linear.pole_table import Root
from . import Quantity, Summary
from .states import states_to_dict

SCHEMA = "adlin.summary/1"


def _num(value: float) -> float | None:
    value = float(value) + 0.0  # + 0.0 turns -0.0 into 0.0
    return value if math.isfinite(value) else None


def _quantity(q: Quantity) -> dict[str, Any]:
    return {"value": _num(q.value), "unit": q.unit}


def _root(r: Root) -> dict[str, Any]:
    return {
        "real_rad_s": _num(r.value.real),
        "imag_rad_s": _num(r.value.imag),
        "pair": r.pair,
        "frequency_hz": _num(r.frequency_hz),
        "damping": _num(r.damping),
        "q": _num(r.q) if r.pair else None,
        "time_constant_s": _num(r.time_constant_s),
    }


def to_dict(summary: Summary) -> dict[str, Any]:
    """The summary as nested dicts, lists, strings, floats, bools and None."""
    out: dict[str, Any] = {
        "schema": SCHEMA,
        "model": summary.name,
        "inputs": {q.name: _quantity(q) for q in summary.inputs},
        "params": {q.name: _quantity(q) for q in summary.params},
        "bias_point": {q.name: _quantity(q) for q in summary.bias},
        "outputs": {q.name: _quantity(q) for q in summary.outputs},
        "solver": {**summary.solver, "residual_norm": _num(summary.solver["residual_norm"])},
        "devices": {
            element: {q.name: _quantity(q) for q in rows}
            for element, rows in summary.devices.items()
        },
        "poles": [_root(r) for r in summary.poles],
        "zeros": [
            {"output": o, "input": i, "zeros": [_root(r) for r in roots]}
            for (o, i), roots in summary.zeros.items()
        ],
        "dc_gains": [
            {"output": g.output, "input": g.input, "value": _num(g.value), "unit": g.unit}
            for g in summary.dc_gains
        ],
        "normalized": None,
        "notes": {q.name: _quantity(q) for q in summary.notes},
        "warnings": list(summary.warnings),
        "steady_states": None if summary.states is None else states_to_dict(summary.states),
        "safety_note": summary.safety_note,
    }
    nm = summary.normalized
    if nm is not None:
        out["normalized"] = {
            "time_scale_s": _num(nm.time_scale_s),
            "scales": {
                kind + "s": {
                    name: {"value": _num(v), "unit": unit, "origin": origin}
                    for k, name, v, unit, origin in nm.scales
                    if k == kind
                }
                for kind in ("state", "input", "output")
            },
            "gains": {name: _num(v) for name, v in nm.gains},
            "time_constant_ratios": [_num(r) for r in nm.time_constant_ratios],
            "poles": [{"real": _num(p.real), "imag": _num(p.imag)} for p in nm.poles],
        }
    return out


def dumps(summary: Summary, indent: int | None = 2) -> str:
    """The summary as a JSON string (strict JSON: no NaN or Infinity)."""
    return _json.dumps(to_dict(summary), indent=indent, allow_nan=False)
