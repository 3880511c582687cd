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
    max_change: float | None = None,
    keep_sign: bool = False,
):
    """Follow F(x, t) = 0 from t = 0 to t = 1.

    `max_change` and `keep_sign` switch on the step controls described in the
    module docstring (off by default).

    **Returns:** (x, reason, evaluations, steps, t_reached): the last accepted
    point, a reason code, residual evaluations, continuation steps tried and
    the last t where a solution was found (-1 if none, not even at t = 0).
    """
    opts = problem.corrector_options(corrector_iterations)
    dtype = x0.dtype
    volts = jnp.asarray(problem.node_mask)

    def short_enough(x_old, x_new, t_new):
        if max_change is None:
            return jnp.asarray(True)
        both = jnp.maximum(jnp.abs(x_old), jnp.abs(x_new))
        scale = jnp.max(jnp.where(volts, both, 0.0)) / jnp.maximum(t_new, 1e-300)
        moved = jnp.where(volts, jnp.abs(x_new - x_old), 0.0)
        return jnp.all(moved <= max_change * scale)

    def cond(s):
        return active & (s["reason"] < 0) & (s["k"] < max_steps)

    def body(s):
        started = s["t"] >= 0
        t_try = jnp.where(started, jnp.minimum(s["t"] + s["dt"], 1.0), 0.0)
        res = newton_solve(lambda x: F(x, t_try), s["x"], problem.junctions, opts)
        sign = jnp.linalg.slogdet(res.jacobian)[0] if keep_sign else jnp.asarray(0.0, dtype)
        same_side = (sign == s["sign"]) | (s["sign"] == 0) if keep_sign else True
        # the start point (t = 0) is taken as it is; the controls apply to later steps
        ok = (res.status == 0) & (~started | (short_enough(s["x"], res.x, t_try) & same_side))
        dt = jnp.where(ok, jnp.minimum(2.0 * s["dt"], max_step), 0.5 * s["dt"])
        reason = jnp.where(
            ok & (t_try >= 1.0), CONVERGED,
            jnp.where(~started & ~ok, START_FAILED,
                      jnp.where(~ok & (dt < min_step), STEP_UNDERFLOW, -1)))
        return {
            "x": jnp.where(ok, res.x, s["x"]),
            "t": jnp.where(ok, t_try, s["t"]),
            "sign": jnp.where(ok, sign, s["sign"]),
            "dt": dt,
            "k": s["k"] + 1,
            "reason": reason,
            "evals": s["evals"] + res.evaluations,
        }

    init = {
        "x": x0,
        "t": jnp.asarray(-1.0, dtype),
        "sign": jnp.asarray(0.0, dtype),
        "dt": jnp.asarray(first_step, dtype),
        "k": jnp.asarray(0),
        "reason": jnp.asarray(-1),
        "evals": jnp.asarray(0),
    }
    out = jax.lax.while_loop(cond, body, init)
    reason = jnp.where(out["reason"] < 0, NO_CONVERGENCE, out["reason"])
    return out["x"], reason, out["evals"], out["k"], out["t"]
