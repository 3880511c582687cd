"""Element values: a number becomes a parameter, a string names a declared one.

Every value an element uses (a resistance, a source voltage, a saturation
current) ends up as a named entry of ``System.params`` or ``System.inputs``,
so it can be overridden by name, swept, and differentiated.  An element keeps
a `Ref` to that entry and reads it from ``p`` (or ``u``) when the model is
evaluated.
"""

from __future__ import annotations

import dataclasses
import math
import numbers
from typing import Any

import numpy as np

from .._errors import ModelError, ParameterError, did_you_mean

BOLTZMANN = 1.380649e-23  # J/K, exact since the 2019 SI redefinition
ELEMENTARY_CHARGE = 1.602176634e-19  # C, exact since the 2019 SI redefinition

# Units of the device-law keywords of adlin.devices, for reports.
LAW_UNITS = {
    "saturation_current": "A",
    "emission_coefficient": "",
    "temperature": "K",
    "zero_bias_capacitance": "F",
    "built_in_potential": "V",
    "grading_coefficient": "",
    "forward_fraction": "",
    "transit_time": "s",
    "forward_beta": "",
    "reverse_beta": "",
    "early_voltage": "V",
    "base_emitter_capacitance": "F",
    "base_collector_capacitance": "F",
    "forward_transit_time": "s",
    "reverse_transit_time": "s",
    "transconductance_parameter": "A/V^2",
    "threshold_voltage": "V",
    "channel_length_modulation": "1/V",
    "slope_factor": "",
    "gate_source_capacitance": "F",
    "gate_drain_capacitance": "F",
    "gate_bulk_capacitance": "F",
    "drain_bulk_capacitance": "F",
    "source_bulk_capacitance": "F",
}


@dataclasses.dataclass(frozen=True)
class Ref:
    """Where an element value lives: a parameter (in p) or an input (in u)."""

    kind: str  # "param" or "input"
    name: str


def as_number(value: Any) -> float | None:
    """The value as a Python float if it is a real scalar, else None."""
    if isinstance(value, bool):
        return None
    if isinstance(value, numbers.Real):
        return float(value)
    if hasattr(value, "shape") and hasattr(value, "dtype") and np.shape(value) == ():
        if np.issubdtype(np.dtype(value.dtype), np.number) and not np.iscomplexobj(value):
            return float(value)
    return None


class ValueTable:
    """The parameters and inputs of a circuit, in declaration order."""

    def __init__(self) -> None:
        self.params: dict[str, float] = {}
        self.inputs: dict[str, float] = {}
        self.units: dict[str, str] = {}

    def declare(self, kind: str, name: Any, default: Any, unit: str) -> str:
        """Add a parameter (kind "param") or input (kind "input"); return its name."""
        if not isinstance(name, str) or not name:
            raise ModelError(f"a {_kind_word(kind)} name must be a non-empty string, got {name!r}.")
        if name in self.params or name in self.inputs:
            raise ModelError(
                f"{_kind_word(kind)} {name!r} is declared twice (it already exists "
                "as a parameter or input); choose another name."
            )
        number = as_number(default)
        if number is None or not math.isfinite(number):
            raise ModelError(
                f"{_kind_word(kind)} {name!r} needs a finite number as default "
                f"value, got {default!r}."
            )
        (self.params if kind == "param" else self.inputs)[name] = number
        if unit:
            self.units[name] = str(unit)
        return name

    def resolve(
        self, value: Any, *, owner: str, what: str, new_name: str, unit: str, allow_input: bool
    ) -> Ref:
        """Turn an element value into a `Ref`, creating a parameter for a number.

        **Arguments:**

        - `value`: a number (creates parameter `new_name` with that default) or
          the name of a declared parameter or input.
        - `owner`: the element, for messages, e.g. ``"resistor 'R1'"``.
        - `what`: which value of the element, for messages, e.g. ``"resistance"``.
        - `new_name`: the parameter to create for a number.
        - `unit`: unit of a created parameter.
        - `allow_input`: False for values used in charges and fluxes, which
          cannot see the inputs (``q(x, p)`` has no ``u``).

        **Raises:**

        - `ParameterError` for a string that names nothing declared.
        - `ModelError` for any other kind of value, or a name clash.
        """
        if isinstance(value, str):
            if value in self.params:
                return Ref("param", value)
            if value in self.inputs:
                if not allow_input:
                    raise ModelError(
                        f"{owner} {what} refers to input {value!r}, but charges and fluxes "
                        "cannot depend on inputs (q(x, p) has no u); declare it with "
                        f"c.param({value!r}, ...) instead."
                    )
                return Ref("input", value)
            known = list(self.params) + list(self.inputs)
            raise ParameterError(
                f"{owner} {what} refers to {value!r}, which is neither a declared parameter nor "
                f"an input; declare it first with c.param({value!r}, ...) or c.input(...) "
                f"({did_you_mean(value, known)})."
            )
        number = as_number(value)
        if number is None:
            raise ModelError(
                f"{owner} {what} must be a number or the name of a declared "
                f"parameter, got {type(value).__name__} {value!r}."
            )
        if not math.isfinite(number):
            raise ModelError(f"{owner} {what} must be finite, got {number!r}.")
        if new_name in self.params or new_name in self.inputs:
            raise ModelError(
                f"{owner} would create parameter {new_name!r} for its {what}, but that name is "
                f"already declared; pass the string {new_name!r} to use the declared one, or "
                "rename the element."
            )
        self.params[new_name] = number
        if unit:
            self.units[new_name] = unit
        return Ref("param", new_name)

    def default(self, ref: Ref) -> float:
        """Default value of a referenced parameter or input."""
        return (self.params if ref.kind == "param" else self.inputs)[ref.name]


def thermal_voltage(temperature: float) -> float:
    """k T / q in volts."""
    return BOLTZMANN * temperature / ELEMENTARY_CHARGE


def junction_limits(
    saturation_current: float, emission_coefficient: float, temperature: float
) -> tuple[float, float]:
    """Thermal voltage n V_T and critical voltage of a pn junction.

    The critical voltage ``n V_T ln(n V_T / (sqrt(2) I_s))`` is where the
    exponential's curvature radius is smallest; Newton steps beyond it are
    limited logarithmically (Vlach & Singhal, Computer Methods for Circuit
    Analysis and Design, 2nd ed., 1994, ch. on nonlinear DC analysis).
    """
    nvt = emission_coefficient * thermal_voltage(temperature)
    return nvt, nvt * math.log(nvt / (math.sqrt(2.0) * saturation_current))


def _kind_word(kind: str) -> str:
    return "parameter" if kind == "param" else "input"
