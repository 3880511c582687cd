"""Steady states from the branch of a source ramp.

Scale every input by s, F(x, s) = f(x, s u, p), start from the steady state
with the sources off (s = 0) and follow the branch by pseudo-arclength
continuation (`adlin._continuation.track_family`) to s = `ramp_stop` > 1.
Arclength continuation goes round folds, so an S-shaped branch (a latch's
or a tunnel diode's hysteresis) crosses s = 1 three times and each crossing
is a steady state of the circuit as given (the classic source-stepping
homotopy, followed along its arclength: Allgower & Georg, Numerical
Continuation Methods, Springer 1990, ch. 1 and 11, from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._system import System
from .options import SteadyStatesOptions


@dataclass(frozen=True)
class RampResidual:
    """F(x, s, (u, p)) = f(x, s u, p); compares by its System, so the
    continuation engine's jitted programs are built once per System."""

    system: System

    def __call__(self, x, s, args):
        u, p = args
        return self.system.f(x, s * u, p)


@dataclass(frozen=True)
class RampResult:
    candidates: tuple[np.ndarray, ...]  # x at each crossing of s = 1, in walk order
    evaluations: int  # Newton evaluations of the start solve (the walk does not count its own)
    points: int  # samples on the branch
    reason: str  # how the walk ended, or why there was none


def ramp_candidates(compiled, u, p, x0, options: SteadyStatesOptions) -> RampResult:
    """States where the source-ramp branch crosses s = 1 (unpolished).

    **Arguments:**

    - `compiled`: the `CompiledSystem`.
    - `u`, `p`: input and parameter vectors (the ramp scales `u`).
    - `x0`: guess for the steady state with the sources off.
    - `options`: `SteadyStatesOptions` (`ramp_stop`, `ramp_max_steps`).

    **Returns:** a `RampResult`; no candidates when the inputs are all zero
    or no steady state exists with the sources off.
    """
    from .._continuation.options import TrackOptions
    from .._continuation.track import track_family

    system = compiled.system
    u = np.asarray(u, dtype=float)
    if not np.any(u != 0.0):
        return RampResult((), 0, 0, "every input is zero: nothing to ramp")
    off = compiled.solve(np.zeros_like(u), p, x0)
    evals = int(off.evaluations)
    if not bool(off.converged):
        return RampResult((), evals, 0, "no steady state with the sources off")
    track = TrackOptions()
    floors = np.array([{"V": track.voltage_scale, "A": track.current_scale}.get(
        system.unit(k), 1.0) for k in system.unknowns])
    branch = track_family(
        RampResidual(system), np.asarray(off.x), 0.0, options.ramp_stop,
        args=(u, np.asarray(p)), x_scale=floors, crossings=(1.0,),
        max_points=options.ramp_max_steps, options=track, param="source scale",
        unknown_names=system.unknowns,
    )
    xs = np.asarray(branch.crossings.x)
    return RampResult(tuple(xs[i] for i in range(xs.shape[0])), evals, len(branch),
                      branch.reason)
