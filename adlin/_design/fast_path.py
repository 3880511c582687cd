"""The fast path of batched runs: fixed-order sparse solves planned at the nominal point.

Every sample of a sweep or Monte Carlo run solves Newton's linear systems and
the two blocks of the algebraic reduction (A22, E11) for matrices that differ
from the nominal ones only in values.  `plan_at` factors the nominal matrices
once (`adlin._sparse_lu.SparseLU`: row order and pattern), and `solve_point`
runs one sample with those solvers.  A solve whose self-check fails returns
NaN, so the sample ends unconverged or non-finite; the batch engine runs such
samples again with the general solvers, so the fast path never changes what
a run can solve, only how fast.
"""

from __future__ import annotations

from dataclasses import dataclass

import jax.numpy as jnp
import numpy as np

from .._linear.model import sorted_eigvals
from .._linear.reduce import reduce_descriptor
from .._sparse_lu import SparseLU


def _solver(plan: SparseLU | None):
    return jnp.linalg.solve if plan is None else plan.solve


@dataclass(frozen=True)
class FastPlans:
    """Sparse LU plans of one model at its nominal point (None: general solver).

    - `jacobian`: for Newton's steps (df/dx).
    - `a22`, `e11`: for the algebraic block and the storage block of the reduction.
    """

    jacobian: SparseLU | None
    a22: SparseLU | None
    e11: SparseLU | None

    def solve_point(self, compiled, u, p, x0):
        """(OperatingPoint, LinearModel, poles) of one sample, Newton from `x0`.

        Pure JAX (use under jit and vmap).  The poles come from the reduced
        matrix built with the planned solvers; the LinearModel is the usual one
        (for quantities and targets).
        """
        op = compiled._solve(u, p, x0, linear_solve=_solver(self.jacobian))
        lin = compiled.linearize(op.x, u, p)
        r = lin.n_dynamic
        if r == 0:
            return op, lin, jnp.zeros((0,), jnp.complex128)
        Ar = reduce_descriptor(lin.E, lin.A, lin.B, lin.C, lin.D, lin.left, lin.right, r,
                               solve_a22=_solver(self.a22), solve_e11=_solver(self.e11))[0]
        return op, lin, sorted_eigvals(Ar)


def plan_at(compiled, x, u, p) -> FastPlans:
    """Plans from the model's matrices at the nominal point (x, u, p)."""
    _, E, A, *_ = (np.asarray(m) for m in compiled.local(x, u, p))
    left, right = np.asarray(compiled.structure.left), np.asarray(compiled.structure.right)
    r = compiled.structure.n_dynamic
    Ep, Ap = left @ E @ right, left @ A @ right
    n = A.shape[0]
    return FastPlans(
        jacobian=SparseLU.from_matrix(-A),
        a22=SparseLU.from_matrix(Ap[r:, r:]) if r < n else None,
        e11=SparseLU.from_matrix(Ep[:r, :r]) if r else None,
    )
