"""DistortionOptions: how the distortion measurement is set up and judged."""

from __future__ import annotations

import math

import equinox as eqx

from .._errors import ParameterError


def _positive(name: str, value, *, integer: bool = False, minimum: float = 0.0):
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"DistortionOptions {name} must be a number, got {value!r}.") from None
    if not math.isfinite(v) or v <= minimum or (integer and v != int(v)):
        kind = "an integer" if integer else "a finite number"
        raise ParameterError(f"DistortionOptions {name} must be {kind} > {minimum:g}, "
                             f"got {value!r}.")
    return int(v) if integer else v


class DistortionOptions(eqx.Module):
    """Settings of the measured side of `adlin.distortion` (all validated).

    **Arguments:**

    - `samples_per_period`: samples of the output per period of the tone (must
      exceed twice `n_harmonics`; 64 resolves harmonic 9 with margin).
    - `measured_periods`: whole periods in the record given to the FFT (>= 2;
      the last two are also compared to check settling).
    - `settle_time_constants`: settling discarded before the record, in units
      of the slowest time constant of the small-signal model (at least one
      period is always discarded).  The transient starts from the predicted
      periodic state, so what is left to settle is the part of the response
      beyond third order.
    - `max_periods`: cap on the periods simulated; when the settling asks for
      more, the cap is used and the result says so.
    - `n_harmonics`: highest harmonic measured (THD sums harmonics 2 ..
      `n_harmonics`).
    - `rtol`: accuracy asked of each measured HDk, relative to the
      fundamental (absolute in HDk: 1e-9 resolves an HD3 of 1e-6 to 0.1 %).
      The transient steps with equal steps T / (N m), m = 1, 2, 4 ... until
      halving them changes no HDk by more than `rtol` (see
      `adlin._trust.periodic_record`); its stage iterations end on
      tolerances scaled to each state's predicted swing.  Float64 rounding
      stops the refinement near 1e-12 .. 1e-13.
    - `max_steps`: step budget of one transient (the plan is not refined
      past it).
    - `part_ways`: relative difference between predicted and measured HD2 or
      HD3 above which the result adds a note (0.1 = 10 %).
    - `weak_limit`: predicted THD above which the amplitude is called beyond
      the weakly nonlinear range, where a third-order prediction is not
      expected to hold (0.1 = 10 %, common practice).
    """

    samples_per_period: int = eqx.field(static=True, default=64)
    measured_periods: int = eqx.field(static=True, default=4)
    settle_time_constants: float = eqx.field(static=True, default=25.0)
    max_periods: int = eqx.field(static=True, default=2000)
    n_harmonics: int = eqx.field(static=True, default=9)
    rtol: float = eqx.field(static=True, default=1e-9)
    max_steps: int = eqx.field(static=True, default=500_000)
    part_ways: float = eqx.field(static=True, default=0.1)
    weak_limit: float = eqx.field(static=True, default=0.1)

    def __check_init__(self):
        n_h = _positive("n_harmonics", self.n_harmonics, integer=True, minimum=2)
        spp = _positive("samples_per_period", self.samples_per_period, integer=True)
        if spp <= 2 * n_h:
            raise ParameterError(f"DistortionOptions samples_per_period={spp} cannot resolve "
                                 f"harmonic {n_h}; use more than {2 * n_h}.")
        _positive("measured_periods", self.measured_periods, integer=True, minimum=1)
        _positive("settle_time_constants", self.settle_time_constants)
        mp = _positive("max_periods", self.max_periods, integer=True)
        if mp < self.measured_periods + 1:
            raise ParameterError(f"DistortionOptions max_periods={mp} leaves no period to "
                                 f"settle; use at least {self.measured_periods + 1} "
                                 "(measured_periods + 1).")
        rtol = _positive("rtol", self.rtol)
        if rtol >= 1e-2:
            raise ParameterError(f"DistortionOptions rtol={rtol:g} is too loose to measure "
                                 "distortion; use 1e-6 or tighter.")
        _positive("max_steps", self.max_steps, integer=True)
        _positive("part_ways", self.part_ways)
        _positive("weak_limit", self.weak_limit)
