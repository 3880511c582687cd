"""Damped Newton with junction-voltage limiting and a backtracking line search.

A pure-JAX solver for f(x) = 0 that runs under jit and vmap: each lane carries
its own status, so one sample that fails does not stop a batch.

Globalization, in the order applied to each Newton step dx:

1. Junction-voltage limiting.  For every declared pn junction the proposed
   forward voltage is pulled back to the logarithmic step an exponential law
   can take (Vlach & Singhal, Computer Methods for Circuit Analysis and Design,
   2nd ed., 1994; the rule is the classic one from Nagel's 1975 Berkeley
   memorandum ERL-M520 on circuit simulation, quoted from memory).  The whole
   step is scaled by the smallest resulting factor, so its direction stays the
   Newton direction.
2. Backtracking (Armijo) on the merit 0.5*||W f||^2 with W a fixed row scaling
   (Dennis & Schnabel, Numerical Methods for Unconstrained Optimization and
   Nonlinear Equations, SIAM 1996, sec. 6.3).  A trial point where the model is
   not finite counts as a failed trial.

Convergence needs both the Newton update and the scaled residual to be small:
|dx_i| <= rtol |x_i| + atol and |f_i| <= rtol s_i + ftol, where
s_i = sum_j |J_ij| (|x_j| + atol) is the size of the terms in equation i.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import equinox as eqx
import jax
import jax.numpy as jnp
import numpy as np

# status codes, shared with OperatingPoint.status
SUCCESS = 0
MAX_ITERATIONS = 1
SINGULAR_JACOBIAN = 2
NOT_FINITE = 3

STATUS_MESSAGES = {
    SUCCESS: "converged",
    MAX_ITERATIONS: "no convergence within the iteration limit",
    SINGULAR_JACOBIAN: "the Jacobian became singular",
    NOT_FINITE: "the model returned a non-finite value",
}


class NewtonOptions(eqx.Module):
    """Settings of the damped Newton solver.

    - `rtol`: relative tolerance on updates and residuals.
    - `atol`: absolute tolerance on updates (in the unknowns' units, V or A).
    - `ftol`: absolute floor on residuals (A for node equations).
    - `max_iterations`: Newton iterations before giving up.
    - `max_backtracks`: step halvings per iteration in the line search.
    - `max_step`: largest change of any unknown in one iteration (None: no cap).
    """

    rtol: float = eqx.field(static=True, default=1e-9)
    atol: float = eqx.field(static=True, default=1e-12)
    ftol: float = eqx.field(static=True, default=1e-15)
    max_iterations: int = eqx.field(static=True, default=200)
    max_backtracks: int = eqx.field(static=True, default=12)
    max_step: float | None = eqx.field(static=True, default=None)

    def __check_init__(self):
        if not (0 < self.rtol < 1):
            raise ValueError(f"rtol must be in (0, 1), got {self.rtol}")
        if self.max_iterations < 1:
            raise ValueError(f"max_iterations must be at least 1, got {self.max_iterations}")


@dataclass(frozen=True, eq=False)
class JunctionTable:
    """Junctions as index arrays (-1 for ground), built once per compiled model."""

    anode: np.ndarray
    cathode: np.ndarray
    vt: np.ndarray
    vcrit: np.ndarray

    @property
    def size(self) -> int:
        return int(self.anode.shape[0])

    def voltage(self, x):
        xg = jnp.concatenate([x, jnp.zeros((1,), x.dtype)])  # index -1 reads ground
        return xg[self.anode] - xg[self.cathode]


def limit_scale(table: JunctionTable, x, dx):
    """Largest factor in (0, 1] that keeps every junction inside its limited step."""
    if table.size == 0:
        return jnp.asarray(1.0, dtype=x.dtype)
    vt = jnp.asarray(table.vt)
    vcrit = jnp.asarray(table.vcrit)
    v_old = table.voltage(x)
    dv = table.voltage(x + dx) - v_old
    v_new = v_old + dv
    arg = 1.0 + dv / vt
    from_on = jnp.where(arg > 0, v_old + vt * jnp.log(jnp.maximum(arg, 1e-300)), vcrit)
    from_off = vt * jnp.log(jnp.maximum(v_new / vt, 1e-300))
    limited = jnp.where(v_old > 0, from_on, from_off)
    active = (v_new > vcrit) & (jnp.abs(dv) > 2.0 * vt)
    limited = jnp.where(active, jnp.minimum(limited, v_new), v_new)
    safe_dv = jnp.where(dv == 0, 1.0, dv)
    scale = jnp.where(active, (limited - v_old) / safe_dv, 1.0)
    return jnp.clip(jnp.min(scale), 1e-6, 1.0)


class NewtonResult(eqx.Module):
    x: jax.Array  # last iterate; on success, the point where convergence was declared
    status: jax.Array
    iterations: jax.Array
    residual: jax.Array  # f at x
    jacobian: jax.Array  # df/dx at x (reused for the implicit-function step)
    step: jax.Array  # the Newton update -J^-1 f at x (on success, the final update)
    update_ratio: jax.Array  # max |dx_i| / tol_i of the last Newton step
    residual_ratio: jax.Array  # max |f_i| / tol_i at x
    evaluations: jax.Array  # residual evaluations; a Jacobian counts as n of them


def _tolerances(J, x, opts: NewtonOptions):
    row_scale = jnp.abs(J) @ (jnp.abs(x) + opts.atol)
    f_tol = opts.rtol * row_scale + opts.ftol
    x_tol = opts.rtol * jnp.abs(x) + opts.atol
    return f_tol, x_tol, row_scale


class _Test(eqx.Module):
    """The Newton step at an iterate and the convergence test there."""

    dx: jax.Array
    row_scale: jax.Array
    upd_ratio: jax.Array
    res_ratio: jax.Array
    finite: jax.Array
    solved: jax.Array

    @property
    def converged(self):
        return self.finite & self.solved & (self.upd_ratio <= 1.0) & (self.res_ratio <= 1.0)

    @property
    def status(self):
        """SUCCESS, NOT_FINITE, SINGULAR_JACOBIAN, or -1 (go on)."""
        return jnp.where(self.converged, SUCCESS, jnp.where(
            ~self.finite, NOT_FINITE, jnp.where(~self.solved, SINGULAR_JACOBIAN, -1)))


def _test(J, f, x, opts: NewtonOptions, linear_solve) -> _Test:
    dx = linear_solve(J, -f)
    f_tol, x_tol, row_scale = _tolerances(J, x, opts)
    return _Test(dx=dx, row_scale=row_scale, upd_ratio=jnp.max(jnp.abs(dx) / x_tol),
                 res_ratio=jnp.max(jnp.abs(f) / f_tol),
                 finite=jnp.all(jnp.isfinite(f)) & jnp.all(jnp.isfinite(J)),
                 solved=jnp.all(jnp.isfinite(dx)))


def _step_scale(junctions: JunctionTable, x, dx, opts: NewtonOptions):
    """The limited length of the step dx: junction limiting, then `max_step`."""
    alpha = limit_scale(junctions, x, dx)
    if opts.max_step is not None:
        alpha = jnp.minimum(alpha, opts.max_step / jnp.maximum(jnp.max(jnp.abs(dx)), 1e-300))
    return alpha


def newton_solve(
    fun: Callable[[jax.Array], jax.Array],
    x0: jax.Array,
    junctions: JunctionTable,
    opts: NewtonOptions,
    active=True,
    value_and_jacobian: Callable[[jax.Array], tuple[jax.Array, jax.Array]] | None = None,
    linear_solve: Callable[[jax.Array, jax.Array], jax.Array] = jnp.linalg.solve,
    head_steps: int = 0,
) -> NewtonResult:
    """Solve fun(x) = 0 from x0. Pure JAX; never raises on non-convergence.

    `active` (a bool, possibly traced) switches the solve off for a lane: the
    loop then runs no iteration and reports MAX_ITERATIONS at x0.  Strategy
    chains use it so that, under vmap, lanes already solved cost nothing.

    Convergence is declared at an iterate x whose Newton update and residual
    are both within tolerance; that x, with f and df/dx there, is returned
    (the caller's implicit-function step then applies the final update).
    The model is traced twice (value+Jacobian, and value for the line search)
    to keep compilation short.  `value_and_jacobian(x) -> (f, df/dx)`, if
    given, replaces forward-mode AD of `fun` (a cheaper exact Jacobian).
    `linear_solve(J, rhs)` solves for the Newton step; it must return non-finite
    values where it cannot solve (the batch engine passes `adlin._sparse_lu`).

    `head_steps` > 0 runs that many iterations first as a fixed-length scan
    (`_head`): full Newton steps while they pass an Armijo test, cheaper per
    iteration than the loop under vmap; the loop takes over where they stop.
    """
    n = x0.shape[0]

    def value_twice(x):
        y = fun(x)  # traced once: the value rides along as the auxiliary output
        return y, y

    if value_and_jacobian is None:
        value_and_jac = jax.jacfwd(value_twice, has_aux=True)
    else:
        def value_and_jac(x):
            f, J = value_and_jacobian(x)
            return J, f

    def merit(f, w):
        m = 0.5 * jnp.sum((w * f) ** 2)
        return jnp.where(jnp.all(jnp.isfinite(f)), m, jnp.inf)

    def cond(state):
        return (state["status"] < 0) & (state["k"] < opts.max_iterations)

    def body(state):
        x = state["x"]
        J, f = value_and_jac(x)
        t = _test(J, f, x, opts, linear_solve)
        converged = t.converged

        # globalized step
        dx_safe = jnp.where(t.solved & t.finite, t.dx, 0.0)
        alpha0 = _step_scale(junctions, x, dx_safe, opts)
        w = 1.0 / jnp.where(t.row_scale > 0, t.row_scale, 1.0)
        m0 = merit(f, w)

        def ls_cond(ls):
            return (~ls["ok"]) & (ls["tries"] < opts.max_backtracks)

        def ls_body(ls):
            alpha = ls["alpha"] * jnp.where(ls["tries"] == 0, 1.0, 0.5)
            f_new = fun(x + alpha * dx_safe)
            ok = merit(f_new, w) <= (1.0 - 2e-4 * alpha) * m0
            return {"alpha": alpha, "ok": ok, "tries": ls["tries"] + 1}

        # no line search once converged: the caller takes the last step exactly
        ls = jax.lax.while_loop(
            ls_cond, ls_body,
            {"alpha": alpha0, "ok": converged | ~t.finite | ~t.solved, "tries": jnp.asarray(0)},
        )
        status = t.status
        return {
            "x": jnp.where(status < 0, x + ls["alpha"] * dx_safe, x),
            "f": f,
            "J": J,
            "dx": t.dx,
            "k": state["k"] + 1,
            "status": status,
            "evals": state["evals"] + 1 + n + ls["tries"],
            "upd": t.upd_ratio,
            "res": t.res_ratio,
        }

    if head_steps > 0:
        # the scan's lanes that converged enter the loop finished, so the loop
        # runs no iteration at all when every lane of a batch converged there
        init = _head(value_and_jac, x0, head_steps, junctions, opts, merit, linear_solve,
                     active)
        done = active & (init["status"] == SUCCESS)
        init["status"] = jnp.where(done, SUCCESS, jnp.where(active, -1, MAX_ITERATIONS))
        init["k"] = jnp.where(active, init["k"], 0)
    else:
        init = {
            "x": x0,
            "f": jnp.zeros_like(x0),
            "J": jnp.zeros((n, n), x0.dtype),
            "dx": jnp.zeros_like(x0),
            "k": jnp.asarray(0),
            "status": jnp.where(active, -1, MAX_ITERATIONS),
            "evals": jnp.asarray(0),
            "upd": jnp.asarray(jnp.inf, dtype=x0.dtype),
            "res": jnp.asarray(jnp.inf, dtype=x0.dtype),
        }
    out = jax.lax.while_loop(cond, body, init)
    status = jnp.where(out["status"] < 0, MAX_ITERATIONS, out["status"])
    return NewtonResult(
        x=out["x"],
        status=status,
        iterations=out["k"],
        residual=out["f"],
        jacobian=out["J"],
        step=out["dx"],
        update_ratio=out["upd"],
        residual_ratio=out["res"],
        evaluations=out["evals"],
    )


def _head(value_and_jac, x0, steps: int, junctions: JunctionTable, opts: NewtonOptions, merit,
          linear_solve, active) -> dict:
    """`steps` Newton iterations as a scan, then the test at the last iterate.

    Returns the loop's state there: x with f, df/dx, the Newton step and the
    ratios at x, the iterations and evaluations spent, and status SUCCESS
    where x passed the convergence test (else -1; `newton_solve` sets it).

    Each iteration is a full (limited) Newton step, kept if it passes the
    loop's Armijo test, with the row weights of the merit taken once at x0
    (any fixed positive weights make the Newton step a descent direction;
    Dennis & Schnabel 1996, sec. 6.3) and the value and Jacobian at the trial
    point evaluated together (the next iteration needs both).  A lane whose
    step fails stays where it is and the loop takes over from there with its
    backtracking; there is no convergence test inside (a converged lane's
    next step is within tolerance), only after the scan.  Why a scan: under
    vmap the while loop pays per iteration for its nested line-search loop,
    tolerances and batched exit tests, and the same steps written out
    unrolled are far slower still (XLA copies the solve into every consumer
    of its result; measured on the demo regulator, DEVELOPERS.md).
    """
    n = x0.shape[0]
    J0, f0 = value_and_jac(x0)
    _, _, row_scale = _tolerances(J0, x0, opts)
    w = 1.0 / jnp.where(row_scale > 0, row_scale, 1.0)

    def body(carry, _):
        x, f, J, done, k, trials = carry
        dx = linear_solve(J, -f)
        done = done | ~jnp.all(jnp.isfinite(dx))
        dx = jnp.where(done, 0.0, dx)
        alpha = _step_scale(junctions, x, dx, opts)
        x_try = x + alpha * dx
        J_try, f_try = value_and_jac(x_try)
        ok = (~done & jnp.all(jnp.isfinite(J_try))
              & (merit(f_try, w) <= (1.0 - 2e-4 * alpha) * merit(f, w)))
        keep = lambda new, old: jnp.where(ok, new, old)  # noqa: E731
        return (keep(x_try, x), keep(f_try, f), keep(J_try, J), done | ~ok,
                k + ok.astype(k.dtype), trials + (~done).astype(k.dtype)), None

    zero = jnp.asarray(0)
    init = (x0, f0, J0, ~jnp.asarray(active, dtype=bool), zero, zero)
    (x, f, J, _, k, trials), _ = jax.lax.scan(body, init, None, length=steps)
    t = _test(J, f, x, opts, linear_solve)
    converged = t.converged
    return {
        "x": x, "f": f, "J": J, "dx": t.dx,
        # the loop counts the iteration that declares convergence
        "k": k + converged.astype(k.dtype),
        "status": jnp.where(converged, SUCCESS, -1),
        # the start and every trial: one value and one Jacobian (n) each
        "evals": jnp.where(active, (1 + n) * (1 + trials), 0),
        "upd": t.upd_ratio, "res": t.res_ratio,
    }
