"""Newton: the core damped Newton solver as a strategy."""

from __future__ import annotations

from typing import ClassVar

from ..newton import newton_solve
from .base import AbstractStrategy
from .problem import Candidate, Problem, single_attempt
from .reasons import NEWTON


class Newton(AbstractStrategy):
    """Damped Newton with junction-voltage limiting and an Armijo line search.

    The solver of `adlin._steady.newton` (Dennis & Schnabel, Numerical Methods
    for Unconstrained Optimization and Nonlinear Equations, SIAM 1996,
    sec. 6.3, for the line search).  Fast and exact near a solution; from a
    poor start on a strongly nonlinear circuit it may stall, which is when the
    other strategies help.  Its settings are the `NewtonOptions` passed to
    `steady_state(..., options=...)`.
    """

    name: ClassVar[str] = "newton"
    code: ClassVar[int] = NEWTON

    def search(self, problem: Problem, x0, active=True) -> Candidate:
        res = newton_solve(problem.residual, x0, problem.junctions, problem.options, active)
        return single_attempt(NEWTON, res.x, res.status, res.evaluations, res.iterations,
                              progress=1.0, polished=True, jacobian=res.jacobian, active=active)
