"""The model d/dt q(x) + f(x, u) = 0 as an ODE on its dynamic coordinates.

diffrax integrates ODEs only, so the index-1 descriptor model is turned into
one inside the vector field (the "state-space form" approach to index-1 DAEs:
Brenan, Campbell & Petzold, Numerical Solution of Initial-Value Problems in
Differential-Algebraic Equations, SIAM 1996, sec. 2.2 and 4.1 (from memory);
Hairer & Wanner, Solving Ordinary Differential Equations II, 2nd ed., 1996,
sec. VI.1, "state space form").

With the constant bases of `adlin._structure` (x = R z, L E R block diagonal)
the state is z1, the first r coordinates of z = R^-1 x.  Given z1, the inputs
and parameters:

1. the algebraic coordinates z2 solve  N_l^T f(R [z1; z2], u, p) = 0  by damped
   Newton with junction limiting (`adlin._steady.newton`), written on the full
   x with the linear constraint  (R^-1 x)[:r] = z1;
2. a last Newton update with a stop-gradient Jacobian makes x exactly
   differentiable in (z1, u, p) by the implicit function theorem (the same
   device as `CompiledSystem._finish`), so the stiff solver's Jacobian and
   parameter gradients through the transient are exact;
3. dz1/dt = -E11(x)^-1 S_r^T f(x, u, p), with E11 = S_r^T dq/dx S_d.

Why the dynamic coordinates and not the charges q as the ODE state: error
control then works in the unknowns' own units (volts, amperes) where a
default absolute tolerance means something, and the Newton solve covers only
the algebraic unknowns.  The price is that charge is conserved only to the
integration tolerance, not exactly; with nonlinear capacitances at the
default rtol that difference is far below what the trust analyses resolve
(the test against a hand-written reference checks this).
"""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np

from .._steady.newton import NewtonOptions, newton_solve

# Tighter than any transient tolerance: the final implicit-function step then
# leaves an algebraic error far below the integrator's.
ALGEBRAIC_NEWTON = NewtonOptions(rtol=1e-10, atol=1e-13, ftol=1e-16, max_iterations=100)


class ReducedField:
    """The ODE dz1/dt = rate(z1, u, p) of a compiled model (plain Python, built once).

    **Arguments:**

    - `compiled`: an `adlin.CompiledSystem` (its structure gives the bases).
    """

    def __init__(self, compiled):
        s = compiled.structure
        n = compiled.system.n
        r = s.n_dynamic
        R = np.asarray(s.right, dtype=float)
        L = np.asarray(s.left, dtype=float)
        Rinv = np.linalg.inv(R)
        self.system = compiled.system
        self.junctions = compiled.junctions
        # element-by-element Jacobians for circuits (`adlin._derivatives`): the
        # algebraic Newton's Jacobian without 15 forward tangents through every
        # element, which also keeps the transient program smaller to compile
        self.derivatives = compiled.derivatives
        self.n = n
        self.r = r
        self.R1 = R[:, :r]
        self.R2 = R[:, r:]
        self.P1 = Rinv[:r]  # z1 = P1 x
        self.P2 = Rinv[r:]
        self.L1 = L[:r]
        self.L2 = L[r:]

    # -- coordinates ---------------------------------------------------------
    def state(self, x):
        """z1 of a full vector of unknowns."""
        return jnp.asarray(self.P1) @ x

    def complete(self, z1, u, p, x_ref):
        """The unknowns x consistent with z1 at inputs u; returns (x, status).

        `x_ref` (e.g. the operating point) supplies the start of the algebraic
        Newton solve; status 0 means it converged.
        """
        if self.r == self.n:
            return jnp.asarray(self.R1) @ z1, jnp.asarray(0)
        s = self.system
        P1 = jnp.asarray(self.P1)
        L2 = jnp.asarray(self.L2)

        def residual(x, z1_, u_, p_):
            return jnp.concatenate([P1 @ x - z1_, L2 @ s.f(x, u_, p_)])

        zc, uc, pc = (jax.lax.stop_gradient(v) for v in (z1, u, p))
        ref = jax.lax.stop_gradient(x_ref)
        guess = ref + jnp.asarray(self.R1) @ (zc - P1 @ ref)

        def value_and_jacobian(x):
            f, J = self.derivatives.current_x(x, uc, pc)
            return (jnp.concatenate([P1 @ x - zc, L2 @ f]),
                    jnp.concatenate([P1, L2 @ J], axis=0))

        res = newton_solve(lambda x: residual(x, zc, uc, pc), guess, self.junctions,
                           ALGEBRAIC_NEWTON, value_and_jacobian=value_and_jacobian)
        xs = jax.lax.stop_gradient(res.x)
        J = jax.lax.stop_gradient(res.jacobian)
        # the last Newton update, differentiable in (z1, u, p): dx = -J^-1 dF
        x = xs - jnp.linalg.solve(J, residual(xs, z1, u, p))
        ok = res.status == 0
        return jnp.where(ok, x, jnp.nan), res.status

    def rate(self, x, u, p):
        """dz1/dt at a consistent x."""
        s = self.system
        if self.r == 0:
            return jnp.zeros((0,), dtype=x.dtype)
        R1, R2, L1 = jnp.asarray(self.R1), jnp.asarray(self.R2), jnp.asarray(self.L1)
        z1 = jnp.asarray(self.P1) @ x
        z2 = jnp.asarray(self.P2) @ x
        # E11 = S_r^T dq/dx S_d: r forward derivatives of q along the dynamic directions
        E11 = jax.jacfwd(lambda z: L1 @ s.q(R1 @ z + R2 @ z2, p))(z1)
        return jnp.linalg.solve(E11, -(L1 @ s.f(x, u, p)))

    def vector_field(self, z1, u, p, x_ref):
        """dz1/dt at state z1; NaN where the algebraic solve fails (the step is rejected)."""
        x, _ = self.complete(z1, u, p, x_ref)
        return self.rate(x, u, p)
