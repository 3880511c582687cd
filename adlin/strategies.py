"""Steady-state strategies for `adlin.steady_state(..., strategy=...)`.

Each is an immutable configuration object (an equinox Module) whose fields are
checked when it is made; pass one, or its name, as `strategy=`:

- `Newton()` ("newton"): damped Newton with junction limiting (the core solver).
- `ConductanceStepping()` ("conductance"): a conductance from every node to
  ground, stepped down to zero.
- `SourceStepping(sources=None)` ("source"): ramp the sources (all inputs, or
  the named inputs and parameters) from zero.
- `PseudoTransient()` ("pseudo-transient"): pseudo-transient continuation
  (Kelley & Keyes, SIAM J. Numer. Anal. 1998).
- `NewtonHomotopy()` ("homotopy"): the Newton homotopy followed by
  pseudo-arclength continuation (Allgower & Georg).
- `Auto(order=..., prefer_stable=True)` ("auto", the default): try them from
  cheap to robust; with concrete values, an unstable state found is replaced
  by the stable state the circuit powers up in, when there is one.

Whichever finds the point, it is polished by Newton and differentiated by the
implicit function theorem, so derivatives do not depend on the strategy.
"""

from ._steady.strategies import (
    AbstractStrategy,
    Auto,
    ConductanceStepping,
    Newton,
    NewtonHomotopy,
    PseudoTransient,
    SourceStepping,
)
from ._steady.strategies.reasons import STRATEGY_NAMES

__all__ = ["AbstractStrategy", "Auto", "ConductanceStepping", "Newton", "NewtonHomotopy",
           "PseudoTransient", "SourceStepping", "STRATEGY_NAMES"]
