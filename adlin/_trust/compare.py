"""adlin.compare: the nonlinear transient next to the linear model's response.

Both start at the operating point at t = 0 and see the same stimulus; the
nonlinear one comes from `adlin.simulate` (error-controlled, stiff solver),
the linear one from `linear_response` (exact for the LTI model).  The error
measures are normalized to the swing of the linear response, so "1 %" means
the same thing for a millivolt and a ten-volt output.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import equinox as eqx
import jax
import jax.numpy as jnp
import numpy as np
from jaxtyping import Array, Float, Int

from .._errors import AnalysisError, ParameterError, did_you_mean
from .._system import System
from .linear_response import linear_response


class Comparison(eqx.Module):
    """Nonlinear and linear waveforms of the same outputs on one time grid.

    A pytree (passes through jit and vmap).

    - `t`: output times (s), shape (k,).
    - `y_nonlinear`, `y_linear`: absolute output values (bias plus deviation),
      shape (k, o), one column per name in `output_names`.
    - `swing`: peak-to-peak of the linear response's deviation from the bias,
      the bias itself included (o,).  It is the scale of every error measure.
    - `peak_error`: max over t of |y_nonlinear - y_linear| / swing (o,).
    - `rms_error`: root mean square over the grid samples, / swing (o,).
    - `final_error`: |y_nonlinear - y_linear| at the last time / swing (o,).
      An output the linear model does not move (swing 0) gets `inf` wherever
      the waveforms differ.
    - `status`: the transient's status (0 reached t_end; see `adlin.simulate`).
    - `steps`, `rejected_steps`: the transient solver's step counts.
    - `output_names`, `stimulus_inputs`: names.

    `comparison["v_out"]` gives (y_nonlinear, y_linear) columns of one output.
    """

    t: Float[Array, " k"]
    y_nonlinear: Float[Array, "k o"]
    y_linear: Float[Array, "k o"]
    swing: Float[Array, " o"]
    peak_error: Float[Array, " o"]
    rms_error: Float[Array, " o"]
    final_error: Float[Array, " o"]
    status: Int[Array, ""]
    steps: Int[Array, ""]
    rejected_steps: Int[Array, ""]
    output_names: tuple[str, ...] = eqx.field(static=True)
    stimulus_inputs: tuple[str, ...] = eqx.field(static=True)

    def _col(self, name: str) -> int:
        if name not in self.output_names:
            raise ParameterError(f"the comparison has no output {name!r}: "
                                 f"{did_you_mean(name, self.output_names)}.")
        return self.output_names.index(name)

    def __getitem__(self, name: str):
        i = self._col(name)
        return self.y_nonlinear[..., i], self.y_linear[..., i]

    def errors(self) -> dict[str, dict[str, float]]:
        """{output: {"peak": .., "rms": .., "final": .., "swing": ..}} as floats."""
        return {n: {"peak": float(self.peak_error[i]), "rms": float(self.rms_error[i]),
                    "final": float(self.final_error[i]), "swing": float(self.swing[i])}
                for i, n in enumerate(self.output_names)}

    def __str__(self) -> str:
        lines = [f"{'output':<14}{'swing':>12}{'peak err':>11}{'rms err':>11}{'final err':>11}"]
        for n, e in self.errors().items():
            lines.append(f"{n:<14}{e['swing']:>12.4g}{100 * e['peak']:>10.3g}%"
                         f"{100 * e['rms']:>10.3g}%{100 * e['final']:>10.3g}%")
        return "\n".join(lines)


def error_measures(dev_nonlinear, dev_linear):
    """(swing, peak, rms, final) of deviation waveforms (k, o), normalized to the swing."""
    swing = (jnp.maximum(jnp.max(dev_linear, axis=0), 0.0)
             - jnp.minimum(jnp.min(dev_linear, axis=0), 0.0))
    diff = jnp.abs(dev_nonlinear - dev_linear)

    def rel(e):
        safe = jnp.where(swing > 0, swing, 1.0)
        return jnp.where(swing > 0, e / safe, jnp.where(e > 0, jnp.inf, 0.0))

    return (swing, rel(jnp.max(diff, axis=0)), rel(jnp.sqrt(jnp.mean(diff**2, axis=0))),
            rel(diff[-1]))


def output_columns(system: System, output: str | Sequence[str] | None) -> tuple[int, ...]:
    """Column indices of the requested outputs (all when None)."""
    if output is None:
        return tuple(range(len(system.outputs)))
    names = (output,) if isinstance(output, str) else tuple(output)
    for n in names:
        if n not in system.outputs:
            raise ParameterError(f"unknown output {n!r} of {system.name!r}: "
                                 f"{did_you_mean(n, system.outputs)}.")
    return tuple(system.outputs.index(n) for n in names)


def compare(
    system: System,
    op,
    stimulus,
    t_end: float,
    *,
    output: str | Sequence[str] | None = None,
    t: Any = None,
    n_points: int = 1001,
    rtol: float = 1e-8,
    max_steps: int = 100_000,
    solver=None,
    throw: bool = True,
) -> Comparison:
    """Run the nonlinear transient and the exact linear response side by side.

    **Arguments:**

    - `system`: an `adlin.System`.
    - `op`: the `OperatingPoint` both start from and the linear model is taken
      at (None: `adlin.steady_state(system)` at the default inputs).
    - `stimulus`: an `adlin.stimuli` stimulus or a tuple of them (deviations
      of the inputs from `op`).
    - `t_end`: end time (s).
    - `output`: an output name, a sequence of names, or None for every output.
    - `t`: output times (s), increasing within [0, t_end]; default `n_points`
      uniform times.
    - `rtol`, `max_steps`, `solver`: the transient's settings (see
      `adlin.simulate`).
    - `throw`: raise when the transient stops early; with False the result's
      `status` says so and the errors are NaN.

    **Returns:** a `Comparison`.

    **Raises:** `ParameterError` (unknown output or stimulus input names, bad
    grid), `AnalysisError` (the linear model cannot be reduced to state-space
    form here), and whatever `adlin.simulate` raises.
    """
    from .._linear.linearize import linearize
    from .._steady.solve import steady_state
    from .._transient.simulate import simulate

    cols = output_columns(system, output)
    if op is None:
        op = steady_state(system)
    tr = simulate(system, stimulus, t_end, op=op, t=t, n_points=n_points, rtol=rtol,
                  max_steps=max_steps, solver=solver, throw=throw)
    lin = linearize(system, op)
    ts = np.asarray(tr.t)
    if ts.size > 1 and np.any(np.diff(ts) <= 0):
        raise ParameterError("compare needs strictly increasing output times t.")
    idx = np.asarray(cols)
    dev_lin = linear_response(lin, stimulus, ts)[:, idx]
    y0 = op.y[idx]
    dev_nl = tr.y[:, idx] - y0[None, :]
    swing, peak, rms, final = error_measures(dev_nl, dev_lin)
    if not isinstance(swing, jax.core.Tracer) and throw and np.any(np.asarray(swing) == 0):
        dead = [system.outputs[c] for c, s in zip(cols, np.asarray(swing), strict=True) if s == 0]
        raise AnalysisError(f"the linear model does not move output(s) {dead} with this stimulus "
                            "(swing 0), so errors relative to the swing are undefined; choose an "
                            "output the input drives, or pass throw=False to get inf.")
    return Comparison(
        t=tr.t, y_nonlinear=tr.y[:, idx], y_linear=y0[None, :] + dev_lin, swing=swing,
        peak_error=peak, rms_error=rms, final_error=final, status=tr.status, steps=tr.steps,
        rejected_steps=tr.rejected_steps, output_names=tuple(system.outputs[c] for c in cols),
        stimulus_inputs=tuple(s.input for s in _items(stimulus)),
    )


def _items(stimulus) -> tuple:
    return tuple(stimulus) if isinstance(stimulus, (tuple, list)) else (stimulus,)
