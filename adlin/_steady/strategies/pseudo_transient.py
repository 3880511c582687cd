"""Pseudo-transient continuation with switched-evolution-relaxation steps."""

from __future__ import annotations

from typing import ClassVar

import equinox as eqx
import jax
import jax.numpy as jnp

from ..._errors import ParameterError
from ..newton import _tolerances, limit_scale
from ._validate import at_least, ordered, positive
from .base import AbstractStrategy
from .problem import Candidate, Problem, single_attempt
from .reasons import (
    CONVERGED,
    NO_CONVERGENCE,
    NON_FINITE,
    PSEUDO_TRANSIENT,
    SINGULAR,
    STEP_UNDERFLOW,
)

_SCALINGS = ("diagonal", "storage")


class PseudoTransient(AbstractStrategy):
    """Pseudo-transient continuation (Kelley & Keyes, "Convergence analysis of
    pseudo-transient continuation", SIAM J. Numer. Anal. 35(2), 1998).

    Each step solves (V / delta + J) dx = -f(x), a linearly implicit Euler
    step of the pseudo-dynamics V dx/dtau = -f(x); the step delta grows by
    switched evolution relaxation, delta_{k+1} = delta_k ||f_{k-1}|| / ||f_k||
    (same paper, sec. 2), so the iteration turns into Newton as the residual
    falls.  Junction-voltage limiting applies to every step.  Two safeguards
    of our own: delta grows at least by `min_growth` per accepted step (SER
    alone stalls while the residual stays flat, e.g. while a node charges
    towards a far-away supply), and a step that makes the model non-finite or
    raises the residual more than a hundredfold is rejected with delta divided by 4.

    Choice of V (`scaling`):

    - "diagonal" (default): V = diag(v), v_i = |df_i/dx_i| at the current
      point, floored at 1e-3 of the largest entry of row i, and at the largest
      diagonal entry when a row is all zero.  Circuits have nodes without
      capacitance, so the real storage matrix would leave those equations
      undamped (the step there is plain Newton); this V damps every equation
      with a pseudo-capacitance proportional to its own conductance, so delta
      is dimensionless and one pseudo-time unit is one local time constant
      for every node alike.  Rows with no self term (the branch equation of
      an ideal voltage source) get a small pseudo-inductance from the floor.
    - "storage": V = dq/dx, the real storage matrix, with delta measured in
      units of the time constant ||E|| / ||J|| at the start.  This is backward
      Euler on the circuit's own dynamics (nodes without capacitance stay
      algebraic), so it runs towards a state the physical circuit settles in:
      a stable one.  Used to look for a stable state when Newton found an
      unstable one.

    **Fields:**

    - `scaling`: "diagonal" or "storage", as above.
    - `initial_step`: delta_0 (dimensionless; see `scaling`).
    - `max_step`: delta above which the step is Newton's in all but name.
    - `min_step`: delta below which the search gives up (step size underflow).
    - `min_growth`: least growth factor of delta per accepted step.
    - `max_steps`: pseudo-time steps before giving up.
    """

    scaling: str = eqx.field(static=True, default="diagonal")
    initial_step: float = eqx.field(static=True, default=1e-2)
    max_step: float = eqx.field(static=True, default=1e12)
    min_step: float = eqx.field(static=True, default=1e-10)
    min_growth: float = eqx.field(static=True, default=1.3)
    max_steps: int = eqx.field(static=True, default=400)

    name: ClassVar[str] = "pseudo-transient"
    code: ClassVar[int] = PSEUDO_TRANSIENT

    def __check_init__(self):
        o = type(self).__name__
        if self.scaling not in _SCALINGS:
            raise ParameterError(f"{o}.scaling must be one of {_SCALINGS}, got {self.scaling!r}.")
        positive(o, initial_step=self.initial_step, max_step=self.max_step,
                 min_step=self.min_step)
        ordered(o, "min_step", "max_step", self.min_step, self.max_step)
        if not self.min_growth >= 1.0:
            raise ParameterError(f"{o}.min_growth must be at least 1, got {self.min_growth!r}.")
        at_least(o, 1, max_steps=self.max_steps)

    def search(self, problem: Problem, x0, active=True) -> Candidate:
        opts = problem.options
        n = x0.shape[0]
        dtype = x0.dtype

        def value_twice(x):
            y = problem.residual(x)
            return y, y

        value_and_jac = jax.jacfwd(value_twice, has_aux=True)
        storage = self.scaling == "storage"

        def pseudo_mass(x, J):
            if storage:
                return jax.jacfwd(problem.q)(x, problem.p)
            d = jnp.abs(jnp.diag(J))
            row = jnp.max(jnp.abs(J), axis=1)
            v = jnp.maximum(d, 1e-3 * row)
            v = jnp.where(v > 0, v, jnp.max(d))
            return jnp.diag(jnp.where(v > 0, v, 1.0))

        if storage:
            J0, _ = value_and_jac(x0)
            E0 = jax.jacfwd(problem.q)(x0, problem.p)
            tau = jnp.linalg.norm(E0) / jnp.maximum(jnp.linalg.norm(J0), 1e-300)
            delta0 = self.initial_step * jnp.where(tau > 0, tau, 1.0)
        else:
            delta0 = jnp.asarray(self.initial_step, dtype)

        def norm(f):
            # the plain 2-norm of the paper; row weights taken at a start point
            # where devices are off made one equation's tiny currents dominate
            return jnp.sqrt(jnp.sum(f**2))

        def cond(s):
            return active & (s["reason"] < 0) & (s["k"] < self.max_steps)

        def body(s):
            x = s["x"]
            J, f = value_and_jac(x)
            finite = jnp.all(jnp.isfinite(f)) & jnp.all(jnp.isfinite(J))
            fn = norm(f)
            # Reject a step that broke the model or blew up the residual: go back to
            # the last accepted point (re-evaluated next time) with a smaller delta.
            reject = (~finite | (fn > 100.0 * s["fnorm"])) & (s["k"] > 0)
            f_tol, x_tol, _ = _tolerances(J, x, opts)
            dx_newton = jnp.linalg.solve(J, -f)
            converged = (finite & jnp.all(jnp.isfinite(dx_newton))
                         & (jnp.max(jnp.abs(dx_newton) / x_tol) <= 1.0)
                         & (jnp.max(jnp.abs(f) / f_tol) <= 1.0))
            growth = jnp.maximum(s["fnorm"] / jnp.maximum(fn, 1e-300), self.min_growth)
            delta = jnp.where(reject, s["delta"] / 4.0,
                              jnp.where(s["k"] > 0, s["delta"] * growth, s["delta"]))
            delta = jnp.minimum(delta, self.max_step)
            V = pseudo_mass(x, J)
            dx = jnp.linalg.solve(V / delta + J, -f)
            solved = jnp.all(jnp.isfinite(dx))
            dx = jnp.where(solved & finite, dx, 0.0)
            alpha = limit_scale(problem.junctions, x, dx)
            reason = jnp.where(
                ~reject & converged, CONVERGED,
                jnp.where(~finite & (s["k"] == 0), NON_FINITE,
                          jnp.where(~reject & ~solved, SINGULAR,
                                    jnp.where(delta < self.min_step, STEP_UNDERFLOW, -1))))
            return {
                "x": jnp.where(reject, s["x_prev"], jnp.where(reason >= 0, x, x + alpha * dx)),
                "x_prev": jnp.where(reject, s["x_prev"], x),
                "delta": delta,
                "fnorm": jnp.where(reject, s["fnorm"], fn),
                "k": s["k"] + 1,
                "reason": reason,
                "evals": s["evals"] + 1 + n,
            }

        init = {
            "x": x0, "x_prev": x0,
            "delta": jnp.asarray(delta0, dtype),
            "fnorm": jnp.asarray(jnp.inf, dtype),
            "k": jnp.asarray(0), "reason": jnp.asarray(-1), "evals": jnp.asarray(1 + n),
        }
        out = jax.lax.while_loop(cond, body, init)
        reason = jnp.where(out["reason"] < 0, NO_CONVERGENCE, out["reason"])
        return single_attempt(PSEUDO_TRANSIENT, out["x"], reason, out["evals"], out["k"],
                              out["delta"], active=active)
