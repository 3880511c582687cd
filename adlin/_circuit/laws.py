"""Binding the device laws of `adlin.devices` to circuit elements.

A wrapper (``Circuit.diode``, ``.bjt``, ``.mosfet``) takes the law's keyword
parameters from the user.  Every keyword of the current law becomes a circuit
parameter ``"<element>.<keyword>"`` (the user's value, else the law's own
default), so each model parameter can be overridden and differentiated.  The
charge law is used only when the user gives one of its own keywords (a
capacitance or transit time); its keywords then become parameters too, and
keywords the two laws share (saturation current, temperature, ...) are one
parameter passed to both.  A keyword whose default is not a finite number
(for example an infinite Early voltage) is left to the law unless given.
"""

from __future__ import annotations

import inspect
import math
from collections.abc import Callable, Mapping
from typing import Any

from .._errors import ModelError, did_you_mean
from .values import as_number

_REQUIRED = object()


def devices():
    """The `adlin.devices` module, imported when a wrapper is first used."""
    try:
        from .. import devices as module
    except ImportError as err:  # pragma: no cover - depends on the installation
        raise ModelError(
            "the device laws in adlin.devices could not be imported; use c.two_terminal(...) "
            f"or c.device(...) with your own law instead ({err})."
        ) from err
    return module


def keywords(law: Callable) -> dict[str, Any]:
    """Keyword-only parameters of a law (polarity excluded) -> default."""
    out = {}
    for prm in inspect.signature(law).parameters.values():
        if prm.kind is inspect.Parameter.KEYWORD_ONLY and prm.name != "polarity":
            out[prm.name] = _REQUIRED if prm.default is inspect.Parameter.empty else prm.default
    return out


Binding = tuple[dict[str, Any], tuple[str, ...], tuple[str, ...] | None]


def bind(
    owner: str, current_law: Callable, charge_law: Callable | None, given: Mapping[str, Any]
) -> Binding:
    """Choose the law keywords an element will use and their values.

    **Returns:** ``(values, current_keys, charge_keys)`` where `values` maps each
    used keyword to the user's value or the law default, and `charge_keys` is
    None when no charge law is needed.

    **Raises:** `ModelError` for an unknown keyword or a missing required one.
    """
    current = keywords(current_law)
    charge = keywords(charge_law) if charge_law is not None else {}
    charge_only = [k for k in charge if k not in current]
    valid = list(current) + charge_only
    for k in given:
        if k not in valid:
            raise ModelError(f"{owner} has no parameter {k!r} ({did_you_mean(k, valid)}).")
    use_charge = any(k in given for k in charge_only)
    values: dict[str, Any] = {}
    for k in list(current) + (charge_only if use_charge else []):
        if k in given:
            values[k] = given[k]
            continue
        default = current.get(k, charge.get(k))
        if default is _REQUIRED:
            raise ModelError(f"{owner} needs a value for {k}=...; the device law has no default.")
        number = as_number(default)
        if number is not None and math.isfinite(number):
            values[k] = number
    current_keys = tuple(k for k in values if k in current)
    charge_keys = tuple(k for k in values if k in charge) if use_charge else None
    return values, current_keys, charge_keys


def polarity(owner: str, value: Any, choices: Mapping[str, int]) -> int:
    """+1 or -1 from a polarity word such as "npn" or "pmos"."""
    if isinstance(value, str) and value.lower() in choices:
        return choices[value.lower()]
    raise ModelError(f"{owner} polarity must be one of {list(choices)}, got {value!r}.")


def call_branch(law: Callable, keys: tuple[str, ...], v, p):
    """A two-terminal law of the branch voltage, fed the element's parameters."""
    return law(v, **{k: p[k] for k in keys})


def call_terminals(
    law: Callable, terminals: tuple[str, ...], sign: int, keys: tuple[str, ...], v, p
):
    """A multi-terminal law taking voltages in `terminals` order, returning a dict."""
    out = law(*(v[t] for t in terminals), polarity=sign, **{k: p[k] for k in keys})
    return dict(zip(terminals, out, strict=True))
