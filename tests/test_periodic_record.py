"""The step-plan refinement of the distortion measurement, on synthetic records.

A record whose HD2 carries an error C (1/m)^p, as a fixed-step method of
order p leaves (Hairer, Norsett & Wanner, Solving ODEs I, 2nd ed., 1993,
sec. II.3), must be refined until one halving changes HD2 by no more than the
asked accuracy; the change of that halving, C (1 - 2^-p) (2/m)^p, is the
reported estimate and bounds the error left, C / m^p, whenever 2^p >= 2.
"""

from __future__ import annotations

import numpy as np
import pytest

import adlin
from adlin._trust.periodic_record import MAX_STEPS_PER_SAMPLE, periodic_record

P, N, HD2 = 4, 64, 1e-3


def _runner(C: float, p: float, fail_from: int | None = None):
    calls = []

    def run(m):
        calls.append(m)
        if fail_from is not None and m >= fail_from:
            raise adlin.AdlinError("the step size collapsed")
        t = np.arange(P * N) / N
        hd2 = HD2 + C * m**-p
        y = np.sin(2 * np.pi * t) + hd2 * np.cos(4 * np.pi * t)
        return y, 100 * m, 0

    return run, calls


def _record(run, accuracy=1e-9, max_steps=10**6):
    return periodic_record(run, periods_total=P + 1, periods=P, samples=N, n_harmonics=5,
                           accuracy=accuracy, max_steps=max_steps)


@pytest.mark.parametrize(("C", "p"), [(1e-7, 2.0), (1e-5, 5.0)])
def test_refines_until_the_change_is_below_the_accuracy(C, p):
    run, calls = _runner(C, p)
    r = _record(run)
    m = r.steps_per_sample
    assert calls == [2**k for k in range(int(np.log2(m)) + 1)]
    assert r.converged and r.harmonic_error <= 1e-9
    # the previous halving had not converged yet
    assert C * (1 - 2**-p) * (2 / m) ** p * 2**p > 1e-9
    assert r.harmonic_error == pytest.approx(C * (1 - 2**-p) * (2 / m) ** p, rel=1e-6)
    err = abs(float(r.spectrum.hd(2)) - HD2)
    assert err == pytest.approx(C / m**p, rel=1e-6) and err <= r.harmonic_error
    assert r.steps == 100 * m


def test_stops_at_the_step_budget_and_says_not_converged():
    run, calls = _runner(1e-3, 1.0)
    r = _record(run, max_steps=(P + 1) * N * 4)
    assert calls == [1, 2, 4] and r.steps_per_sample == 4 and not r.converged
    run, calls = _runner(1e-3, 1.0)
    r = _record(run)
    assert calls[-1] == MAX_STEPS_PER_SAMPLE and not r.converged


def test_a_failing_finer_plan_keeps_the_last_one_that_ran():
    run, calls = _runner(1e-3, 1.0, fail_from=8)
    r = _record(run)
    assert calls == [1, 2, 4, 8] and r.steps_per_sample == 4 and not r.converged
    assert r.harmonic_error == pytest.approx(1e-3 * (1 / 2 - 1 / 4), rel=1e-6)
    run, _ = _runner(1e-3, 1.0, fail_from=1)
    with pytest.raises(adlin.AdlinError, match="collapsed"):
        _record(run)
