"""The fast path of batched runs: fixed-order sparse solves planned at the nominal point.

Every sample of a sweep or Monte Carlo run solves Newton's linear systems and
the two blocks of the algebraic reduction (A22, E11) for matrices that differ
from the nominal ones only in values.  `plan_at` factors the nominal matrices
once (`adlin._sparse_lu.SparseLU`: row order and pattern) and keeps the
nominal poles, and `solve_point` runs one sample with those solvers, its first
Newton iterations as a scan (`HEAD_STEPS`), and its poles found from the
nominal ones (`adlin._linear.nearby_eigvals`).  A solve whose self-check fails
returns NaN, and so does a pole search that does not converge or fails its
check, so the sample ends unconverged or non-finite; the batch engine runs
such samples again with the general solvers, so the fast path never changes
what a run can solve, only how fast.
"""

from __future__ import annotations

import dataclasses
import functools
from dataclasses import dataclass

import jax.numpy as jnp
import numpy as np

from .._linear import nearby_eigvals
from .._linear.model import sorted_eigvals
from .._linear.reduce import reduce_descriptor
from .._sparse_lu import SparseLU

# Newton iterations of a sample run as a scan before the while loop: from the
# nominal point, samples within tolerance spreads converge in 2-3 steps (the
# demo regulator with +-20-30 % parts: 3 steps for 85 % of samples), and a
# scan iteration is cheaper than a loop iteration under vmap (DEVELOPERS.md).
HEAD_STEPS = 3


def _solver(plan: SparseLU | None):
    return jnp.linalg.solve if plan is None else plan.solve


@dataclass(frozen=True)
class FastPlans:
    """Sparse LU plans of one model at its nominal point (None: general solver).

    - `jacobian`: for Newton's steps (df/dx).
    - `a22`, `e11`: for the algebraic block and the storage block of the reduction.
    - `poles`: the nominal reduced matrix's `NearbyPlan`, from which
      `adlin._linear.nearby_eigvals` finds each sample's poles (None: LAPACK's
      eigenvalue routine).
    """

    jacobian: SparseLU | None
    a22: SparseLU | None
    e11: SparseLU | None
    poles: nearby_eigvals.NearbyPlan | None = None

    def solve_point(self, compiled, u, p, x0):
        """(OperatingPoint, LinearModel, poles) of one sample, Newton from `x0`.

        Pure JAX (use under jit and vmap).  The poles come from the reduced
        matrix built with the planned solvers; the LinearModel is the usual one
        (for quantities and targets).
        """
        # Newton's steps take the solver's cheaper structural self-check
        newton_solve = (jnp.linalg.solve if self.jacobian is None
                        else functools.partial(self.jacobian.solve, check="structure"))
        op = compiled._solve(u, p, x0, linear_solve=newton_solve, head_steps=HEAD_STEPS)
        lin = compiled.linearize(op.x, u, p)
        r = lin.n_dynamic
        if r == 0:
            return op, lin, jnp.zeros((0,), jnp.complex128)
        Ar = reduce_descriptor(lin.E, lin.A, lin.B, lin.C, lin.D, lin.left, lin.right, r,
                               solve_a22=_solver(self.a22), solve_e11=_solver(self.e11),
                               state_only=True)[0]
        if self.poles is None:
            return op, lin, sorted_eigvals(Ar)
        return op, lin, nearby_eigvals.eigvals_near(Ar, self.poles)[0]


def plan_at(compiled, x, u, p) -> FastPlans:
    """Plans from the model's matrices at the nominal point (x, u, p)."""
    _, E, A, *_ = (np.asarray(m) for m in compiled.local(x, u, p))
    left, right = np.asarray(compiled.structure.left), np.asarray(compiled.structure.right)
    r = compiled.structure.n_dynamic
    Ep, Ap = left @ E @ right, left @ A @ right
    n = A.shape[0]
    plans = FastPlans(
        jacobian=SparseLU.from_matrix(-A),
        a22=SparseLU.from_matrix(Ap[r:, r:]) if r < n else None,
        e11=SparseLU.from_matrix(Ep[:r, :r]) if r else None,
    )
    if not r:
        return plans
    # the reduced matrix of `reduce_descriptor`, on the host: in numpy this
    # takes microseconds, where the jnp version run eagerly took 8 ms a call
    As = Ap[:r, :r]
    if r < n:
        As = As - Ap[:r, r:] @ np.linalg.solve(Ap[r:, r:], Ap[r:, :r])
    Ar = np.linalg.solve(Ep[:r, :r], As)
    return dataclasses.replace(plans, poles=nearby_eigvals.NearbyPlan.at(Ar))
