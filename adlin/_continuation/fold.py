"""Fold (limit point) location by Newton's method on the extended system.

At a fold of F(x, lam) = 0 the Jacobian F_x is singular and the branch turns
back in lam.  The fold is the regular solution (x, lam, v) of

    F(x, lam) = 0,      F_x(x, lam) v = 0,      c . v = 1

(Moore & Spence, "The calculation of turning points of nonlinear equations",
SIAM J. Numer. Anal. 17(4), 1980; Govaerts, Numerical Methods for
Bifurcations of Dynamical Equilibria, SIAM 2000, ch. 3).  Newton starts from
the branch sample nearest the fold with v the x part of the tangent there
(at the fold the tangent is (v, 0)) and c = v.  The system is written in
the weighted coordinates z = w * (x, lam) of the arclength norm, so volts,
amperes and the parameter have comparable sizes; F_x v is one
forward-mode derivative, and the extended Jacobian (with the second
derivatives of F) comes from automatic differentiation.
"""

from __future__ import annotations

from dataclasses import dataclass

import jax
import jax.numpy as jnp
import numpy as np

SOLVED = 0


def moore_spence(residual, z0, v0, w, args, tol, max_iter):
    """Solve the extended system from (z0, v0); pure JAX (jitted by the engine).

    **Arguments:**

    - `residual`: F(x, lam, args) -> (n,).
    - `z0`: (n + 1,) start point in weighted coordinates; `v0`: (n,) start null
      vector in weighted x coordinates, unit length (also the normalization c).
    - `w`: (n + 1,) weights; `args`: the family's arguments.
    - `tol`: update tolerance (weighted norm); `max_iter`: iteration limit.

    **Returns:** (z, v, status, iterations, residual) with status 0 on
    convergence, 1 on the iteration limit, 2 for a singular extended Jacobian
    or non-finite values.
    """
    n = v0.shape[0]

    def F(z):
        y = z / w
        return residual(y[:n], y[n], args)

    def extended(u):
        z, v = u[: n + 1], u[n + 1:]

        def Fx(zx):
            return F(jnp.concatenate([zx, z[n:]]))

        f, Jv = jax.jvp(Fx, (z[:n],), (v,))
        return jnp.concatenate([f, Jv, (v0 @ v - 1.0)[None]])

    def value_twice(u):
        r = extended(u)
        return r, r

    jac = jax.jacfwd(value_twice, has_aux=True)

    def cond(s):
        return (s["status"] < 0) & (s["k"] < max_iter)

    def body(s):
        M, r = jac(s["u"])
        du = jnp.linalg.solve(M, -r)
        ok = jnp.all(jnp.isfinite(du)) & jnp.all(jnp.isfinite(r))
        done = ok & (jnp.max(jnp.abs(du)) <= tol)
        status = jnp.where(done, SOLVED, jnp.where(ok, -1, 2))
        return {"u": jnp.where(ok, s["u"] + du, s["u"]), "k": s["k"] + 1, "status": status,
                "res": jnp.max(jnp.abs(r[:n]))}

    init = {"u": jnp.concatenate([z0, v0]), "k": jnp.asarray(0), "status": jnp.asarray(-1),
            "res": jnp.asarray(jnp.inf, z0.dtype)}
    out = jax.lax.while_loop(cond, body, init)
    status = jnp.where(out["status"] < 0, 1, out["status"])
    return out["u"][: n + 1], out["u"][n + 1:], status, out["k"], out["res"]


# -- host side: find the folds of a walked branch ------------------------------------


@dataclass(frozen=True)
class FoundFold:
    index: int  # the fold lies between samples index and index + 1
    y: np.ndarray  # (n + 1,): x and lam
    exact: bool  # True: solved from the extended system
    note: str  # why it is only approximate ("" when exact)


def find_folds(walk, solver, opts, label: str) -> list[FoundFold]:
    """Folds between successive samples whose tangents' lam components change sign.

    Each is solved from the extended system started at the nearer sample; if
    that fails (singular extended Jacobian, e.g. at a cusp or a branch point,
    or convergence to a point off the bracket), the point where the branch's
    tangent is vertical is found by a secant search along the stretch instead
    and flagged approximate, with the reason.
    """
    from .segment import unit

    found = []
    pts = walk.points
    if not pts:
        return found
    n = pts[0].y.shape[0] - 1
    for i in range(len(pts) - 1):
        w = walk.ws[i]
        ta = walk.tangent(i)
        tb = unit(pts[i + 1].tangent, w)
        if ta[n] * tb[n] > 0 or (ta[n] == 0 and tb[n] == 0):
            continue
        j, tj = (i, ta) if abs(ta[n]) <= abs(tb[n]) else (i + 1, tb)
        tz = (tj * w)[:n]
        v0 = tz / np.linalg.norm(tz)
        z, _, status, _, _ = jax.device_get(solver.engine.fold(
            pts[j].y * w, v0, w, solver.args,
            opts.update_tol * 1e-2, opts.max_locate_iterations))
        y = np.asarray(z) / w
        near = np.linalg.norm((y - pts[i].y) * w) <= 1.5 * walk.hs[i] + 1e-12
        if int(status) == SOLVED and np.all(np.isfinite(y)) and near:
            found.append(FoundFold(i, y, True, ""))
            continue
        why = ("converged to a point outside the bracketing samples" if int(status) == SOLVED
               else "did not converge" if int(status) == 1 else "was singular")
        pt, ok = walk.locate(solver, i, lambda s, p, w=w: unit(p.tangent, w)[n], ta[n], tb[n],
                             1e-12, opts)
        y_est = pt.y if pt is not None else pts[j].y
        found.append(FoundFold(i, y_est, False, (
            f"fold near {label}={y_est[n]:.6g}: the extended system {why}; the position is "
            f"where the branch tangent turns{'' if ok else ' (search not converged)'}, "
            "not an exact fold")))
    return found
