"""adlin.linearize: the exact small-signal model at an operating point."""

from __future__ import annotations

from .._errors import ModelError
from .._system import System
from .model import LinearModel


def linearize(system: System, op) -> LinearModel:
    """Small-signal model of `system` at the operating point `op`.

    **Arguments:**

    - `system`: the `adlin.System` that `op` belongs to.
    - `op`: an `OperatingPoint` from `adlin.steady_state` (its x, inputs and
      parameters are used; batched operating points work under `vmap`).

    **Returns:** a `LinearModel` with E, A, B, C, D (exact, by automatic
    differentiation) and the names of states, inputs and outputs.
    """
    from .._compile import compile
    from .._steady.operating_point import OperatingPoint

    if not isinstance(op, OperatingPoint):
        raise ModelError(f"linearize() needs an OperatingPoint from adlin.steady_state, got "
                         f"{type(op).__name__}.")
    if op.unknown_names != system.unknowns or op.param_names != system.param_names:
        raise ModelError(f"this operating point belongs to a model with unknowns "
                         f"{list(op.unknown_names)}, not to {system.name!r}; linearize the System "
                         "it was computed for.")
    return compile(system).linearize(op.x, op.u, op.p)
