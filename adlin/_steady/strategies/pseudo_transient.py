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

    Each step solves (V / h + J) dx = -f(x), a linearly implicit Euler step
    of the pseudo-dynamics V dx/dtau = -f(x), with h = delta * (time unit);
    the dimensionless step delta grows by switched evolution relaxation,
    delta_{k+1} = delta_k ||f_{k-1}|| / ||f_k|| (same paper, sec. 2), so the
    iteration turns into Newton as the residual falls.  Junction-voltage
    limiting applies to every step.  Safeguards of our own: delta grows at
    least by `min_growth` per accepted step (SER alone stalls while the
    residual stays flat, e.g. while a node charges towards a far-away
    supply), and a step that makes the model non-finite is rejected with
    delta divided by 4 (as is, with "diagonal" scaling, a step that raises
    the residual more than a hundredfold).

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
    - "storage": V = dq/dx, the real storage matrix: backward Euler on the
      circuit's own dynamics E dx/dt = -f (nodes without capacitance stay
      algebraic), so it runs towards a state the physical circuit settles in.
      Used by `Auto(prefer_stable=...)` to look for a stable state.  Three
      differences from the paper's setting, all because this run must be
      allowed to *leave* an unstable state:

      1. The time unit is the fastest time constant of a storage equation at
         the start, min_i sum_j |E_ij| / sum_j |J_ij| over rows with storage,
         so that a stiff element elsewhere (a 10 Ohm supply resistance in an
         algebraic row) does not set it.
      2. A residual that grows is accepted: near a saddle |f| is about zero,
         and following the unstable direction must raise it; the residual is
         the paper's merit for convergence to *some* root, which is not what
         this run is for.  (Kelley & Keyes' analysis assumes the dynamics
         converge to the root; we keep their SER step law for the phase where
         they do.)
      3. While the local linearization E dx/dt = -J dx has an unstable mode
         s (Re s > 0), h stays below 0.5 Re(1/s).  Backward Euler multiplies
         that mode by 1/(1 - h s) per step, which shrinks it, i.e. pulls the
         iterate back into the unstable state, once |1 - h s| > 1; with
         h Re(1/s) <= 1/2 the factor keeps |1 - h s| < 1 and the iteration
         follows the circuit away from it.  The modes are the eigenvalues mu
         of J^-1 E (mu = -1/s; algebraic unknowns give mu = 0), a standard
         eigenvalue problem that jax solves, so no generalized eigensolver
         is needed (backward Euler's stability function 1/(1 - z): Hairer &
         Wanner, Solving Ordinary Differential Equations II, 2nd ed., 1996,
         sec. IV.3, from memory).

    `ramp_steps` > 0 also ramps every input from zero to its value over the
    first `ramp_steps` steps, so that the run is a power-up of the circuit
    from the start point: the state it reaches is the one the circuit wakes
    up in when its supplies rise (the latch's preset value, a reference's
    running state), not merely the nearest solution.

    **Fields:**

    - `scaling`: "diagonal" or "storage", as above.
    - `initial_step`: delta_0 (dimensionless; see `scaling`).
    - `max_step`: delta above which the step is Newton's in all but name.
    - `min_step`: delta below which the search gives up (step size underflow).
    - `min_growth`: least growth factor of delta per accepted step.
    - `max_steps`: pseudo-time steps before giving up.
    - `ramp_steps`: steps over which the inputs rise from zero (0: no ramp,
      the inputs are at their values from the first step).
    """

    scaling: str = eqx.field(static=True, default="diagonal")
    initial_step: float = eqx.field(static=True, default=1e-2)
    max_step: float = eqx.field(static=True, default=1e12)
    min_step: float = eqx.field(static=True, default=1e-10)
    min_growth: float = eqx.field(static=True, default=1.3)
    max_steps: int = eqx.field(static=True, default=400)
    ramp_steps: int = eqx.field(static=True, default=0)

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
        at_least(o, 0, ramp_steps=self.ramp_steps)
        if self.ramp_steps >= self.max_steps:
            raise ParameterError(f"{o}.ramp_steps ({self.ramp_steps}) must be smaller than "
                                 f"{o}.max_steps ({self.max_steps}).")

    def search(self, problem: Problem, x0, active=True) -> Candidate:
        opts = problem.options
        n = x0.shape[0]
        dtype = x0.dtype
        storage = self.scaling == "storage"
        ramped = self.ramp_steps > 0

        def value_twice(x, scale):
            y = problem.f(x, scale * problem.u, problem.p)
            return y, y

        value_and_jac = jax.jacfwd(value_twice, has_aux=True)

        def mass(x):
            return jax.jacfwd(problem.q)(x, problem.p)

        def diagonal_mass(J):
            d = jnp.abs(jnp.diag(J))
            row = jnp.max(jnp.abs(J), axis=1)
            v = jnp.maximum(d, 1e-3 * row)
            v = jnp.where(v > 0, v, jnp.max(d))
            return jnp.diag(jnp.where(v > 0, v, 1.0))

        if storage:
            J0, _ = value_and_jac(x0, 1.0)
            E0 = mass(x0)
            e_rows = jnp.sum(jnp.abs(E0), axis=1)
            j_rows = jnp.sum(jnp.abs(J0), axis=1)
            ratios = jnp.where(e_rows > 0, e_rows / jnp.maximum(j_rows, 1e-300), jnp.inf)
            unit = jnp.min(ratios)
            unit = jnp.where(jnp.isfinite(unit) & (unit > 0), unit, 1.0)
        else:
            unit = jnp.asarray(1.0, dtype)

        def stable_cap(J, E):
            # largest h that keeps backward Euler from damping an unstable mode
            mu = jnp.linalg.eigvals(jnp.linalg.solve(J, E))
            size = jnp.abs(mu)
            dynamic = size > 1e-10 * jnp.max(size)
            unstable = dynamic & (-mu.real > 1e-9 * size)
            cap = 0.5 * jnp.min(jnp.where(unstable, -mu.real, jnp.inf))
            return jnp.where(jnp.all(jnp.isfinite(mu)), cap, jnp.inf).astype(dtype)

        def norm(f):
            # the plain 2-norm of the paper; row weights taken at a start point
            # where devices are off made one equation's tiny currents dominate
            return jnp.sqrt(jnp.sum(f**2))

        def cond(s):
            return active & (s["reason"] < 0) & (s["k"] < self.max_steps)

        def body(s):
            x = s["x"]
            # inputs at the ramp's value for this step (full once the ramp is over)
            scale = (jnp.minimum(1.0, (s["m"] + 1.0) / self.ramp_steps).astype(dtype)
                     if ramped else jnp.asarray(1.0, dtype))
            J, f = value_and_jac(x, scale)
            finite = jnp.all(jnp.isfinite(f)) & jnp.all(jnp.isfinite(J))
            fn = norm(f)
            # Reject a step that broke the model (or, when only convergence matters,
            # blew up the residual): go back to the last accepted point with a
            # smaller delta.  Following the circuit's own dynamics may raise |f|.
            grew = (fn > 100.0 * s["fnorm"]) if not storage else False
            reject = (~finite | grew) & (s["k"] > 0)
            f_tol, x_tol, _ = _tolerances(J, x, opts)
            dx_newton = jnp.linalg.solve(J, -f)
            converged = (finite & jnp.all(jnp.isfinite(dx_newton)) & (scale >= 1.0)
                         & (jnp.max(jnp.abs(dx_newton) / x_tol) <= 1.0)
                         & (jnp.max(jnp.abs(f) / f_tol) <= 1.0))
            growth = jnp.maximum(s["fnorm"] / jnp.maximum(fn, 1e-300), self.min_growth)
            delta = jnp.where(reject, s["delta"] / 4.0,
                              jnp.where(s["k"] > 0, s["delta"] * growth, s["delta"]))
            delta = jnp.minimum(delta, self.max_step)
            # only rejections shrink delta towards underflow; the stability cap below
            # may hold it small for a while without that being a failure
            underflow = reject & (delta < self.min_step)
            if storage:
                V = mass(x)
                cap = jnp.where(finite, stable_cap(J, V), jnp.inf)
                delta = jnp.minimum(delta, cap / unit)
            else:
                V = diagonal_mass(J)
            dx = jnp.linalg.solve(V / (delta * unit) + J, -f)
            solved = jnp.all(jnp.isfinite(dx))
            dx = jnp.where(solved & finite, dx, 0.0)
            alpha = limit_scale(problem.junctions, x, dx)
            reason = jnp.where(
                ~reject & converged, CONVERGED,
                jnp.where(~finite & (s["k"] == 0), NON_FINITE,
                          jnp.where(~reject & ~solved, SINGULAR,
                                    jnp.where(underflow, STEP_UNDERFLOW, -1))))
            return {
                "x": jnp.where(reject, s["x_prev"], jnp.where(reason >= 0, x, x + alpha * dx)),
                "x_prev": jnp.where(reject, s["x_prev"], x),
                "delta": delta,
                "fnorm": jnp.where(reject, s["fnorm"], fn),
                "k": s["k"] + 1,
                "m": s["m"] + jnp.where(reject, 0, 1),
                "reason": reason,
                "evals": s["evals"] + 1 + n,
            }

        init = {
            "x": x0, "x_prev": x0,
            "delta": jnp.asarray(self.initial_step, dtype),
            "fnorm": jnp.asarray(jnp.inf, dtype),
            "k": jnp.asarray(0), "m": jnp.asarray(0), "reason": jnp.asarray(-1),
            "evals": jnp.asarray(1 + n),
        }
        out = jax.lax.while_loop(cond, body, init)
        reason = jnp.where(out["reason"] < 0, NO_CONVERGENCE, out["reason"])
        return single_attempt(PSEUDO_TRANSIENT, out["x"], reason, out["evals"], out["k"],
                              out["delta"], active=active)
