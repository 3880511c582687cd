"""`HardCase`: one circuit of the hard-to-start corpus and what its intended state is."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

from ..._system import System

#: How plain Newton from the all-zero guess behaves on a case (measured, see the
#: corpus test): it stops without converging, it converges to a state that is not
#: the intended one, or it converges to the intended state.
NEWTON_FAILS = "fails"
NEWTON_OTHER_STATE = "other state"
NEWTON_CONVERGES = "converges"
NEWTON_OUTCOMES = (NEWTON_FAILS, NEWTON_OTHER_STATE, NEWTON_CONVERGES)


@dataclass(frozen=True)
class Expected:
    """A hand-calculated value of one quantity of the intended state.

    - `value`: the hand result (SI units).
    - `rtol`, `atol`: how far the solved value may be from it; the hand
      formula is first order, so the tolerance is the size of what it leaves out.
    - `source`: the formula and where it comes from.
    """

    value: float
    rtol: float
    atol: float = 0.0
    source: str = ""

    def holds(self, solved: float) -> bool:
        return math.isfinite(solved) and abs(solved - self.value) <= self.atol + self.rtol * abs(
            self.value
        )


@dataclass(frozen=True)
class HardCase:
    """One entry of the corpus.

    - `name`, `description`: a short identifier and one line.
    - `build`: returns the `adlin.System` (cached by the module).
    - `inputs`, `params`: values to solve at (overrides of the defaults).
    - `newton_from_zero`: one of `NEWTON_OUTCOMES`, as measured.
    - `why`: why Newton from zero fails or is ambiguous here.
    - `intended`: the intended steady state, in words.
    - `predicate`: ``predicate(op) -> bool``, the operating region of the
      intended state (which devices are on, which rail a node sits at).
    - `hand`: ``hand() -> {quantity: Expected}``, the main quantities by hand.
    - `reference_guess`: a hand-derived point near the intended state, for an
      outside solver (scipy) to start from.
    - `strategy`: the strategy argument for `adlin.steady_state` ("auto", or an
      `Auto` with options).
    - `slow`: True when building and solving takes long (several BJTs).
    """

    name: str
    description: str
    build: Callable[[], System]
    newton_from_zero: str
    why: str
    intended: str
    predicate: Callable[[Any], bool]
    hand: Callable[[], Mapping[str, Expected]]
    reference_guess: Mapping[str, float]
    inputs: Mapping[str, float] = field(default_factory=dict)
    params: Mapping[str, float] = field(default_factory=dict)
    strategy: Any = "auto"
    slow: bool = False

    def __post_init__(self):
        if self.newton_from_zero not in NEWTON_OUTCOMES:
            raise ValueError(f"newton_from_zero must be one of {NEWTON_OUTCOMES}, "
                             f"got {self.newton_from_zero!r}")

    def misses(self, op) -> list[str]:
        """Why `op` is not the intended state (an empty list when it is).

        **Arguments:** `op`: an `OperatingPoint` of `build()`.

        **Returns:** one sentence per failed check.
        """
        out = []
        if not bool(op.converged):
            out.append(f"not converged ({op.message})")
            return out
        if not self.predicate(op):
            out.append("outside the intended operating region")
        for name, expected in self.hand().items():
            solved = float(op[name])
            if not expected.holds(solved):
                out.append(f"{name} = {solved:.6g}, hand value {expected.value:.6g} "
                           f"(rtol {expected.rtol:g}, atol {expected.atol:g})")
        return out

    def is_intended(self, op) -> bool:
        """True when `op` converged to the intended state."""
        return not self.misses(op)
