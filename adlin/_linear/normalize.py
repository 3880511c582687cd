"""Normalization: the dimensionless form engineers derive by hand after linearizing.

With x = X x~, u = U u~, y = Y y~ and t = T tau (X, U, Y diagonal scales),

    dx~/dtau = T X^-1 A X x~ + T X^-1 B U u~,    y~ = Y^-1 C X x~ + Y^-1 D U u~

so the normalized poles are exactly T times the physical ones, and the
remaining numbers (dimensionless gains, time-constant ratios) show which
groups of parameters matter (Lin & Segel, Mathematics Applied to
Deterministic Problems in the Natural Sciences, SIAM 1988, ch. 6 on scaling).
Automatic scales: the bias value of each quantity, floored by a device
scale (the thermal voltage kT/q for voltages), and the dominant (slowest)
time constant for time.
"""

from __future__ import annotations

from collections.abc import Mapping

import equinox as eqx
import jax
import jax.numpy as jnp
import numpy as np
import scipy.constants as const
from jaxtyping import Array, Float

from .._errors import AnalysisError, did_you_mean
from .model import dc_gain, sorted_eigvals

ROOM_TEMPERATURE_K = 300.15


class NormalizedModel(eqx.Module):
    """Dimensionless state-space model with the scales that made it so.

    - `A`, `B`, `C`, `D`: dimensionless matrices (time in units of `time_scale`).
    - `time_scale`: T in seconds.  `state_scales`, `input_scales`,
      `output_scales`: the scale of each named quantity, in its own unit.
    - `scale_origin`: for each name, why that scale was chosen ("bias",
      "thermal voltage", "given", ...).
    """

    A: Float[Array, "r r"]
    B: Float[Array, "r m"]
    C: Float[Array, "o r"]
    D: Float[Array, "o m"]
    time_scale: Float[Array, ""]
    state_scales: Float[Array, " r"]
    input_scales: Float[Array, " m"]
    output_scales: Float[Array, " o"]
    state_names: tuple[str, ...] = eqx.field(static=True)
    input_names: tuple[str, ...] = eqx.field(static=True)
    output_names: tuple[str, ...] = eqx.field(static=True)
    scale_origin: tuple[tuple[str, str], ...] = eqx.field(static=True)

    def poles(self) -> jax.Array:
        """Dimensionless poles (physical poles times `time_scale`)."""
        if self.A.shape[0] == 0:
            return jnp.zeros((0,), jnp.complex128)
        return sorted_eigvals(self.A)

    def dc_gain(self) -> jax.Array:
        """Dimensionless DC gains, shape (outputs, inputs)."""
        return dc_gain(self.A, self.B, self.C, self.D)

    def time_constant_ratios(self) -> jax.Array:
        """tau_k / T = 1 / |dimensionless pole k|, one per pole, slowest first."""
        return 1.0 / jnp.abs(self.poles())

    def gains(self) -> dict[str, jax.Array]:
        """Named dimensionless DC gains, 'output/input'."""
        G = self.dc_gain()
        return {f"{o}/{i}": G[a, b] for a, o in enumerate(self.output_names)
                for b, i in enumerate(self.input_names)}

    def scales(self) -> dict[str, float]:
        """Every scale by name, plus 'time' in seconds."""
        out = {"time": float(self.time_scale)}
        for names, vals in ((self.state_names, self.state_scales),
                            (self.input_names, self.input_scales),
                            (self.output_names, self.output_scales)):
            out.update({k: float(v) for k, v in zip(names, np.asarray(vals), strict=True)})
        return out


_FLOOR_NAMES = {"V": "thermal voltage", "A": "largest bias current x 1e-3"}


def _scale_matrices(A, B, C, D, X, U, Y, T):
    return (T * (A * X[None, :] / X[:, None]), T * (B * U[None, :] / X[:, None]),
            C * X[None, :] / Y[:, None], D * U[None, :] / Y[:, None])


