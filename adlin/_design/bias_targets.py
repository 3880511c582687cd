"""Targets on the bias point: a supply current budget, a node-voltage window."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import equinox as eqx
import jax
import jax.numpy as jnp

from .._errors import AnalysisError, ParameterError, did_you_mean
from .._system import System
from .._units import si
from .target_base import (
    BOUND_SLACK,
    AbstractTarget,
    check_weight,
    number,
    squared_hinge,
    window_scale,
    window_violation,
)


class BiasLimit(AbstractTarget):
    """Keep a quantity of the operating point inside [low, high].

    Loss: max(violation, 0)^2 with the violation relative to `scale` (default:
    the largest |bound|), zero anywhere inside the window.  Achieved: the
    quantity's value.

    **Fields:**

    - `quantity`: a name the operating point knows (unknown, output, input,
      parameter: ``"v_out"``), or a JAX function ``fn(op) -> scalar`` (e.g.
      ``lambda op: -op["i_Vdd"]`` for the current drawn from a supply whose
      branch current enters its + node).  Give the same function object each
      time so compiled programs are reused.
    - `low`, `high`: bounds (one may be None).
    - `name`: label for reports (default: the quantity's name).
    - `unit`: unit for reports.
    - `scale`: typical size; required when both bounds are zero.
    - `weight`: multiplies the loss.
    """

    quantity: str | Callable[[Any], Any] = eqx.field(static=True)
    low: float | None = number(None)
    high: float | None = number(None)
    name: str = eqx.field(static=True, default="")
    unit: str = eqx.field(static=True, default="")
    scale: float | None = number(None)
    weight: float = number(1.0)

    def __check_init__(self):
        o = f"BiasLimit({self.label()!r})"
        if not (isinstance(self.quantity, str) or callable(self.quantity)):
            raise ParameterError(f"{o}: quantity must be a name or a function of the operating "
                                 f"point, got {self.quantity!r}.")
        if callable(self.quantity) and not self.name:
            raise ParameterError("BiasLimit with a function needs name=... for reports.")
        window_scale(o, self.low, self.high, self.scale)
        check_weight(o, self.weight)

    def label(self) -> str:
        if self.name:
            return self.name
        return self.quantity if isinstance(self.quantity, str) else "bias quantity"

    def validate(self, system: System) -> None:
        if isinstance(self.quantity, str):
            valid = system.unknowns + system.outputs + system.inputs + system.param_names
            if self.quantity not in valid:
                raise ParameterError(f"BiasLimit: unknown quantity {self.quantity!r}: "
                                     f"{did_you_mean(self.quantity, valid)}.")

    def value(self, op):
        v = op[self.quantity] if isinstance(self.quantity, str) else self.quantity(op)
        v = jnp.asarray(v)
        if v.shape != ():
            raise AnalysisError(f"BiasLimit {self.label()!r}: the quantity must be a scalar, "
                                f"got shape {v.shape}.")
        return v

    def _violation(self, v):
        return window_violation(v, self.low, self.high,
                                window_scale("BiasLimit", self.low, self.high, self.scale))

    def loss(self, op, model):
        return squared_hinge(self._violation(self.value(op)))

    def achieved(self, op, model):
        return jax.lax.stop_gradient(self.value(op))[None]

    def met(self, op, model):
        return self._violation(self.achieved(op, model)[0]) <= BOUND_SLACK

    def describe(self) -> str:
        u = self.unit
        if self.high is None:
            return f"{self.label()} at least {si(self.low, u)}"
        if self.low is None:
            return f"{self.label()} at most {si(self.high, u)}"
        return f"{self.label()} between {si(self.low, u)} and {si(self.high, u)}"

    def labels(self):
        return ((self.label(), self.unit),)
