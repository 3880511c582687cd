"""Source stepping: ramp the declared sources from zero to their values."""

from __future__ import annotations

from typing import ClassVar

import equinox as eqx
import jax.numpy as jnp
import numpy as np

from ..._errors import ParameterError, did_you_mean
from ._validate import at_least, ordered, positive
from .base import AbstractStrategy
from .problem import Candidate, Problem, single_attempt
from .ramp import ramp
from .reasons import SOURCE


class SourceStepping(AbstractStrategy):
    """Scale the sources by s and raise s from 0 to 1.

    With every source at zero most circuits have an obvious solution (all
    nodes near ground); each later point starts from the previous one, so
    Newton always starts close.  The scale steps adapt: halved when Newton
    fails or when the step breaks one of the two branch-keeping controls below,
    doubled when it succeeds; a step below `min_step` stops the search (step
    size underflow).

    The branch-keeping controls (see `ramp`) make it follow the branch that
    starts at zero sources, i.e. the state the circuit reaches when its
    supplies ramp up slowly, instead of jumping to another solution that
    Newton happens to reach from the previous point (a latch's metastable
    saddle): no node voltage moves by more than `max_change` times the largest
    node voltage (extrapolated to full sources) in one step, and the sign of
    the Jacobian determinant, which changes only at a fold or a bifurcation
    point, must stay that of the start.  Source stepping is the classical embedding of
    circuit analysis (Allgower & Georg, Numerical Continuation Methods, SIAM
    2003, ch. 1, for the embedding idea); it cannot pass a fold of the
    solution path (see `NewtonHomotopy`).

    **Fields:**

    - `sources`: names of inputs and/or parameters to scale; None scales all
      inputs.  Checked against the model when the solve is built.
    - `first_step`, `min_step`, `max_step`: steps in the scale s (0 to 1).
    - `max_steps`: continuation steps before giving up.
    - `corrector_iterations`: Newton iterations allowed per point.
    - `max_change`: largest change of a node voltage in one step, relative to
      the largest node voltage extrapolated to full sources (None: no bound).
    - `keep_jacobian_sign`: reject steps across which det(df/dx) changes sign.
    """

    sources: tuple[str, ...] | None = eqx.field(static=True, default=None)
    first_step: float = eqx.field(static=True, default=0.1)
    min_step: float = eqx.field(static=True, default=1e-5)
    max_step: float = eqx.field(static=True, default=0.5)
    max_steps: int = eqx.field(static=True, default=200)
    corrector_iterations: int = eqx.field(static=True, default=40)
    max_change: float | None = eqx.field(static=True, default=0.25)
    keep_jacobian_sign: bool = eqx.field(static=True, default=True)

    name: ClassVar[str] = "source"
    code: ClassVar[int] = SOURCE

    def __init__(self, sources=None, *, first_step=0.1, min_step=1e-5, max_step=0.5,
                 max_steps=200, corrector_iterations=40, max_change=0.25,
                 keep_jacobian_sign=True):
        if isinstance(sources, str):
            sources = (sources,)
        if sources is not None:
            sources = tuple(sources)
            bad = [s for s in sources if not isinstance(s, str)]
            if bad or not sources:
                raise ParameterError("SourceStepping(sources=...) takes names of inputs or "
                                     f"parameters (or None for all inputs), got {sources!r}.")
        self.sources = sources
        self.first_step = first_step
        self.min_step = min_step
        self.max_step = max_step
        self.max_steps = max_steps
        self.corrector_iterations = corrector_iterations
        self.max_change = max_change
        self.keep_jacobian_sign = bool(keep_jacobian_sign)

    def __check_init__(self):
        o = type(self).__name__
        positive(o, first_step=self.first_step, min_step=self.min_step, max_step=self.max_step)
        ordered(o, "min_step", "max_step", self.min_step, self.max_step)
        at_least(o, 1, max_steps=self.max_steps, corrector_iterations=self.corrector_iterations)
        if self.max_change is not None:
            positive(o, max_change=self.max_change)

    def masks(self, input_names, param_names):
        """Boolean masks (inputs, params) of the scaled sources.

        **Raises:** `ParameterError` naming a source that is neither an input
        nor a parameter, with the closest valid names.
        """
        if self.sources is None:
            return np.ones(len(input_names), bool), np.zeros(len(param_names), bool)
        for s in self.sources:
            if s not in input_names and s not in param_names:
                raise ParameterError(
                    f"SourceStepping source {s!r} is neither an input nor a parameter of the "
                    f"model: {did_you_mean(s, tuple(input_names) + tuple(param_names))}.")
        return (np.array([k in self.sources for k in input_names], bool),
                np.array([k in self.sources for k in param_names], bool))

    def search(self, problem: Problem, x0, active=True) -> Candidate:
        in_mask, par_mask = self.masks(problem.input_names, problem.param_names)
        u, p = problem.u, problem.p

        def F(x, s):
            us = jnp.where(jnp.asarray(in_mask), s * u, u)
            ps = jnp.where(jnp.asarray(par_mask), s * p, p)
            return problem.f(x, us, ps)

        x, reason, evals, steps, s = ramp(
            problem, F, x0, first_step=self.first_step, min_step=self.min_step,
            max_step=self.max_step, max_steps=self.max_steps,
            corrector_iterations=self.corrector_iterations, active=active,
            max_change=self.max_change, keep_sign=self.keep_jacobian_sign)
        return single_attempt(SOURCE, x, reason, evals, steps, jnp.maximum(s, 0.0), active=active)
