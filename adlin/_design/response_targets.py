"""Targets on the small-signal response: DC gain and -3 dB bandwidth."""

from __future__ import annotations

import functools

import equinox as eqx
import jax
import jax.numpy as jnp

from .._errors import ParameterError, did_you_mean
from .._system import System
from .._units import si
from .quantities import finite_poles
from .target_base import (
    BOUND_SLACK,
    AbstractTarget,
    check_positive,
    check_weight,
    finite,
    number,
    squared_hinge,
    window_scale,
    window_violation,
)

HALF_POWER = 0.5  # |H|^2 ratio at the -3 dB frequency


def _check_pair(owner: str, system: System, output: str, input: str) -> None:
    if output not in system.outputs:
        raise ParameterError(f"{owner}: unknown output {output!r}: "
                             f"{did_you_mean(output, system.outputs)}.")
    if input not in system.inputs:
        raise ParameterError(f"{owner}: unknown input {input!r}: "
                             f"{did_you_mean(input, system.inputs)}.")


class DCGain(AbstractTarget):
    """The small-signal DC gain from `input` to `output` (signed: an inverting
    stage has a negative gain).

    Either a value, met within `rtol` (loss ((G - value) / value)^2), or a
    window [low, high] (loss: squared relative distance outside it, relative to
    `scale`, default the largest |bound|).

    **Fields:** `output`, `input` (names), `value` or `low` / `high`, `rtol`,
    `scale`, `weight`.
    """

    output: str = eqx.field(static=True)
    input: str = eqx.field(static=True)
    value: float | None = number(None)
    low: float | None = number(None)
    high: float | None = number(None)
    rtol: float = number(0.01)
    scale: float | None = number(None)
    weight: float = number(1.0)

    def __check_init__(self):
        o = "DCGain"
        if self.value is not None:
            if self.low is not None or self.high is not None:
                raise ParameterError(f"{o}: give either value=... or low=/high=..., not both.")
            if not (finite(self.value) and self.value != 0):
                raise ParameterError(f"{o}.value must be a finite non-zero gain, got "
                                     f"{self.value!r}; for 'no gain' give high=... and scale=...")
        elif self.low is None and self.high is None:
            raise ParameterError(f"{o} needs value=... (a gain to meet) or low=... / high=...")
        else:
            window_scale(o, self.low, self.high, self.scale)
        check_positive(o, rtol=self.rtol)
        check_weight(o, self.weight)

    def validate(self, system: System) -> None:
        _check_pair("DCGain", system, self.output, self.input)

    def gain(self, model):
        i, o = model._pair(self.input, self.output)
        return model.dc_gain()[o, i]

    def _violation(self, g):
        if self.value is not None:
            return (g - self.value) / abs(self.value)
        return window_violation(g, self.low, self.high,
                                window_scale("DCGain", self.low, self.high, self.scale))

    def loss(self, op, model):
        return self._violation(self.gain(model)) ** 2

    def achieved(self, op, model):
        return jax.lax.stop_gradient(self.gain(model))[None]

    def met(self, op, model):
        v = jnp.abs(self._violation(self.achieved(op, model)[0]))
        return v <= (self.rtol if self.value is not None else BOUND_SLACK)

    def describe(self) -> str:
        what = f"dc gain {self.output}/{self.input}"
        if self.value is not None:
            return f"{what} = {self.value:.4g} (within {self.rtol:.2%})"
        if self.high is None:
            return f"{what} at least {self.low:.4g}"
        if self.low is None:
            return f"{what} at most {self.high:.4g}"
        return f"{what} between {self.low:.4g} and {self.high:.4g}"

    def labels(self):
        return (("dc gain", ""),)


@functools.partial(jax.jit, static_argnums=(1, 2, 3, 4, 5))
def bandwidth_hz(model, i: int, o: int, reference_hz: float, points: int = 241,
                 bisections: int = 60):
    """First frequency above `reference_hz` where |H|^2 falls to half its value there.

    A log grid from 1/1000 of the smallest pole frequency to 1000 times the
    largest brackets the first crossing; bisection in log frequency refines it.
    inf when |H| never falls that far on the grid.  Pure JAX, no derivative.
    """
    model = jax.lax.stop_gradient(model)
    poles = finite_poles(model)
    mag = jnp.abs(poles) / (2 * jnp.pi)
    mag = jnp.where(mag > 0, mag, jnp.inf)
    lo = jnp.where(jnp.isfinite(jnp.min(mag)), jnp.min(mag) / 1e3, 1.0)
    lo = jnp.maximum(lo, reference_hz)
    hi = jnp.where(jnp.isfinite(jnp.min(mag)), jnp.max(jnp.where(jnp.isfinite(mag), mag, 0)),
                   1.0) * 1e3
    hi = jnp.maximum(hi, lo * 1e6)

    def ratio(f):
        h = model.transfer(2j * jnp.pi * jnp.atleast_1d(f))[o, i]
        return jnp.abs(h) ** 2

    ref = ratio(jnp.asarray(reference_hz))[0]
    grid = jnp.logspace(jnp.log10(lo), jnp.log10(hi), points)
    below = ratio(grid) < HALF_POWER * ref
    k = jnp.argmax(below)
    a = jnp.log(grid[jnp.maximum(k - 1, 0)])
    b = jnp.log(grid[k])

    def step(_, ab):
        a, b = ab
        m = 0.5 * (a + b)
        low_side = ratio(jnp.exp(m))[0] >= HALF_POWER * ref
        return jnp.where(low_side, m, a), jnp.where(low_side, b, m)

    a, b = jax.lax.fori_loop(0, bisections, step, (a, b))
    return jnp.where(jnp.any(below), jnp.exp(0.5 * (a + b)), jnp.inf)


