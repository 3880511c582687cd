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
from .newton import NewtonOptions
from .operating_point import OperatingPoint
from .strategies import AbstractStrategy, Auto, SourceStepping, resolve
from .strategies.reasons import N_STRATEGIES, NOT_TRIED


def _is_traced(*xs) -> bool:
    leaves = (leaf for x in xs for leaf in jax.tree_util.tree_leaves(x))
    return any(isinstance(leaf, jax.core.Tracer) for leaf in leaves)


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
    """One-paragraph diagnosis of a failed solve: what was tried, worst equations, hint."""
    f = np.asarray(system.f(op.x, op.u, op.p))
    order = np.argsort(-np.abs(np.nan_to_num(f, nan=np.inf)))[:worst]
    parts = [f"{system.unknowns[i]!r} equation off by {f[i]:.3g}"
             for i in order]
    ranking = ", ".join(parts)
    history = op.history
    tried = "; ".join(f"{name}: {what}" for name, what, _ in history)
    if len(history) > 1:
        hint = ("give a guess near the expected bias "
                f"(guess={{'{system.unknowns[order[0]]}': ...}}), check source values and "
                "polarities, or loosen a strategy's limits (adlin.strategies)")
    else:
        hint = (f"try strategy='auto' (tries every strategy), a guess near the expected bias "
                f"(guess={{'{system.unknowns[order[0]]}': ...}}), check source values and "
                "polarities, or raise max_iterations in NewtonOptions")
    return (
        f"steady state of {system.name!r} not found after {int(op.evaluations)} residual "
        f"evaluations (tried {tried}; worst residuals: {ranking}); {hint}."
    )


def _source_names_checked(system: System, strategy) -> None:
    """Refuse unknown source names before compiling anything."""
    for s in getattr(strategy, "order", (strategy,)):
        if isinstance(s, SourceStepping):
            s.masks(system.inputs, system.param_names)


def _merge_attempts(ops: list[OperatingPoint], final: OperatingPoint) -> OperatingPoint:
    """`final` with the attempt record and evaluation count of every op in `ops`."""
    attempts = np.full(N_STRATEGIES, NOT_TRIED)
    evals = np.zeros(N_STRATEGIES, dtype=np.int64)
    steps = np.zeros(N_STRATEGIES, dtype=np.int64)
    progress = np.zeros(N_STRATEGIES)
    for op in ops:
        a = np.asarray(op.attempts)
        tried = a != NOT_TRIED
        attempts[tried] = a[tried]
        evals[tried] = np.asarray(op.attempt_evaluations)[tried]
        steps[tried] = np.asarray(op.attempt_steps)[tried]
        progress[tried] = np.asarray(op.attempt_progress)[tried]
    total = sum(int(op.evaluations) for op in ops)
    return eqx.tree_at(
        lambda o: (o.attempts, o.attempt_evaluations, o.attempt_steps, o.attempt_progress,
                   o.evaluations),
        final,
        tuple(jax.device_put(np.asarray(a)) for a in (attempts, evals, steps, progress, total)),
    )


def _auto_concrete(compiled, auto: Auto, u, p, x0) -> OperatingPoint:
    """Auto with concrete values: Newton first, then escalate, compiling only what runs."""
    ops = []
    for strategy in auto.order:
        op = compiled.solve_with(strategy)(u, p, x0)
        ops.append(op)
        if bool(op.converged):
            break
    final = ops[-1] if bool(ops[-1].converged) else ops[0]
    final = _merge_attempts(ops, final)
    if auto.prefer_stable and bool(final.converged):
        from .stability import prefer_stable

        final = prefer_stable(compiled, final, u, p, x0)
    return final


def steady_state(
    system: System,
    inputs: Mapping[str, Any] | None = None,
    params: Mapping[str, Any] | None = None,
    guess: Any = None,
    *,
    strategy: str | AbstractStrategy = "auto",
    options: NewtonOptions | None = None,
    throw: bool = True,
) -> OperatingPoint:
    """Bias point x* with f(x*, u, p) = 0.

    By default (`strategy="auto"`) damped Newton with junction-voltage limiting
    runs first from `guess`; if it fails, conductance stepping, source stepping,
    pseudo-transient continuation and the Newton homotopy are tried in turn
    (see `adlin.strategies`).  Whatever path found it, the point is polished by
    Newton (converged when both the update and the scaled residual meet the
    tolerances), and `x` is differentiable with respect to `inputs` and
    `params` by the implicit function theorem, so derivatives do not depend on
    the strategy.  With concrete values, auto also checks the poles of the
    state found: if it is unstable (a latch's metastable point, a reference's
    half-started state), the stable state the circuit powers up in is
    returned instead when there is one (`Auto(prefer_stable=False)` turns
    this off; see `adlin.strategies.Auto`).  `op.method` names the strategy that succeeded,
    `op.evaluations` counts residual evaluations over everything tried, and
    `op.history` says what each strategy did.

    **Arguments:**

    - `system`: an `adlin.System`.
    - `inputs`, `params`: dicts name -> value overriding the defaults.
    - `guess`: start point: None, a dict by unknown name, an array, or an
      `OperatingPoint`.
    - `strategy`: "auto", "newton", "conductance", "source",
      "pseudo-transient", "homotopy", or a configuration object from
      `adlin.strategies` (e.g. `SourceStepping(sources=("v_dd",))`).
    - `options`: `NewtonOptions` (tolerances and limits of Newton and of the
      final polish).
    - `throw`: raise `SteadyStateError` when the solve fails.  Under `vmap`
      pass `throw=False` and read `op.converged` per sample, so that one bad
      sample does not stop the batch.

    **Returns:** an `OperatingPoint`.

    **Raises:** `SteadyStateError` (no convergence; says what was tried and
    why each failed, names the worst equations), `ParameterError` (bad
    names, unknown strategy), `ModelError` (non-finite model at the guess,
    structural problems).
    """
    from .._compile import compile

    strat = resolve(strategy)
    _source_names_checked(system, strat)
    compiled = compile(system, options)
    u = system.input_vector(inputs)
    p = system.param_vector(params)
    x0 = guess_vector(system, guess)
    traced = _is_traced(u, p, x0)
    if not traced:
        f, E, A, *_ = compiled.local(x0, u, p)
        f, J, E = np.asarray(f), -np.asarray(A), np.asarray(E)
        check_finite(system, f, J, E, where="at the starting guess")
    if isinstance(strat, Auto) and not traced:
        op = _auto_concrete(compiled, strat, u, p, x0)
    else:
        op = compiled.solve_with(strat)(u, p, x0)
    if not throw:
        return op
    if traced or _is_traced(op.converged):
        x = eqx.error_if(op.x, ~op.converged,
                         f"adlin: steady state of {system.name!r} did not converge; call "
                         "steady_state(..., throw=False) and inspect op.converged / op.status "
                         "/ op.attempts.")
        return eqx.tree_at(lambda o: o.x, op, x)
    if not bool(op.converged):
        raise SteadyStateError(diagnose(system, op))
    return op
