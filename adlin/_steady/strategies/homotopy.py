"""Newton homotopy followed by pseudo-arclength predictor-corrector."""

from __future__ import annotations

from typing import ClassVar

import equinox as eqx
import jax
import jax.numpy as jnp

from ._validate import at_least, ordered, positive
from .base import AbstractStrategy
from .problem import Candidate, Problem, single_attempt
from .reasons import (
    CONVERGED,
    HOMOTOPY,
    NO_CONVERGENCE,
    NON_FINITE,
    SINGULAR,
    STEP_UNDERFLOW,
    TURNED_BACK,
)


class NewtonHomotopy(AbstractStrategy):
    """Follow H(x, lam) = f(x) - (1 - lam) f(x0) from lam = 0 (where x0 solves it) to 1.

    The path (x(s), lam(s)) is traced by arclength s with an Euler predictor
    along the tangent and a Newton corrector on the bordered system
    [H(x, lam); t . (z - z_pred)] = 0, so it can turn around at folds where
    lam reverses (Allgower & Georg, Numerical Continuation Methods: An
    Introduction, Springer 1990 / SIAM 2003, ch. 2 and sec. 11.1 for the
    Newton homotopy).  The tangent keeps its orientation (t_new . t_old > 0).
    The step length adapts: doubled after a corrector that converged in at
    most 3 iterations, halved after one that failed.  When an accepted step
    crosses lam = 1 the corrector lands on lam = 1 exactly, starting from the
    linear interpolation of the two points.  The arclength treats every
    unknown in its own unit (V, A) and lam as dimensionless.

    **Fields:**

    - `first_step`, `min_step`, `max_step`: arclength steps.
    - `max_steps`: predictor-corrector steps before giving up.
    - `corrector_iterations`: Newton iterations per corrector.
    - `corrector_rtol`: relative tolerance of the corrector's update.
    """

    first_step: float = eqx.field(static=True, default=0.1)
    min_step: float = eqx.field(static=True, default=1e-8)
    max_step: float = eqx.field(static=True, default=1e4)
    max_steps: int = eqx.field(static=True, default=500)
    corrector_iterations: int = eqx.field(static=True, default=8)
    corrector_rtol: float = eqx.field(static=True, default=1e-8)

    name: ClassVar[str] = "homotopy"
    code: ClassVar[int] = HOMOTOPY

    def __check_init__(self):
        o = type(self).__name__
        positive(o, first_step=self.first_step, min_step=self.min_step, max_step=self.max_step,
                 corrector_rtol=self.corrector_rtol)
        ordered(o, "min_step", "max_step", self.min_step, self.max_step)
        at_least(o, 1, max_steps=self.max_steps, corrector_iterations=self.corrector_iterations)

    def search(self, problem: Problem, x0, active=True) -> Candidate:
        n = x0.shape[0]
        dtype = x0.dtype
        atol = problem.options.atol
        f0 = problem.residual(x0)
        e_lam = jnp.zeros((n + 1,), dtype).at[n].set(1.0)

        def value_twice(x):
            y = problem.residual(x)
            return y, y

        value_and_jac = jax.jacfwd(value_twice, has_aux=True)

        def bordered(J, row):
            top = jnp.concatenate([J, f0[:, None]], axis=1)
            return jnp.concatenate([top, row[None, :]], axis=0)

        def tangent(J, t_old):
            t = jnp.linalg.solve(bordered(J, t_old), e_lam)
            t = t / jnp.linalg.norm(t)
            return jnp.where(jnp.dot(t, t_old) < 0, -t, t)

        def correct(z_start, row, target, enabled=True):
            """Newton on [H(z); row . z - target] = 0.

            Returns (z, converged, iterations, size of the first update, df/dx at
            the last iterate; it serves the next tangent, one model copy fewer).
            """

            def c_cond(c):
                return (~c["done"]) & (c["i"] < self.corrector_iterations)

            def c_body(c):
                z = c["z"]
                J, f = value_and_jac(z[:n])
                r = jnp.concatenate([f - (1.0 - z[n]) * f0, (jnp.dot(row, z) - target)[None]])
                dz = jnp.linalg.solve(bordered(J, row), -r)
                ok = jnp.all(jnp.isfinite(dz)) & jnp.all(jnp.isfinite(r))
                dz = jnp.where(ok, dz, 0.0)
                size = jnp.max(jnp.abs(dz) / (self.corrector_rtol * jnp.abs(z) + atol))
                return {"z": z + dz, "i": c["i"] + 1, "bad": c["bad"] | ~ok,
                        "done": (size <= 1.0) | ~ok, "J": J,
                        "first": jnp.where(c["i"] == 0, jnp.linalg.norm(dz), c["first"])}

            c = jax.lax.while_loop(c_cond, c_body, {
                "z": z_start, "i": jnp.asarray(0), "bad": jnp.asarray(False),
                "done": ~jnp.asarray(enabled), "first": jnp.asarray(0.0, dtype),
                "J": jnp.zeros((n, n), dtype)})
            good = enabled & c["done"] & ~c["bad"]
            return c["z"], good, c["i"], c["first"], c["J"]

        def cond(s):
            return active & (s["reason"] < 0) & (s["k"] < self.max_steps)

        def body(s):
            z, t_old, h = s["z"], s["t"], s["h"]
            t = tangent(s["J"], t_old)
            singular = ~jnp.all(jnp.isfinite(t))
            t = jnp.where(singular, t_old, t)
            # Predictor-corrector along the arclength.
            z_pred = z + h * t
            z_new, good, iters, first, J_new = correct(z_pred, t, jnp.dot(t, z_pred))
            good = good & (first <= h)  # a large first correction: the step jumped paths
            crossed = good & (z_new[n] >= 1.0)
            # Landing on lam = 1 from the interpolated point.
            frac = (1.0 - z[n]) / jnp.where(crossed, z_new[n] - z[n], 1.0)
            z_mid = z + frac * (z_new - z)
            z_land, landed, iters2, _, _ = correct(z_mid, e_lam, 1.0, crossed)
            done = crossed & landed
            accept = good & ~crossed
            h_next = jnp.where(
                accept, jnp.where(iters <= 3, jnp.minimum(2.0 * h, self.max_step), h), 0.5 * h)
            reason = jnp.where(
                done, CONVERGED,
                jnp.where(singular, SINGULAR,
                          jnp.where(accept & (z_new[n] < -1.0), TURNED_BACK,
                                    jnp.where(h_next < self.min_step, STEP_UNDERFLOW, -1))))
            return {
                "z": jnp.where(done, z_land, jnp.where(accept, z_new, z)),
                "t": t,
                "J": jnp.where(accept, J_new, s["J"]),
                "h": h_next,
                "k": s["k"] + 1,
                "reason": reason,
                "evals": s["evals"] + (n + 1) * (iters + jnp.where(crossed, iters2, 0)),
            }

        # First tangent: the null vector of [J f0] at the start (an SVD, since J may
        # be singular there), oriented so that lam increases.
        J0, _ = value_and_jac(x0)
        t0 = jnp.linalg.svd(jnp.concatenate([J0, f0[:, None]], axis=1))[2][-1]
        t0 = jnp.where(t0[n] < 0, -t0, t0)
        finite0 = jnp.all(jnp.isfinite(f0)) & jnp.all(jnp.isfinite(t0))
        init = {
            "z": jnp.concatenate([x0, jnp.zeros((1,), dtype)]),
            "t": jnp.where(finite0, t0, e_lam),
            "J": J0,
            "h": jnp.asarray(self.first_step, dtype),
            "k": jnp.asarray(0),
            "reason": jnp.where(finite0, -1, NON_FINITE),
            "evals": jnp.asarray(2 + n),
        }
        out = jax.lax.while_loop(cond, body, init)
        reason = jnp.where(out["reason"] < 0, NO_CONVERGENCE, out["reason"])
        return single_attempt(HOMOTOPY, out["z"][:n], reason, out["evals"], out["k"],
                              out["z"][n], active=active)
