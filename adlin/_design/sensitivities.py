"""adlin.sensitivities: exact derivatives of bias values, gains and poles with
respect to every parameter, through the steady state."""

from __future__ import annotations

import functools
from collections.abc import Mapping, Sequence
from typing import Any

import equinox as eqx
import jax
import jax.numpy as jnp
import numpy as np

from .._errors import AnalysisError, ModelError, ParameterError, did_you_mean
from .._system import System
from .quantities import AbstractQuantity, resolve_quantities
from .sensitivity_table import Sensitivities, coalescing, normalize_rows

# Relative separation below which two poles count as one repeated pole: their
# individual derivatives do not exist there (they grow like 1/separation for a
# defective pair), and at this separation the computed ones are mostly rounding
# error (about eps / separation^2 relative).
COALESCE_RTOL = 1e-6
# Separation below which a note warns that the derivatives are large and change fast.
CLOSE_RTOL = 1e-3


class _Program(eqx.Module):
    """One compiled Jacobian program per (System, quantities, wrt): values and dy/dtheta.

    theta are the differentiated values (parameters and/or inputs); the unknowns
    follow them by the implicit-function step x = x* - J^-1 f(x*, u, p) with x*
    and J held constant, whose derivative is exactly dx/dp = -J^-1 df/dp (the
    same step `adlin.steady_state` takes, so the result is the derivative of its
    bias point).
    """

    compiled: Any = eqx.field(static=True)  # the CompiledSystem (hashed by identity)
    quantities: tuple[AbstractQuantity, ...] = eqx.field(static=True)
    param_index: tuple[int, ...] = eqx.field(static=True)  # -1: an input
    input_index: tuple[int, ...] = eqx.field(static=True)  # -1: a parameter
    dtype: Any = eqx.field(static=True)

    def values(self, theta, op, J, refs):
        s = self.compiled.system
        pi = np.asarray(self.param_index)
        ui = np.asarray(self.input_index)
        p = op.p.at[pi[pi >= 0]].set(theta[pi >= 0]) if (pi >= 0).any() else op.p
        u = op.u.at[ui[ui >= 0]].set(theta[ui >= 0]) if (ui >= 0).any() else op.u
        x = op.x - jnp.linalg.solve(J, s.f(op.x, u, p))
        point = eqx.tree_at(lambda o: (o.x, o.u, o.p, o.y), op, (x, u, p, s.g(x, u, p)))
        model = self.compiled.linearize(x, u, p)
        vals = [jnp.asarray(q.value(point, model, refs[i]), dtype=self.dtype)
                for i, q in enumerate(self.quantities)]
        out = jnp.stack(vals)
        return out, out

    def __call__(self, theta, op, J, refs):
        jac, vals = jax.jacfwd(self.values, has_aux=True)(theta, op, J, refs)
        return vals, jac


@functools.lru_cache(maxsize=64)
def _program(compiled, quantities: tuple[AbstractQuantity, ...], wrt: tuple[str, ...]):
    """The jitted program, built once per compiled System, quantity set and wrt list."""
    system = compiled.system
    pidx = tuple(system.param_names.index(w) if w in system.param_names else -1 for w in wrt)
    uidx = tuple(system.inputs.index(w) if w in system.inputs else -1 for w in wrt)
    dtype = jnp.complex128 if any(q.complex_valued for q in quantities) else jnp.float64
    return jax.jit(_Program(compiled, quantities, pidx, uidx, dtype))


def _wrt_names(system: System, wrt) -> tuple[str, ...]:
    if wrt is None:
        names = system.param_names
    else:
        names = (wrt,) if isinstance(wrt, str) else tuple(wrt)
    valid = system.param_names + system.inputs
    for w in names:
        if not isinstance(w, str) or w not in valid:
            raise ParameterError(f"wrt names {w!r}, which is neither a parameter nor an input: "
                                 f"{did_you_mean(str(w), valid)}.")
    names = tuple(dict.fromkeys(names))
    if not names:
        raise ParameterError(f"{system.name!r} has no parameters to differentiate against; "
                             "pass wrt=[...] naming inputs.")
    return names


def _pole_refs(quantities, lin, coalesce_rtol: float):
    """Nominal value of each tracked pole, and notes on poles that (nearly) coincide."""
    refs = np.zeros(len(quantities), dtype=complex)
    bad: set[int] = set()
    notes: list[str] = []
    if not any(q.tracks_pole for q in quantities):
        return refs, bad, notes
    table = lin.pole_table().roots
    poles = np.asarray(lin.poles())
    for i, q in enumerate(quantities):
        if not q.tracks_pole:
            continue
        if q.index >= len(table):
            raise AnalysisError(f"{q.label()}: the model has {len(table)} rows in its pole table "
                                f"(numbered 0 to {len(table) - 1}) at this operating point.")
        refs[i] = table[q.index].value
        near, sep = coalescing(poles, refs[i], coalesce_rtol)
        if near:
            bad.add(i)
            notes.append(f"{q.label()} ({refs[i]:.6g} rad/s) coincides with another pole "
                         f"(relative separation {sep:.2g}); a repeated pole has no derivative of "
                         "its own, so its row is NaN; use a target on the pair "
                         "(adlin.targets.PolePair) or move the parameters apart")
        elif sep < CLOSE_RTOL:
            notes.append(f"{q.label()} is close to another pole (relative separation "
                         f"{sep:.2g}): its derivatives are large and change quickly with the "
                         "parameters")
    return refs, bad, notes


