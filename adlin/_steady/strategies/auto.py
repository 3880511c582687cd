"""Auto: try strategies from cheap to robust until one converges."""

from __future__ import annotations

from typing import ClassVar

import equinox as eqx
import jax.numpy as jnp

from ..._errors import ParameterError
from .base import AbstractStrategy
from .problem import Candidate, Problem
from .reasons import NOT_TRIED

DEFAULT_ORDER = ("newton", "conductance", "source", "pseudo-transient", "homotopy")


class Auto(AbstractStrategy):
    """Escalate from cheap to robust: each strategy in `order` starts from the
    user's guess and runs only if every earlier one failed.

    With concrete inputs, `adlin.steady_state` runs the chain in Python: plain
    Newton first (the same compiled program as `strategy="newton"`, so the easy
    case costs nothing extra), and a robust strategy is compiled only when it
    is needed.  Traced (inside jit, vmap or grad), the whole chain is one
    pure-JAX program in which a lane already solved skips the later
    strategies; it compiles every strategy in `order`, so it takes longer to
    build than plain Newton (see DEVELOPERS.md for the measured cost).

    **Fields:**

    - `order`: strategies to try, as names ("newton", "conductance", "source",
      "pseudo-transient", "homotopy") or configuration objects.
    - `prefer_stable` (default True): with concrete inputs, check the poles of
      the state found (scipy's QZ on concrete matrices: no compilation, about
      a millisecond) and, if one is in the right half-plane, look for the
      stable state the circuit's own dynamics reach: first a power-up from the
      guess with the inputs ramped from zero, then runs from beside the
      unstable state (pseudo-transient continuation with the real storage
      matrix; rule in `adlin._steady.stability`).  The stable state found is
      returned; if there is none (an oscillator's bias is unstable on
      purpose) the unstable state is returned and `op.history` says so.  A
      stable state found by Newton costs only the check.  Ignored when traced
      (inside jit, vmap or grad), where no search is added.
    """

    order: tuple[AbstractStrategy, ...] = eqx.field(static=True)
    prefer_stable: bool = eqx.field(static=True, default=True)

    name: ClassVar[str] = "auto"
    code: ClassVar[int] = -1

    def __init__(self, order=DEFAULT_ORDER, prefer_stable: bool = True):
        from .registry import resolve

        if isinstance(order, str | AbstractStrategy):
            order = (order,)
        resolved = tuple(resolve(s, allow_auto=False) for s in order)
        if not resolved:
            raise ParameterError("Auto(order=...) needs at least one strategy, e.g. "
                                 f"{DEFAULT_ORDER}.")
        self.order = resolved
        self.prefer_stable = bool(prefer_stable)

    def search(self, problem: Problem, x0, active=True) -> Candidate:
        out = None
        done = jnp.asarray(False)
        evals = jnp.asarray(0)
        for strategy in self.order:
            cand = strategy.search(problem, x0, active & ~done)
            evals = evals + jnp.where(active & ~done, cand.evaluations, 0)
            if out is None:
                out = cand
            else:
                take = ~done & (cand.reason == 0)
                tried = cand.attempts != NOT_TRIED
                merged = {k: jnp.where(tried, getattr(cand, k), getattr(out, k))
                          for k in ("attempts", "attempt_evaluations", "attempt_steps",
                                    "attempt_progress")}
                fields = {k: jnp.where(take, getattr(cand, k), getattr(out, k))
                          for k in ("x", "reason", "steps", "progress", "code", "polished",
                                    "jacobian")}
                out = Candidate(evaluations=evals, **fields, **merged)
            done = done | (cand.reason == 0)
        return eqx.tree_at(lambda c: c.evaluations, out, evals)
