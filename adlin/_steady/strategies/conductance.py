"""Conductance stepping: a conductance from every node to ground, stepped down to zero."""

from __future__ import annotations

from typing import ClassVar

import equinox as eqx
import jax.numpy as jnp

from ._validate import at_least, ordered, positive
from .base import AbstractStrategy
from .problem import Candidate, Problem, single_attempt
from .ramp import ramp
from .reasons import CONDUCTANCE


class ConductanceStepping(AbstractStrategy):
    """Solve with a conductance g from every node to ground, then step g down to zero.

    Equation i of every node-voltage unknown (unit "V"; all unknowns if the
    model declares none) gains g * x_i.  A large g makes the Jacobian
    diagonally dominant and pulls every node towards ground, so Newton
    converges easily; each later point starts from the previous one.  g falls
    geometrically from `start_conductance` to `end_conductance` and reaches
    exactly zero at the end of the path:
    g(t) = g0 r^t - g0 r t with r = g_end / g0, t from 0 to 1 (our own
    schedule; the geometric decrease is common practice).  The steps in t
    adapt (halved on failure, doubled on success).  It helps most where the
    Jacobian at the guess is singular or nearly so (nodes reached only through
    devices that are off).

    **Fields:**

    - `start_conductance`: g at the start, in siemens.
    - `end_conductance`: g where the geometric schedule ends, in siemens.
    - `first_step`, `min_step`, `max_step`: steps in t (t runs from 0 to 1;
      0.11 is one decade of g for the default range).
    - `max_steps`: continuation steps before giving up.
    - `corrector_iterations`: Newton iterations allowed per point.
    """

    start_conductance: float = eqx.field(static=True, default=1e-3)
    end_conductance: float = eqx.field(static=True, default=1e-12)
    first_step: float = eqx.field(static=True, default=0.1)
    min_step: float = eqx.field(static=True, default=1e-4)
    max_step: float = eqx.field(static=True, default=0.5)
    max_steps: int = eqx.field(static=True, default=200)
    corrector_iterations: int = eqx.field(static=True, default=100)

    name: ClassVar[str] = "conductance"
    code: ClassVar[int] = CONDUCTANCE

    def __check_init__(self):
        o = type(self).__name__
        positive(o, start_conductance=self.start_conductance, end_conductance=self.end_conductance,
                 first_step=self.first_step, min_step=self.min_step, max_step=self.max_step)
        ordered(o, "end_conductance", "start_conductance", self.end_conductance,
                self.start_conductance)
        ordered(o, "min_step", "max_step", self.min_step, self.max_step)
        at_least(o, 1, max_steps=self.max_steps, corrector_iterations=self.corrector_iterations)

    def conductance(self, t):
        """g(t) in siemens: g0 at t = 0, exactly 0 at t = 1."""
        g0 = self.start_conductance
        r = self.end_conductance / g0
        return g0 * r**t - g0 * r * t

    def search(self, problem: Problem, x0, active=True) -> Candidate:
        mask = jnp.asarray(problem.node_mask, dtype=x0.dtype)

        def F(x, t):
            return problem.residual(x) + self.conductance(t) * mask * x

        x, reason, evals, steps, t = ramp(
            problem, F, x0, first_step=self.first_step, min_step=self.min_step,
            max_step=self.max_step, max_steps=self.max_steps,
            corrector_iterations=self.corrector_iterations, active=active)
        g = jnp.where(t >= 0, self.conductance(jnp.maximum(t, 0.0)), self.start_conductance)
        return single_attempt(CONDUCTANCE, x, reason, evals, steps, g, active=active)