def sensitivities(
    system: System,
    inputs: Mapping[str, Any] | None = None,
    params: Mapping[str, Any] | None = None,
    of: Sequence[AbstractQuantity | str] = (),
    *,
    wrt: Sequence[str] | str | None = None,
    guess: Any = None,
    strategy: Any = "auto",
    options: Any = None,
    coalesce_rtol: float = COALESCE_RTOL,
) -> Sensitivities:
    """Exact derivatives of chosen quantities with respect to parameters.

    The bias point is found by `adlin.steady_state`; its derivative comes from
    the implicit function theorem (dx/dp = -J^-1 df/dp), the small-signal
    model's by automatic differentiation, and a pole's from the derivative of
    the eigenvalue (equal to the first-order perturbation formula
    ds = y^H dA x / (y^H x) with left and right eigenvectors y, x; Greenbaum,
    Li & Overton, "First-order perturbation theory for eigenvalues and
    eigenvectors", SIAM Review 62(2), 2020).  Forward mode (one pass per
    parameter), compiled once per System, quantity set and `wrt`, so new values
    never recompile.

    **Arguments:**

    - `system`: an `adlin.System`.
    - `inputs`, `params`: dicts name -> value overriding the defaults
      (concrete numbers: this is an analysis, not a traced function).
    - `of`: the quantities (`adlin.quantities`: `Bias`, `DCGain`,
      `TransferMagnitude`, `Pole`, `PoleFrequency`, `PoleDamping`,
      `Expression`), or names of unknowns/outputs (short for `Bias`).
    - `wrt`: names of parameters and/or inputs to differentiate against;
      default every parameter.
    - `guess`, `strategy`, `options`: passed to `adlin.steady_state`.
    - `coalesce_rtol`: poles closer than this (relative) to another pole get
      NaN derivatives and a note instead of meaningless numbers.

    **Returns:** `Sensitivities` (values, dy/dp, normalized (p/y) dy/dp,
    `ranked`, `table`).

    **Raises:** `ParameterError` (unknown names in `of` or `wrt`),
    `AnalysisError` (no quantities, a pole number beyond the pole table),
    `SteadyStateError` (no bias point), `ModelError` (not a System).
    """
    from .._compile import compile
    from .._steady.solve import _is_traced, steady_state

    if not isinstance(system, System):
        raise ModelError(f"sensitivities() needs an adlin.System, got {type(system).__name__}.")
    quantities = resolve_quantities(of, system)
    labels = [q.label() for q in quantities]
    if not quantities:
        raise AnalysisError("sensitivities() needs of=[...]: names of unknowns or outputs, or "
                            "quantities such as DCGain(output, input) or Pole(0).")
    names = _wrt_names(system, wrt)
    if _is_traced(inputs, params, guess):
        raise AnalysisError("sensitivities() takes concrete values; under jit or grad "
                            "differentiate adlin.steady_state and adlin.linearize directly.")
    op = steady_state(system, inputs, params, guess, strategy=strategy, options=options)
    compiled = compile(system, options)
    lin = compiled.linearize(op.x, op.u, op.p)
    refs, bad, notes = _pole_refs(quantities, lin, coalesce_rtol)
    J = -compiled.local(op.x, op.u, op.p)[2]
    theta = np.array([float(op[w]) for w in names])
    vals, jac = _program(compiled, quantities, names)(jnp.asarray(theta), op, J, jnp.asarray(refs))
    vals, jac = np.array(vals), np.array(jac)
    for i, q in enumerate(quantities):
        if q.tracks_pole and refs[i].imag == 0:
            # a simple real pole of a real model stays real: the imaginary part of its
            # derivative is rounding noise
            jac[i, :] = jac[i, :].real
            vals[i] = vals[i].real
    for i in bad:
        jac[i, :] = np.nan
    norm = normalize_rows(vals, jac, theta)
    for i in sorted(set(np.flatnonzero(vals == 0)) - bad):
        notes.append(f"{labels[i]} is zero at this point, so its normalized sensitivities are "
                     "undefined (NaN); read its derivatives instead")
    return Sensitivities(
        parameter_values=jnp.asarray(theta),
        values=jnp.asarray(vals),
        derivatives=jnp.asarray(jac),
        normalized=jnp.asarray(norm),
        quantities=tuple(labels),
        units=tuple(q.unit(system) for q in quantities),
        parameters=names,
        notes=tuple(notes),
    )
