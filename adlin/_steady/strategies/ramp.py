"""Natural-parameter continuation with adaptive steps, shared by the stepping strategies.

Solves F(x, t) = 0 for t = 0, then for increasing t up to 1, each point by
damped Newton started from the previous one.  A step that fails is halved; a
step that succeeds is doubled (up to `max_step`); a step below `min_step` is
a failure (step size underflow).  This is the simplest embedding method
(Allgower & Georg, Numerical Continuation Methods, SIAM 2003, ch. 1 and
sec. 2.1); it cannot pass a fold of the path, which is what the Newton
homotopy with pseudo-arclength is for.
"""

from __future__ import annotations

from collections.abc import Callable

import jax
import jax.numpy as jnp

from ..newton import newton_solve
from .problem import Problem
from .reasons import CONVERGED, NO_CONVERGENCE, START_FAILED, STEP_UNDERFLOW


def ramp(
    problem: Problem,
    F: Callable[[jax.Array, jax.Array], jax.Array],
    x0: jax.Array,
    *,
    first_step: float,
    min_step: float,
    max_step: float,
    max_steps: int,
    corrector_iterations: int,
    active=True,
):
    """Follow F(x, t) = 0 from t = 0 to t = 1.

    **Returns:** (x, reason, evaluations, steps, t_reached): the last accepted
    point, a reason code, residual evaluations, continuation steps tried and
    the last t where a solution was found (-1 if none, not even at t = 0).
    """
    opts = problem.corrector_options(corrector_iterations)
    dtype = x0.dtype

    def cond(s):
        return active & (s["reason"] < 0) & (s["k"] < max_steps)

    def body(s):
        started = s["t"] >= 0
        t_try = jnp.where(started, jnp.minimum(s["t"] + s["dt"], 1.0), 0.0)
        res = newton_solve(lambda x: F(x, t_try), s["x"], problem.junctions, opts)
        ok = res.status == 0
        dt = jnp.where(ok, jnp.minimum(2.0 * s["dt"], max_step), 0.5 * s["dt"])
        reason = jnp.where(
            ok & (t_try >= 1.0), CONVERGED,
            jnp.where(~started & ~ok, START_FAILED,
                      jnp.where(~ok & (dt < min_step), STEP_UNDERFLOW, -1)))
        return {
            "x": jnp.where(ok, res.x, s["x"]),
            "t": jnp.where(ok, t_try, s["t"]),
            "dt": dt,
            "k": s["k"] + 1,
            "reason": reason,
            "evals": s["evals"] + res.evaluations,
        }

    init = {
        "x": x0,
        "t": jnp.asarray(-1.0, dtype),
        "dt": jnp.asarray(first_step, dtype),
        "k": jnp.asarray(0),
        "reason": jnp.asarray(-1),
        "evals": jnp.asarray(0),
    }
    out = jax.lax.while_loop(cond, body, init)
    reason = jnp.where(out["reason"] < 0, NO_CONVERGENCE, out["reason"])
    return out["x"], reason, out["evals"], out["k"], out["t"]
