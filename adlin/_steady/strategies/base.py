"""AbstractStrategy: what every steady-state strategy provides."""

from __future__ import annotations

import abc
from typing import ClassVar

import equinox as eqx

from .problem import Candidate, Problem


class AbstractStrategy(eqx.Module):
    """A way to find x with f(x, u, p) = 0, as an immutable configuration object.

    Concrete strategies are final; each implements `search`, a pure-JAX
    function (lax loops, per-lane status) that runs under jit and vmap.
    Whatever path a strategy takes, `adlin.steady_state` polishes its end
    point with damped Newton and differentiates the result by the implicit
    function theorem, so derivatives do not depend on the strategy.
    """

    name: ClassVar[str]
    code: ClassVar[int]

    @abc.abstractmethod
    def search(self, problem: Problem, x0, active=True) -> Candidate:
        """Search from x0.

        **Arguments:**

        - `problem`: the `Problem` (residual, masks, junctions, options).
        - `x0`: the start point (n,).
        - `active`: a (possibly traced) bool; False makes the search a no-op
          for that lane (its loops run no iteration), used by chains under vmap.

        **Returns:** a `Candidate`.
        """
