"""The final Newton update, differentiable by the implicit function theorem.

At a converged iterate x* with Jacobian J = df/dx(x*), the solver has already
computed the Newton update dx = -J^-1 f(x*, u, p); the steady state is
x = x* + dx.  Its derivative with respect to (u, p) is the implicit-function
one, dx/dp = -J^-1 df/dp, with x* and J held constant (Griewank & Walther,
Evaluating Derivatives, 2nd ed., SIAM 2008, ch. 15 on implicit functions).

`newton_update` returns x* + dx without solving again, and gives that
derivative through a custom JVP rule; `f_star` = f(x*, u, p) enters only the
derivative, so a program that needs only values does not evaluate it.
"""

from __future__ import annotations

import jax
import jax.numpy as jnp


@jax.custom_jvp
def newton_update(x_star, step, jacobian, f_star):
    """x* + step, where step = -J^-1 f_star was computed by the solver.

    **Arguments:**

    - `x_star`: the converged iterate (treated as a constant).
    - `step`: the solver's last Newton update at `x_star` (a constant).
    - `jacobian`: df/dx at `x_star` (a constant).
    - `f_star`: f(x*, u, p) as a function of the inputs and parameters; only
      its derivative is used.

    **Returns:** the steady state, shape (n,).
    """
    del jacobian, f_star
    return x_star + step


@newton_update.defjvp
def _newton_update_jvp(primals, tangents):
    x_star, step, jacobian, _ = primals
    d_f = tangents[3]
    return x_star + step, -jnp.linalg.solve(jacobian, d_f)
