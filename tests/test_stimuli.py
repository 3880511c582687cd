"""Stimuli: values against numpy's own formulas, edges, scaling, periods, validation.

The waveforms are defined by the formulas in their docstrings; numpy (sin,
interp) evaluates the same definitions independently of JAX.
"""

import functools
import math

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import adlin
from adlin.stimuli import (
    FromFunction,
    PiecewiseLinear,
    Pulse,
    Sine,
    Step,
    SumOfSines,
    as_stimuli,
    input_deviation,
    stimulus_edges,
    stimulus_period,
)


@functools.cache
def two_inputs():
    def current(x, u, p):
        return jnp.stack([x[0] - u[0] - u[1]])

    return adlin.System(current, unknowns=("v_a",), inputs=("v_in", "i_load"), name="two_inputs")


def values(stim, ts):
    return np.asarray(jax.vmap(stim)(jnp.asarray(ts)))


T = np.linspace(-1e-3, 5e-3, 601)


def test_step():
    s = Step("v_in", 0.3, t0=1e-3)
    np.testing.assert_array_equal(values(s, T), np.where(T >= 1e-3, 0.3, 0.0))
    assert s.edges() == (1e-3,) and s.period is None


def test_sine_matches_numpy():
    s = Sine("v_in", 0.2, f_hz=1e3, phase_deg=30.0, t0=0.5e-3)
    ref = np.where(T >= 0.5e-3, 0.2 * np.sin(2 * np.pi * 1e3 * (T - 0.5e-3) + np.pi / 6), 0.0)
    np.testing.assert_allclose(values(s, T), ref, rtol=0, atol=1e-15)
    assert s.period == pytest.approx(1e-3) and s.edges() == (0.5e-3,)


def test_sum_of_sines_matches_numpy_and_its_period():
    s = SumOfSines("v_in", [0.1, 0.05], f_hz=[1e3, 1.5e3], phases_deg=[0.0, 90.0])
    ref = 0.1 * np.sin(2 * np.pi * 1e3 * T) + 0.05 * np.cos(2 * np.pi * 1.5e3 * T)
    np.testing.assert_allclose(values(s, T), ref, atol=1e-15)
    # 1 kHz and 1.5 kHz repeat together every 2 ms (gcd of the frequencies is 500 Hz)
    assert s.period == pytest.approx(2e-3)
    assert s.edges() == ()
    assert SumOfSines("v_in", [1, 1], [1e3, 1e3 * math.sqrt(2)]).period is None


def test_pulse_trapezoid_against_numpy_interp():
    s = Pulse("v_in", -0.4, t0=0.5e-3, width=1e-3, rise=0.2e-3, fall=0.3e-3)
    ref = np.interp(T, [0.5e-3, 0.7e-3, 1.7e-3, 2.0e-3], [0, -0.4, -0.4, 0], left=0, right=0)
    np.testing.assert_allclose(values(s, T), ref, atol=1e-15)
    assert s.edges() == pytest.approx((0.5e-3, 0.7e-3, 1.7e-3, 2.0e-3))


def test_periodic_pulse_repeats_and_lists_its_edges():
    s = Pulse("v_in", 1.0, t0=0.1e-3, width=0.2e-3, rise=0.05e-3, fall=0.05e-3, period=1e-3)
    ts = np.linspace(0.1e-3, 1.05e-3, 97)
    np.testing.assert_allclose(values(s, ts + 1e-3), values(s, ts), atol=1e-12)
    edges = s.edges(t_end=2.5e-3)
    assert len(edges) == 12 and edges[-1] <= 2.5e-3
    assert s.period == 1e-3
    with pytest.raises(adlin.ParameterError, match="period"):
        Pulse("v_in", 1.0, t0=0.0, width=1.0, period=0.5)


def test_ideal_pulse_edges_are_jumps():
    s = Pulse("v_in", 2.0, t0=1e-3, width=1e-3)
    v = values(s, [0.999e-3, 1e-3, 1.999e-3, 2e-3])
    np.testing.assert_array_equal(v, [0.0, 2.0, 2.0, 0.0])


def test_piecewise_linear_matches_numpy_and_jumps():
    times = [0.0, 1e-3, 2e-3, 2e-3, 3e-3]
    vals = [0.0, 1.0, 1.0, -1.0, 0.5]
    s = PiecewiseLinear("v_in", times, vals)
    ts = np.linspace(-1e-3, 4e-3, 501)
    before_jump = ts < 2e-3
    ref = np.where(before_jump, np.interp(ts, times[:3], vals[:3]),
                   np.interp(ts, times[3:], vals[3:]))
    np.testing.assert_allclose(values(s, ts), ref, atol=1e-14)
    assert values(s, [2e-3])[0] == -1.0  # the later value holds from the jump on
    assert s.edges() == (0.0, 1e-3, 2e-3, 3e-3)
    with pytest.raises(adlin.ParameterError, match="decrease"):
        PiecewiseLinear("v_in", [1.0, 0.0], [0.0, 1.0])


