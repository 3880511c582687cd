"""adlin.steady_state: the bias point of a System, with diagnoses on failure."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import equinox as eqx
import jax
import jax.numpy as jnp
import numpy as np

from .._checks import check_finite
from .._errors import ModelError, ParameterError, SteadyStateError, did_you_mean
from .._system import System
from .newton import STATUS_MESSAGES, NewtonOptions
from .operating_point import OperatingPoint


def _is_traced(*xs) -> bool:
    return any(isinstance(leaf, jax.core.Tracer) for x in xs for leaf in jax.tree_util.tree_leaves(x))


def guess_vector(system: System, guess) -> jax.Array:
    """A start vector from None, an OperatingPoint, a dict by name, or an array."""
    n = system.n
    if guess is None:
        return jnp.zeros((n,), dtype=jnp.float64)
    if isinstance(guess, OperatingPoint):
        return jnp.asarray(guess.x, dtype=jnp.float64)
    if isinstance(guess, Mapping):
        x = np.zeros(n)
        vals = {}
        for k, v in guess.items():
            if k not in system.unknowns:
                raise ParameterError(f"guess names {k!r}, which is not an unknown: "
                                     f"{did_you_mean(k, system.unknowns)}.")
            vals[k] = v
        if not _is_traced(list(vals.values())):
            for k, v in vals.items():
                x[system.unknowns.index(k)] = float(v)
            return jnp.asarray(x)
        xj = jnp.zeros((n,), dtype=jnp.float64)
        for k, v in vals.items():
            xj = xj.at[system.unknowns.index(k)].set(v)
        return xj
    x = jnp.asarray(guess, dtype=jnp.float64)
    if x.shape != (n,):
        raise ModelError(f"guess has shape {x.shape} but {system.name!r} has {n} unknowns "
                         f"{list(system.unknowns)}; pass one value per unknown or a dict by name.")
    return x


def diagnose(system: System, op: OperatingPoint, worst: int = 3) -> str:
    """One-paragraph diagnosis of a failed solve: status, worst equations, hint."""
    f = np.asarray(system.f(op.x, op.u, op.p))
    order = np.argsort(-np.abs(np.nan_to_num(f, nan=np.inf)))[:worst]
    parts = [f"{system.unknowns[i]!r} equation off by {f[i]:.3g}"
             for i in order]
    status = STATUS_MESSAGES[int(op.status)]
    ranking = ", ".join(parts)
    return (
        f"steady state of {system.name!r} not found: {status} after {int(op.iterations)} Newton "
        f"iterations (worst residuals: {ranking}); try a guess near the expected bias "
        f"(guess={{'{system.unknowns[order[0]]}': ...}}), check source values and polarities, "
        "or raise max_iterations in NewtonOptions."
    )


def steady_state(
    system: System,
    inputs: Mapping[str, Any] | None = None,
    params: Mapping[str, Any] | None = None,
    guess: Any = None,
    *,
    options: NewtonOptions | None = None,
    throw: bool = True,
) -> OperatingPoint:
    """Bias point x* with f(x*, u, p) = 0.

    Damped Newton with junction-voltage limiting and a backtracking line
    search, from `guess` (default all zeros); converged when both the update
    and the scaled residual meet the tolerances.  `x` is differentiable with
    respect to `inputs` and `params` (implicit function theorem).

    **Arguments:**

    - `system`: an `adlin.System`.
    - `inputs`, `params`: dicts name -> value overriding the defaults.
    - `guess`: start point: None, a dict by unknown name, an array, or an
      `OperatingPoint`.
    - `options`: `NewtonOptions` (tolerances, iteration limits).
    - `throw`: raise `SteadyStateError` when the solve fails.  Under `vmap`
      pass `throw=False` and read `op.converged` per sample, so that one bad
      sample does not stop the batch.

    **Returns:** an `OperatingPoint`.

    **Raises:** `SteadyStateError` (no convergence; names the worst
    equations), `ParameterError` (bad names), `ModelError` (non-finite model
    at the guess, structural problems).
    """
    from .._compile import compile

    compiled = compile(system, options)
    u = system.input_vector(inputs)
    p = system.param_vector(params)
    x0 = guess_vector(system, guess)
    traced = _is_traced(u, p, x0)
    if not traced:
        f, E, A, *_ = compiled.local(x0, u, p)
        f, J, E = np.asarray(f), -np.asarray(A), np.asarray(E)
        check_finite(system, f, J, E, where="at the starting guess")
    op = compiled.solve(u, p, x0)
    if not throw:
        return op
    if traced or _is_traced(op.converged):
        x = eqx.error_if(op.x, ~op.converged,
                         f"adlin: steady state of {system.name!r} did not converge; call "
                         "steady_state(..., throw=False) and inspect op.converged / op.status.")
        return eqx.tree_at(lambda o: o.x, op, x)
    if not bool(op.converged):
        raise SteadyStateError(diagnose(system, op))
    return op
