"""What every design target is: a smooth loss, an achieved value, met or not."""

from __future__ import annotations

import abc
import dataclasses
import math

import equinox as eqx
import jax
import jax.numpy as jnp
from jaxtyping import Array, Bool, Float

from .._errors import ParameterError
from .._system import System
from .._units import si

# A bound counts as met when the normalized violation is below this (rounding only).
BOUND_SLACK = 1e-9


class TargetResult(eqx.Module):
    """One target evaluated at one design point.

    - `achieved`: what the design reaches, shape (a,) (see `labels`: e.g. the
      natural frequency and damping of the pole pair nearest a pole-pair target).
    - `met`: True when the target holds (within its tolerance).
    - `loss`: the target's smooth loss times its weight (0 when met exactly,
      positive otherwise; see the target's class).
    - `labels`, `units`: names and units of the entries of `achieved`.
    - `description`: the target in words.
    """

    achieved: Float[Array, " a"]
    met: Bool[Array, ""]
    loss: Float[Array, ""]
    labels: tuple[str, ...] = eqx.field(static=True)
    units: tuple[str, ...] = eqx.field(static=True)
    description: str = eqx.field(static=True)

    def row(self) -> dict:
        """A plain row for reports (concrete results only)."""
        vals = [float(v) for v in jax.device_get(self.achieved)]
        return {"target": self.description, "met": bool(self.met), "loss": float(self.loss),
                "achieved": dict(zip(self.labels, vals, strict=True)),
                "achieved_text": ", ".join(f"{k} {si(v, u)}" for k, v, u
                                           in zip(self.labels, vals, self.units, strict=True))}


class AbstractTarget(eqx.Module):
    """A design goal on the operating point or the small-signal model.

    Concrete targets give `loss(op, model)` (smooth, >= 0, zero when the goal
    is met exactly, dimensionless so targets of different kinds add up
    sensibly), `achieved(op, model)` (outside the gradient path), `met(op,
    model)` and `describe()`.  All are pure JAX functions of the
    `OperatingPoint` and `LinearModel`, so they run under jit, vmap and grad.
    Targets are immutable configuration objects with static fields: equal
    targets hash equal, so a compiled program is reused.  Every concrete
    target has a `weight` field (last, default 1) that multiplies its loss.
    """

    # `weight` is a field of each concrete target, not declared here: a field
    # of the base would come before the subclasses' fields without defaults.

    @abc.abstractmethod
    def loss(self, op, model) -> Float[Array, ""]:
        """The smooth loss, unweighted."""

    @abc.abstractmethod
    def achieved(self, op, model) -> Float[Array, " a"]:
        """What the design reaches (stop-gradient), in the order of `labels()`."""

    @abc.abstractmethod
    def met(self, op, model) -> Bool[Array, ""]:
        """Whether the target holds at this point."""

    @abc.abstractmethod
    def describe(self) -> str:
        """The target in words, with units."""

    @abc.abstractmethod
    def labels(self) -> tuple[tuple[str, str], ...]:
        """(name, unit) of each entry of `achieved`."""

    def validate(self, system: System) -> None:
        """Raise `ParameterError` when the target names something `system` lacks."""

    def evaluate(self, op, model) -> TargetResult:
        """Achieved value, met flag and weighted loss in one `TargetResult`."""
        labels = self.labels()
        return TargetResult(
            achieved=jnp.atleast_1d(jnp.asarray(self.achieved(op, model), dtype=jnp.float64)),
            met=jnp.asarray(self.met(op, model)),
            loss=self.weight * self.loss(op, model),
            labels=tuple(k for k, _ in labels), units=tuple(u for _, u in labels),
            description=self.describe(),
        )


def as_float(v):
    """Field converter: numbers (numpy scalars and 0-d arrays included) become Python
    floats, so static fields hold no arrays; anything else is left for the checks."""
    if v is None or isinstance(v, (bool, str)):
        return v
    try:
        return float(v)
    except (TypeError, ValueError):
        return v


def finite(v) -> bool:
    """True for a finite float (what `as_float` made of a number)."""
    return isinstance(v, float) and math.isfinite(v)


def number(default=dataclasses.MISSING):
    """A static float field converted by `as_float` (required without a default)."""
    return eqx.field(static=True, default=default, converter=as_float)


def check_weight(owner: str, weight: float) -> None:
    if not (finite(weight) and weight > 0):
        raise ParameterError(f"{owner}.weight must be a positive number, got {weight!r}.")


def check_positive(owner: str, **values) -> None:
    for name, v in values.items():
        if not (finite(v) and v > 0):
            raise ParameterError(f"{owner}.{name} must be a positive number, got {v!r}.")


def window_scale(owner: str, low, high, scale) -> float:
    """The scale that turns a violation of [low, high] into a relative one."""
    if low is None and high is None:
        raise ParameterError(f"{owner} needs a bound: give low=..., high=... or both.")
    for name, v in (("low", low), ("high", high)):
        if v is not None and not finite(v):
            raise ParameterError(f"{owner}.{name} must be a finite number, got {v!r}.")
    if low is not None and high is not None and not low <= high:
        raise ParameterError(f"{owner}: low ({low!r}) must not exceed high ({high!r}).")
    if scale is not None:
        check_positive(owner, scale=scale)
        return float(scale)
    s = max(abs(v) for v in (low, high) if v is not None)
    if s == 0:
        raise ParameterError(f"{owner}: the bounds are zero, so a relative violation is "
                             "undefined; give scale=... (a typical size of the quantity).")
    return float(s)


def window_violation(value, low, high, scale):
    """Normalized distance outside [low, high] (0 inside); either bound may be None."""
    v = jnp.zeros_like(value)
    if low is not None:
        v = v + jnp.maximum((low - value) / scale, 0.0)
    if high is not None:
        v = v + jnp.maximum((value - high) / scale, 0.0)
    return v


def squared_hinge(v):
    """max(v, 0)^2: zero when met, continuous first derivative everywhere."""
    return jnp.maximum(v, 0.0) ** 2
