"""The periodic steady state of a sine-driven model, integrated on a periodic step plan.

Why not the error-controlled transient: its error is set by tolerances on the
unknowns' own values (a node sitting at 0.7 V is controlled to rtol x 0.7 V),
while the harmonics to be resolved are many orders smaller (on the diode-RC
test circuit at 2 MHz, HD3 x fundamental is 3e-12 V).  Worse, the adaptive
step sequence is not periodic: while the steps are pinned to the output grid
every period gets the same steps and the error lands, as a steady bias, on
the harmonic bins; once the tolerance asks for smaller steps the controller
picks a different sequence in every period, so the record is no longer
periodic (period change up to 5e-7 of the fundamental) and the error spreads
over all bins.  Which of the two regimes a run is in changes with rtol, the
amplitude and the tone, so the measured HD2/HD3 did not converge as rtol
tightened (2026-12-02, against the harmonic-balance reference of
tests/test_distortion_reference.py: at 2 MHz HD2 off by 7e-4 relative at
rtol 1e-9, 3e-5 at 1e-10, 8e-7 at 1e-11; at 1 kHz rtol 1e-11 was worse than
1e-9).

Here every step has the same size dt = T / (N m), N samples per period and m
steps per sample, from t = 0 through the settling and the record, so every
period is integrated the same way: the numerical solution is itself periodic
and its error is a smooth function of dt.  The plan is refined by halving dt
until no HDk changes by more than the asked accuracy, or by no more than
rounding puts into the record's non-harmonic bins (step doubling, the
global-error estimate of Hairer, Norsett & Wanner, Solving Ordinary
Differential Equations I, 2nd ed., 1993, sec. II.4; from memory); the last
change is reported as the measurement's error estimate.  The stage
iterations are ended on tolerances scaled to each state's predicted swing
(not its bias value), floored where the state's rounding would otherwise be
asked for.
"""

from __future__ import annotations

import equinox as eqx
import numpy as np

from .._errors import AdlinError
from .harmonics import HarmonicSpectrum, coherent_spectrum

# Steps per sample are doubled from 1 up to this many (N = 64 samples per
# period gives at most 4096 steps per period).
MAX_STEPS_PER_SAMPLE = 64
# The stage iterations stop at a fraction of the asked accuracy, so that their
# error (one per step, of size kappa x atol) stays far below it ...
STAGE_FRACTION = 0.1
# ... but never below this many units of rounding of the state's own value:
# updates of that size are rounding noise (see chord.StageChord's floor).
ROUNDING_UNITS = 1e3
# The refinement stops when a halving changes HDk by no more than this many
# times the record's noise floor (rounding, 1e-16 .. 1e-13 of the fundamental).
ROUNDING_MARGIN = 30.0
# Relative part of the stage tolerance: it multiplies the stage increments
# (h f, at most the swing), so the absolute part, scaled to the swing, rules.
# One fixed value keeps one compiled transient program for every accuracy.
STAGE_RTOL = 1e-12


class PeriodicRecord(eqx.Module):
    """One measured record: its spectrum and how the step plan was settled.

    - `spectrum`: the `HarmonicSpectrum` of the finest plan run.
    - `steps_per_sample`: m of that plan (steps of T / (N m)).
    - `harmonic_error`: max over k >= 2 of |HDk(m) - HDk(m / 2)|, the change
      of the last halving (an upper estimate of the error left in HDk); inf
      when only one plan was run.
    - `steps`, `rejected_steps`: integrator steps of the last run.
    - `converged`: the change fell to the asked accuracy.
    """

    spectrum: HarmonicSpectrum
    steps_per_sample: int = eqx.field(static=True)
    harmonic_error: float = eqx.field(static=True)
    steps: int = eqx.field(static=True)
    rejected_steps: int = eqx.field(static=True)
    converged: bool = eqx.field(static=True)


def stage_tolerance(swing: np.ndarray, bias: np.ndarray, accuracy: float) -> np.ndarray:
    """Absolute stage tolerance per ODE state: a fraction of the accuracy times its swing.

    **Arguments:**

    - `swing`: predicted peak deviation of each ODE state (its units).
    - `bias`: the state's value at the operating point.
    - `accuracy`: the asked accuracy of HDk (relative to the fundamental).

    **Returns:** (r,) positive tolerances.
    """
    eps = np.finfo(np.float64).eps
    floor = ROUNDING_UNITS * eps * np.maximum(np.abs(bias), np.maximum(np.abs(swing), 1e-3))
    return np.maximum(STAGE_FRACTION * accuracy * np.abs(swing), floor)


def _hd(spec: HarmonicSpectrum) -> np.ndarray:
    a = np.asarray(spec.amplitudes)
    return a[2:] / a[1]


def periodic_record(run, *, periods_total: int, periods: int, samples: int, n_harmonics: int,
                    accuracy: float, max_steps: int) -> PeriodicRecord:
    """Refine a periodic step plan until the harmonics stop moving.

    **Arguments:**

    - `run`: `run(m)` -> (output samples of the last `periods` periods, N per
      period, as a 1-D array; integrator steps; rejected steps), integrating
      with steps of T / (N m) from t = 0.
    - `periods_total`: periods integrated (discarded plus recorded).
    - `periods`: periods in the record; `samples`: N per period.
    - `n_harmonics`: highest harmonic measured.
    - `accuracy`: the asked accuracy of each HDk (relative to the fundamental).
    - `max_steps`: step budget of one run; the plan is not refined past it.

    **Returns:** a `PeriodicRecord`.

    **Raises:** `AdlinError` from `run` when the coarsest plan already fails
    (a failure of a finer plan ends the refinement instead).
    """
    m, spec, change = 1, None, float("inf")
    while True:
        try:
            y, steps_m, rejected_m = run(m)
        except AdlinError:
            if spec is None:
                raise
            # With very small steps the stage iterations can end on rounding
            # noise and call it divergence; a planned run cannot retry a step,
            # so keep the last plan that ran (its change is the error estimate).
            m //= 2
            break
        steps, rejected = steps_m, rejected_m
        new = coherent_spectrum(y, periods, samples, n_harmonics)
        if spec is not None:
            change = float(np.max(np.abs(_hd(new) - _hd(spec))))
            spec = new
            # converged, or down to rounding: the change is no larger than what
            # the non-harmonic bins hold (a change that merely fails to halve
            # is no sign of that: before the asymptotic range it can shrink
            # slowly, 1.3e-9 then 1.1e-9 then 2.6e-10 on the photodiode
            # front-end example)
            if change <= max(accuracy, ROUNDING_MARGIN * float(new.noise_floor)):
                break
        spec = new
        if 2 * m > MAX_STEPS_PER_SAMPLE or periods_total * samples * 2 * m > max_steps:
            break
        m *= 2
    return PeriodicRecord(spectrum=spec, steps_per_sample=m, harmonic_error=change, steps=steps,
                          rejected_steps=rejected, converged=change <= accuracy)