def test_from_function_scale_and_edges():
    s = FromFunction("v_in", lambda t: jnp.exp(-t / 1e-3) * (t >= 0), edges=(0.0,))
    np.testing.assert_allclose(values(s.scaled(3.0), T), 3 * np.exp(-T / 1e-3) * (T >= 0))
    assert s.edges() == (0.0,)


STIMULI = [
    Step("v_in", 0.3, t0=1e-3),
    Pulse("v_in", 0.5, t0=0.2e-3, width=1e-3, rise=1e-4, fall=2e-4, period=3e-3),
    Sine("v_in", 0.2, f_hz=700.0, phase_deg=10.0),
    SumOfSines("v_in", [0.1, 0.2], f_hz=[1e3, 3e3]),
    PiecewiseLinear("v_in", [0.0, 1e-3, 3e-3], [0.0, 0.4, -0.2]),
    FromFunction("v_in", lambda t: jnp.tanh(t / 1e-3)),
]


@pytest.mark.parametrize("stim", STIMULI, ids=lambda s: type(s).__name__)
@settings(max_examples=20, deadline=None)
@given(factor=st.floats(-10, 10, allow_nan=False), t=st.floats(-1e-3, 6e-3))
def test_scaling_law(stim, factor, t):
    """scaled(k)(t) == k * s(t): the law linear_range's search relies on."""
    np.testing.assert_allclose(float(stim.scaled(factor)(t)), factor * float(stim(t)),
                               rtol=1e-12, atol=1e-15)


@pytest.mark.parametrize("stim", STIMULI, ids=lambda s: type(s).__name__)
def test_scaling_does_not_change_the_tree_structure(stim):
    """A scaled stimulus has the same static structure, so jitted programs do not retrace."""
    a = jax.tree_util.tree_structure(stim)
    b = jax.tree_util.tree_structure(stim.scaled(2.5))
    assert a == b


def test_grad_and_jit_in_amplitude():
    g = jax.grad(lambda a: Sine("v_in", a, f_hz=1e3)(0.25e-3))(0.7)
    assert g == pytest.approx(1.0)  # d/da of a*sin(pi/2)
    out = jax.jit(lambda s, t: s(t))(Step("v_in", 1.5, t0=0.1), 0.2)
    assert float(out) == 1.5 and out.dtype == jnp.float64


def test_input_deviation_adds_per_input():
    sys = two_inputs()
    stims = (Step("v_in", 1.0), Step("v_in", 0.5, t0=1.0), Sine("i_load", 2.0, f_hz=0.25))
    dev = jax.jit(lambda s, t: input_deviation(sys, s, t))(stims, 1.0)
    np.testing.assert_allclose(np.asarray(dev), [1.5, 2.0], atol=1e-15)
    assert input_deviation(sys, (), 0.3).shape == (2,)


def test_unknown_input_is_named_with_a_suggestion():
    with pytest.raises(adlin.ParameterError, match=r"'v_inn'.*'v_in'"):
        as_stimuli(two_inputs(), Step("v_inn", 1.0))
    with pytest.raises(adlin.ParameterError, match="not a stimulus"):
        as_stimuli(two_inputs(), (Step("v_in", 1.0), 3.0))


def test_bad_values_are_refused():
    with pytest.raises(adlin.ParameterError, match="f_hz"):
        Sine("v_in", 1.0, f_hz=-1.0)
    with pytest.raises(adlin.ParameterError, match="scalar"):
        Step("v_in", [1.0, 2.0])
    with pytest.raises(adlin.ParameterError, match="frequencies"):
        SumOfSines("v_in", [1.0, 2.0], f_hz=[1e3])


def test_edges_and_period_of_a_tuple():
    stims = (Step("v_in", 1.0, t0=2e-3), Pulse("i_load", 1.0, t0=1e-3, width=1e-3, rise=1e-4))
    assert stimulus_edges(stims, 0.0, 2.05e-3) == pytest.approx((1e-3, 1.1e-3, 2e-3))
    assert stimulus_period((Sine("v_in", 1, 1e3), Sine("i_load", 1, 2e3))) == pytest.approx(1e-3)
    assert stimulus_period((Sine("v_in", 1, 1e3), Step("v_in", 1))) is None
