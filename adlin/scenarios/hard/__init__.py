"""A corpus of hard-to-start circuits: where Newton from a zero guess fails or is ambiguous.

Each module builds one invented circuit with plausible device values and
describes, as a `HardCase`, why a steady-state solver starting from all-zero
voltages has trouble, and what the intended steady state is (an operating
region and hand-calculated values with their sources).  `CORPUS` lists them
in a fixed order; `tests/test_hard_corpus.py` checks that
``adlin.steady_state(..., strategy=case.strategy)`` finds each intended
state, and ``benchmarks/steady_state_strategies.py`` compares the strategies
on them.

    from adlin.scenarios.hard import CORPUS
    for case in CORPUS:
        op = adlin.steady_state(case.build(), case.inputs, case.params,
                                strategy=case.strategy)
        assert case.is_intended(op), case.misses(op)
"""

from . import (
    diode_stack,
    feedback_amp,
    latch,
    mirror,
    ptat_cell,
    put_oscillator,
    regulator,
    schmitt,
    tunnel_oscillator,
)
from ._case import NEWTON_CONVERGES as NEWTON_CONVERGES
from ._case import NEWTON_FAILS as NEWTON_FAILS
from ._case import NEWTON_OTHER_STATE as NEWTON_OTHER_STATE
from ._case import Expected as Expected
from ._case import HardCase as HardCase

CORPUS: tuple[HardCase, ...] = (
    latch.CASE,
    feedback_amp.CASE,
    schmitt.CASE,
    diode_stack.CASE,
    mirror.CASE,
    ptat_cell.CASE,
    put_oscillator.CASE,
    tunnel_oscillator.CASE,
    regulator.CASE,
)


def case(name: str) -> HardCase:
    """The corpus entry called `name`.

    **Raises:** `ParameterError` naming the valid names.
    """
    from ..._errors import ParameterError, did_you_mean

    for entry in CORPUS:
        if entry.name == name:
            return entry
    raise ParameterError(f"no hard case {name!r}: "
                         f"{did_you_mean(name, tuple(c.name for c in CORPUS))}.")
