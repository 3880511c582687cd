"""Settings of `adlin.steady_states`."""

from __future__ import annotations

from collections.abc import Mapping

import equinox as eqx

from .._errors import AnalysisError
from .._steady.newton import NewtonOptions


def _items(scales) -> tuple[tuple[str, float], ...]:
    if scales is None:
        return ()
    pairs = scales.items() if isinstance(scales, Mapping) else scales
    out = []
    for name, value in pairs:
        value = float(value)
        if not value > 0:
            raise AnalysisError(f"SteadyStatesOptions scale for {name!r} must be positive, "
                                f"got {value}; give the typical size of that unknown.")
        out.append((str(name), value))
    return tuple(out)


class SteadyStatesOptions(eqx.Module):
    """Settings for finding several steady states.

    - `power`, `shift`: the deflation operator 1/||x - r||_W^power + shift
      (Farrell, Birkisson & Funke 2015 recommend 2 and 1; see
      `adlin._equilibria.deflation`).  `power` >= 1; `shift` > 0 so that a
      small deflated residual is a small residual.
    - `scales`: typical size of named unknowns (V, A, ...) for the weighted
      distance between states; the others are estimated from the states found
      (`unknown_scales`).  A dict name -> value.
    - `distinct_rtol`: two polished states are the same when every unknown
      differs by at most this fraction of its scale.
    - `marginal_tol`: a pole with |Re p| <= marginal_tol |p| counts as on the
      imaginary axis (damping ratio below it), see `classify_poles`.
    - `ramp_stop`: the source ramp scales every input by s from 0 to this
      value (> 1).  The branch must get past the fold beyond s = 1 to come
      back and cross s = 1 again, and a fold may lie well past the nominal
      sources: the tunnel-diode circuit of Khalil's Example 2.1 folds at
      s = 1.37, so the default is 2.
    - `ramp_max_steps`: step limit of the continuation along the ramp.
    - `deflation_max_iterations`: iteration limit of each deflated Newton run
      (full steps: a run that has not converged by then is wandering, and
      every search ends with one such run per start).
    - `newton`: `NewtonOptions` for the deflated and the polishing Newton
      solves (default settings if None).
    """

    power: float = eqx.field(static=True, default=2.0)
    shift: float = eqx.field(static=True, default=1.0)
    scales: tuple[tuple[str, float], ...] = eqx.field(static=True, default=(), converter=_items)
    distinct_rtol: float = eqx.field(static=True, default=1e-6)
    marginal_tol: float = eqx.field(static=True, default=1e-6)
    ramp_stop: float = eqx.field(static=True, default=2.0)
    ramp_max_steps: int = eqx.field(static=True, default=400)
    deflation_max_iterations: int = eqx.field(static=True, default=100)
    newton: NewtonOptions | None = eqx.field(static=True, default=None)

    def __check_init__(self):
        checks = (
            (self.power >= 1.0, f"power must be at least 1 (2 is usual), got {self.power}"),
            (self.shift > 0.0, f"shift must be positive (1 is usual), got {self.shift}"),
            (0.0 < self.distinct_rtol < 1.0,
             f"distinct_rtol must be in (0, 1), got {self.distinct_rtol}"),
            (0.0 < self.marginal_tol < 1.0,
             f"marginal_tol must be in (0, 1), got {self.marginal_tol}"),
            (self.ramp_stop > 1.0, f"ramp_stop must exceed 1 so the ramp passes the nominal "
                                   f"sources, got {self.ramp_stop}"),
            (self.ramp_max_steps >= 1,
             f"ramp_max_steps must be at least 1, got {self.ramp_max_steps}"),
            (self.deflation_max_iterations >= 1, "deflation_max_iterations must be at least 1, "
                                                 f"got {self.deflation_max_iterations}"),
            (self.newton is None or isinstance(self.newton, NewtonOptions),
             "newton must be a NewtonOptions or None"),
        )
        for ok, message in checks:
            if not ok:
                raise AnalysisError(f"SteadyStatesOptions: {message}.")

    @property
    def newton_options(self) -> NewtonOptions:
        return self.newton or NewtonOptions()