def normalize(
    model,
    *,
    time_scale_s: float | None = None,
    scales: Mapping[str, float] | None = None,
    temperature_k: float = ROOM_TEMPERATURE_K,
) -> NormalizedModel:
    """Scale a linear model to dimensionless form.

    **Arguments:**

    - `model`: a `LinearModel` (reduced first if it has algebraic unknowns).
    - `time_scale_s`: T in seconds; default the dominant (slowest) time
      constant 1/min|pole|.
    - `scales`: optional dict name -> scale (state, input or output name) that
      overrides the automatic choice.
    - `temperature_k`: temperature of the thermal-voltage floor for voltages.

    **Returns:** a `NormalizedModel`.  Its poles equal `time_scale * model.poles()`.
    """
    red = model.reduce()
    scales = dict(scales or {})
    valid = red.state_names + red.input_names + red.output_names
    for k in scales:
        if k not in valid:
            raise AnalysisError(f"normalize() got a scale for {k!r}, which is not a state, input "
                                f"or output of the model: {did_you_mean(k, valid)}.")
    poles = red.poles() if time_scale_s is None else None
    leaves = [red.A, red.B, red.C, red.D, red.x0, red.u0, red.y0, poles, *scales.values()]
    traced = any(isinstance(v, jax.core.Tracer) for v in leaves)
    # With concrete values everything below is host arithmetic (no device round trips).
    xp = jnp if traced else np
    A, B, C, D, x0, u0, y0 = (xp.asarray(M) for M in
                              (red.A, red.B, red.C, red.D, red.x0, red.u0, red.y0))
    vt = const.k * temperature_k / const.e
    units = dict(red.unit_items)
    currents = [i for i, n in enumerate(red.state_names) if units.get(n) == "A"]
    floor_a = xp.max(xp.abs(x0[xp.asarray(currents)])) * 1e-3 if currents else 1e-12
    floor_a = xp.maximum(floor_a, 1e-15)
    origin: list[tuple[str, str]] = []

    def pick(names, values):
        out = []
        for k, name in enumerate(names):
            if name in scales:
                out.append(xp.asarray(scales[name], dtype=xp.float64))
                origin.append((name, "given"))
                continue
            unit = units.get(name, "")
            mag = xp.abs(values[k])
            floor = {"V": vt, "A": floor_a}.get(unit, 0.0)
            scale = xp.maximum(mag, floor) if floor else xp.where(mag > 0, mag, 1.0)
            out.append(scale)
            if traced:
                origin.append((name, "automatic"))
            elif float(mag) >= float(scale):
                origin.append((name, "bias"))
            else:
                origin.append((name, _FLOOR_NAMES.get(unit, "unit")))
        return xp.stack(out) if out else xp.zeros((0,))

    X = pick(red.state_names, x0)
    U = pick(red.input_names, u0)
    Y = pick(red.output_names, y0)
    if time_scale_s is None:
        mags = xp.abs(xp.asarray(poles))
        if mags.shape[0] == 0:
            T = xp.asarray(1.0)
            origin.append(("time", "unit (no poles)"))
        else:
            T = 1.0 / xp.min(xp.where(mags > 0, mags, xp.inf))
            origin.append(("time", "dominant time constant"))
    else:
        T = xp.asarray(time_scale_s, dtype=xp.float64)
        origin.append(("time", "given"))
    An, Bn, Cn, Dn = _scale_matrices(A, B, C, D, X, U, Y, T)
    as_jax = (lambda a: a) if traced else jax.device_put
    return NormalizedModel(
        A=as_jax(An), B=as_jax(Bn), C=as_jax(Cn), D=as_jax(Dn), time_scale=as_jax(T),
        state_scales=as_jax(X), input_scales=as_jax(U), output_scales=as_jax(Y),
        state_names=red.state_names, input_names=red.input_names,
        output_names=red.output_names, scale_origin=tuple(origin),
    )
