"""Reason codes of steady-state strategies, and the sentences that explain them.

Codes 0-3 are the damped Newton solver's own status codes (`adlin._steady.newton`),
so an `OperatingPoint.status` from plain Newton keeps its meaning.  A search
also reports a `progress` number (how far along its path it got: a
conductance, a source scale, a pseudo-time step, a homotopy parameter), which
the sentences quote.
"""

from __future__ import annotations

from ..newton import MAX_ITERATIONS, NOT_FINITE, SINGULAR_JACOBIAN, SUCCESS

NOT_TRIED = -1
CONVERGED = SUCCESS  # 0
NO_CONVERGENCE = MAX_ITERATIONS  # 1: step or iteration limit reached
SINGULAR = SINGULAR_JACOBIAN  # 2: Jacobian or extended (bordered) system singular
NON_FINITE = NOT_FINITE  # 3: the model returned inf or NaN where it had to be used
STEP_UNDERFLOW = 4  # the adaptive step fell below its floor
START_FAILED = 5  # no solution at the start of the path
TURNED_BACK = 6  # the homotopy path ran back past its start
POLISH_FAILED = 7  # the search ended, but Newton from its end point did not converge
NO_STABLE_STATE = 8  # Auto(prefer_stable=True): the circuit's dynamics reached no stable state

# Strategy codes: the slot of each strategy in `OperatingPoint.attempts`.
NEWTON, CONDUCTANCE, SOURCE, PSEUDO_TRANSIENT, HOMOTOPY = range(5)
STRATEGY_NAMES = ("newton", "conductance", "source", "pseudo-transient", "homotopy")
N_STRATEGIES = len(STRATEGY_NAMES)

# What the progress number of each strategy means, for messages.
_PROGRESS = {
    NEWTON: ("Newton step fraction", ""),
    CONDUCTANCE: ("conductance to ground", " S"),
    SOURCE: ("source scale", ""),
    PSEUDO_TRANSIENT: ("pseudo-time step", ""),
    HOMOTOPY: ("homotopy parameter", ""),
}


def describe(strategy: int, reason: int, progress: float = float("nan"), steps: int = 0) -> str:
    """One readable clause for a strategy's outcome.

    **Arguments:**

    - `strategy`: a strategy code (`NEWTON` ... `HOMOTOPY`).
    - `reason`: a reason code from this module.
    - `progress`: how far along its path the strategy got (quoted where useful).
    - `steps`: the number of steps or iterations it took.

    **Returns:** e.g. "step size underflow at source scale 0.37".
    """
    label, unit = _PROGRESS.get(strategy, ("progress", ""))
    at = f"{label} {progress:.3g}{unit}"
    unit_of_work = "iterations" if strategy == NEWTON else "steps"
    return {
        NOT_TRIED: "not tried",
        CONVERGED: f"converged after {steps} {unit_of_work}",
        NO_CONVERGENCE: (f"no convergence after {steps} {unit_of_work}" if strategy == NEWTON
                         else f"no convergence after {steps} {unit_of_work} (reached {at})"),
        SINGULAR: ("the Jacobian became singular" if strategy == NEWTON
                   else f"singular Jacobian or extended system at {at}"),
        NON_FINITE: "the model returned a non-finite value" + ("" if strategy == NEWTON
                                                               else f" at {at}"),
        STEP_UNDERFLOW: f"step size underflow at {at}",
        START_FAILED: f"no solution at the start of the path ({at})",
        TURNED_BACK: f"the path turned back past its start ({at})",
        POLISH_FAILED: "Newton from the end of the path did not converge",
        NO_STABLE_STATE: ("found no stable state by following the circuit's dynamics "
                          "(power-up, then from beside the unstable state unless the "
                          "power-up oscillates around a focus); the unstable state is kept"),
    }.get(reason, f"unknown reason code {reason}")


# Short forms for `OperatingPoint.message` (no numbers: it may summarize a batch).
REASON_MESSAGES = {
    CONVERGED: "converged",
    NO_CONVERGENCE: "no convergence within the iteration limit",
    SINGULAR: "the Jacobian became singular",
    NON_FINITE: "the model returned a non-finite value",
    STEP_UNDERFLOW: "step size underflow in a continuation strategy",
    START_FAILED: "no solution at the start of a continuation path",
    TURNED_BACK: "a homotopy path turned back past its start",
    POLISH_FAILED: "Newton from the end of a continuation path did not converge",
    NO_STABLE_STATE: "no stable state found; the unstable one is kept",
}
