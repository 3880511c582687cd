"""The jitted programs of the continuation engine, built once per family.

`correct` is Newton's method on the bordered system

    F(x, lam) = 0,      c . z = d,          z = w * (x, lam)

where w are the weights of the arclength norm (see `arclength.py`) and the
linear constraint is the pseudo-arclength equation (c the unit tangent, d the
step) or lam = const (c the lam axis).  With the same factorization it
solves [F_z; c] t = e, whose solution spans the null space of F_z: the unit
tangent at the new point (Keller 1977; Allgower & Georg, Numerical
Continuation Methods, Springer 1990, sec. 2.1-2.2), oriented along the
previous tangent.  It also returns the poles and outputs of the family
there.  One program does all of it, so the model is traced into a single
compilation.
"""

from __future__ import annotations

import functools

import equinox as eqx
import jax
import jax.numpy as jnp

from .family import FunctionFamily, SystemSweep
from .fold import moore_spence

# corrector status codes
CONVERGED = 0
NO_CONVERGENCE = 1
SINGULAR = 2
NOT_FINITE = 3

STATUS_CAUSES = {
    NO_CONVERGENCE: "the corrector did not converge",
    SINGULAR: "the bordered Jacobian was singular",
    NOT_FINITE: "the model returned non-finite values",
}


class Corrected(eqx.Module):
    """What one corrector run returns (arrays; host code reads them)."""

    y: jax.Array  # (n + 1,): x and lam
    tangent: jax.Array  # (n + 1,), unit in the weighted norm, in (x, lam) coordinates
    status: jax.Array
    iterations: jax.Array
    residual: jax.Array  # max |F| at the last iterate
    poles: jax.Array  # (r,) complex
    outputs: jax.Array  # (o,)


class Engine:
    """Jitted corrector and fold solver for one family (cached per family)."""

    def __init__(self, family: FunctionFamily | SystemSweep):
        self.family = family
        self.correct = jax.jit(self._correct)
        self.fold = jax.jit(functools.partial(moore_spence, family.residual))

    def _correct(self, y0, w, c, d, t_prev, args, tol, max_iter) -> Corrected:
        """Newton on [F; c.z - d] from y0; tol = (rtol, ftol, update_tol)."""
        fam = self.family
        n = y0.shape[0] - 1
        rtol, ftol, utol = tol

        def value_twice(z):
            y = z / w
            f = fam.residual(y[:n], y[n], args)
            return f, f

        jac = jax.jacfwd(value_twice, has_aux=True)  # the model is traced once, here

        def cond(s):
            return (s["status"] < 0) & (s["k"] < max_iter)

        e = jnp.zeros((n + 1,), y0.dtype).at[n].set(1.0)

        def body(s):
            z = s["z"]
            J, f = jac(z)
            M = jnp.concatenate([J, c[None, :]], axis=0)
            r = jnp.concatenate([f, (c @ z - d)[None]])
            # one factorization gives the Newton update and a tangent: [J; c] t = e
            # spans the null space of J (the branch direction at z)
            sol = jnp.linalg.solve(M, jnp.stack([-r, e], axis=1))
            dz, tz = sol[:, 0], sol[:, 1]
            finite = jnp.all(jnp.isfinite(f)) & jnp.all(jnp.isfinite(J))
            solved = jnp.all(jnp.isfinite(sol))
            # residual tolerance per equation, against the size of its terms
            # (|J_z| |z| = |dF/dy| |y|; the update tolerance stands in for zeros)
            row = jnp.abs(J) @ (jnp.abs(z) + utol)
            res_ok = jnp.all(jnp.abs(f) <= rtol * row + ftol)
            upd_ok = jnp.max(jnp.abs(dz)) <= utol
            converged = finite & solved & res_ok & upd_ok
            status = jnp.where(converged, CONVERGED,
                               jnp.where(~finite, NOT_FINITE, jnp.where(~solved, SINGULAR, -1)))
            return {
                "z": jnp.where(finite & solved, z + dz, z),
                "t": tz,
                "res": jnp.max(jnp.abs(f)),
                "k": s["k"] + 1,
                "status": status,
            }

        init = {
            "z": y0 * w,
            "t": jnp.zeros((n + 1,), y0.dtype),
            "res": jnp.asarray(jnp.inf, y0.dtype),
            "k": jnp.asarray(0),
            "status": jnp.asarray(-1),
        }
        out = jax.lax.while_loop(cond, body, init)
        status = jnp.where(out["status"] < 0, NO_CONVERGENCE, out["status"])
        z = out["z"]
        y = z / w
        # the tangent at the last iterate (one update away from y), unit length,
        # oriented along the previous tangent
        tz = out["t"] / jnp.linalg.norm(out["t"])
        tz = jnp.where(tz @ (t_prev * w) < 0, -tz, tz)
        bad = ~jnp.all(jnp.isfinite(tz))
        status = jnp.where((status == CONVERGED) & bad, SINGULAR, status)
        if fam.poles is not None:
            poles = fam.poles(y[:n], y[n], args).astype(jnp.complex128)
        else:
            poles = jnp.zeros((0,), jnp.complex128)
        if fam.outputs is not None:
            outputs = jnp.atleast_1d(fam.outputs(y[:n], y[n], args))
        else:
            outputs = jnp.zeros((0,), y0.dtype)
        return Corrected(y=y, tangent=tz / w, status=status, iterations=out["k"],
                         residual=out["res"], poles=poles, outputs=outputs)


@functools.lru_cache(maxsize=32)
def engine_for(family: FunctionFamily | SystemSweep) -> Engine:
    """The engine of a family, built once (families compare by their functions)."""
    return Engine(family)