class Bandwidth(AbstractTarget):
    """The -3 dB bandwidth of the transfer `input` -> `output`.

    With `min_hz`: |H(j 2 pi min_hz)|^2 must be at least half of |H|^2 at
    `reference_hz` (0: DC), loss max(1 - 2 r, 0)^2 with r that ratio; with
    `max_hz`: at most half, loss max(2 r - 1, 0)^2.  The loss looks at those
    frequencies only (smooth, no search in the gradient path); for a
    low-pass response whose magnitude falls monotonically that is the same
    as a bound on the bandwidth.  Achieved: the first -3 dB frequency above
    `reference_hz`, found by a log grid and bisection (`bandwidth_hz`),
    outside the gradient path; `met` compares it with the bounds.

    **Fields:** `output`, `input` (names), `min_hz`, `max_hz` (Hz, one or
    both), `reference_hz` (Hz, default 0), `weight`.
    """

    output: str = eqx.field(static=True)
    input: str = eqx.field(static=True)
    min_hz: float | None = number(None)
    max_hz: float | None = number(None)
    reference_hz: float = number(0.0)
    weight: float = number(1.0)

    def __check_init__(self):
        o = "Bandwidth"
        if self.min_hz is None and self.max_hz is None:
            raise ParameterError(f"{o} needs min_hz=... (at least this wide), max_hz=... or both.")
        for name in ("min_hz", "max_hz"):
            v = getattr(self, name)
            if v is not None:
                check_positive(o, **{name: v})
        if self.min_hz is not None and self.max_hz is not None and self.min_hz > self.max_hz:
            raise ParameterError(f"{o}: min_hz ({self.min_hz!r}) exceeds max_hz "
                                 f"({self.max_hz!r}).")
        if not (finite(self.reference_hz) and self.reference_hz >= 0):
            raise ParameterError(f"{o}.reference_hz must be >= 0, got {self.reference_hz!r}.")
        bounds = [v for v in (self.min_hz, self.max_hz) if v is not None]
        if min(bounds) <= self.reference_hz:
            raise ParameterError(f"{o}: the bounds must lie above reference_hz "
                                 f"({self.reference_hz!r} Hz).")
        check_weight(o, self.weight)

    def validate(self, system: System) -> None:
        _check_pair("Bandwidth", system, self.output, self.input)

    def _ratio(self, model, f_hz):
        i, o = model._pair(self.input, self.output)
        h = model.transfer(2j * jnp.pi * jnp.asarray([self.reference_hz, f_hz]))[o, i]
        return jnp.abs(h[1]) ** 2 / jnp.abs(h[0]) ** 2

    def loss(self, op, model):
        total = jnp.asarray(0.0)
        if self.min_hz is not None:
            total = total + squared_hinge(1 - 2 * self._ratio(model, self.min_hz))
        if self.max_hz is not None:
            total = total + squared_hinge(2 * self._ratio(model, self.max_hz) - 1)
        return total

    def achieved(self, op, model):
        i, o = model._pair(self.input, self.output)
        return bandwidth_hz(model, i, o, float(self.reference_hz))[None]

    def met(self, op, model):
        bw = self.achieved(op, model)[0]
        ok = jnp.asarray(True)
        if self.min_hz is not None:
            ok = ok & (bw >= self.min_hz * (1 - BOUND_SLACK))
        if self.max_hz is not None:
            ok = ok & (bw <= self.max_hz * (1 + BOUND_SLACK))
        return ok

    def describe(self) -> str:
        what = f"-3 dB bandwidth of {self.output}/{self.input}"
        if self.max_hz is None:
            return f"{what} at least {si(self.min_hz, 'Hz')}"
        if self.min_hz is None:
            return f"{what} at most {si(self.max_hz, 'Hz')}"
        return f"{what} between {si(self.min_hz, 'Hz')} and {si(self.max_hz, 'Hz')}"

    def labels(self):
        return (("bandwidth", "Hz"),)
