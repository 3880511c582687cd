"""The exact linear response, and `adlin.compare` against nonlinear transients.

Outside references: `scipy.signal.lsim` (first-order hold on the same grid),
sympy's `dsolve` for the sine-driven RC, the closed-form step responses of
first-order circuits (Alexander & Sadiku, Fundamentals of Electric Circuits,
6th ed., sec. 7.6) and of the overdamped series RLC (same book, sec. 8.6).
"""

from __future__ import annotations

import functools
import math

import jax
import jax.numpy as jnp
import numpy as np
import pytest
import scipy.signal
import sympy as sp
from closed_forms import descriptor_divider, series_rlc

import adlin
from adlin._trust.linear_response import linear_response
from adlin.stimuli import FromFunction, PiecewiseLinear, Pulse, Sine, Step, SumOfSines

R_RC, C_RC = 1e3, 1e-6  # tau = 1 ms


@functools.cache
def rc() -> adlin.System:
    """Source - R - node with C to ground; output the capacitor voltage."""

    def current(x, u, p):
        return jnp.stack([(x[0] - u[0]) / p["R"]])

    def charge(x, p):
        return jnp.stack([p["C"] * x[0]])

    return adlin.System(current, charge, unknowns=("v_c",), inputs={"v_in": 1.0},
                        outputs=("v_c",), params={"R": R_RC, "C": C_RC}, name="rc")


@functools.cache
def rc_model() -> adlin.LinearModel:
    s = rc()
    return adlin.linearize(s, adlin.steady_state(s))


@functools.cache
def rlc_model() -> adlin.LinearModel:
    s = series_rlc(100.0, 1e-3, 1e-6)  # overdamped: zeta = 1.58
    return adlin.linearize(s, adlin.steady_state(s, inputs={"v_in": 1.0}))


def _lsim(model, u, t):
    _, y, _ = scipy.signal.lsim(model.to_scipy(), u, t)
    return np.asarray(y).reshape(t.size, -1)


# --- linear response vs scipy.signal.lsim ---------------------------------------------

def test_step_equals_lsim():
    # A step at t = 0 is constant on every grid interval, so lsim's first-order
    # hold is exact there too: the two must agree to rounding.
    lin = rlc_model()
    t = np.linspace(0.0, 1e-3, 801)
    y = np.asarray(linear_response(lin, Step("v_in", 0.25), t))
    ref = _lsim(lin, np.full(t.size, 0.25), t)  # reference: scipy.signal.lsim
    assert np.max(np.abs(y - ref)) < 1e-10 * np.ptp(ref)


def test_sine_equals_lsim():
    lin = rlc_model()
    f = 3e3
    t = np.linspace(0.0, 2e-3, 1201)
    stim = Sine("v_in", 0.2, f, phase_deg=30.0)
    u = 0.2 * np.sin(2 * np.pi * f * t + np.pi / 6)
    ref = _lsim(lin, u, t)  # reference: scipy.signal.lsim, linear hold between samples
    grid = np.asarray(linear_response(lin, stim, t, method="grid"))
    assert np.max(np.abs(grid - ref)) < 1e-10 * np.ptp(ref)
    # The exact (phasor + free response) answer differs from lsim's held sine
    # by lsim's own interpolation error, which a 64x finer lsim grid shrinks
    # by 64^2 (second order); the exact answer must sit on that limit.
    exact = np.asarray(linear_response(lin, stim, t))
    fine_t = np.linspace(0.0, 2e-3, 64 * 1200 + 1)
    fine = _lsim(lin, 0.2 * np.sin(2 * np.pi * f * fine_t + np.pi / 6), fine_t)[::64]
    coarse_err = np.max(np.abs(exact - ref))
    fine_err = np.max(np.abs(exact - fine))
    assert coarse_err > 1e-7 * np.ptp(ref)  # the hold error is there to be seen ...
    assert fine_err < 2.0 * coarse_err / 64**2  # ... and falls as h^2 toward the exact answer


def test_sine_from_rest_matches_sympy():
    # RC driven by a sin(w t + phi) from rest, solved by sympy.dsolve.
    tau = R_RC * C_RC
    a, f, phi = 0.3, 400.0, 0.7
    ts, y = sp.symbols("t"), sp.Function("y")
    w = 2 * sp.pi * sp.Float(f)
    ode = sp.Eq(y(ts).diff(ts), (a * sp.sin(w * ts + phi) - y(ts)) / tau)
    sol = sp.dsolve(ode, y(ts), ics={y(0): 0}).rhs
    ref_fn = sp.lambdify(ts, sol, "numpy")
    t = np.linspace(0.0, 5e-3, 401)
    stim = Sine("v_in", a, f, phase_deg=math.degrees(phi))
    out = np.asarray(linear_response(rc_model(), stim, t))[:, 0]
    assert np.max(np.abs(out - ref_fn(t))) < 1e-12


def test_delayed_sine_and_sum_of_sines_superpose():
    # Linearity: a sum of tones equals the sum of single-tone responses; a
    # sine started at t0 equals the t = 0 response shifted by t0.
    lin = rlc_model()
    t = np.linspace(0.0, 1e-3, 501)
    both = SumOfSines("v_in", [0.1, 0.05], [2e3, 7e3], phases_deg=[10.0, 80.0])
    y_sum = np.asarray(linear_response(lin, both, t))
    y_1 = np.asarray(linear_response(lin, Sine("v_in", 0.1, 2e3, phase_deg=10.0), t))
    y_2 = np.asarray(linear_response(lin, Sine("v_in", 0.05, 7e3, phase_deg=80.0), t))
    assert np.max(np.abs(y_sum - y_1 - y_2)) < 1e-12
    shift = 100  # grid points: t0 = 0.2 ms
    late = np.asarray(linear_response(lin, Sine("v_in", 0.1, 2e3, 10.0, t0=t[shift]), t))
    assert np.max(np.abs(late[:shift])) < 1e-15
    assert np.max(np.abs(late[shift:] - y_1[: t.size - shift])) < 1e-12


# --- exactness for piecewise-linear stimuli off the grid -----------------------------------

def test_step_off_grid_is_exact():
    # An RC step response a (1 - exp(-(t - t0)/tau)) (Alexander & Sadiku, 6th
    # ed., sec. 7.6), with t0 between grid points: the edge is cut exactly.
    tau = R_RC * C_RC
    t = np.linspace(0.0, 4e-3, 41)
    t0 = 0.123456e-3
    out = np.asarray(linear_response(rc_model(), Step("v_in", -0.4, t0=t0), t))[:, 0]
    ref = np.where(t >= t0, -0.4 * (1 - np.exp(-(t - t0) / tau)), 0.0)
    assert np.max(np.abs(out - ref)) < 1e-13


def test_overdamped_rlc_step_closed_form():
    # Overdamped series RLC, capacitor voltage after a step V:
    # V (1 - (p2 e^{p1 t} - p1 e^{p2 t}) / (p2 - p1)) (Alexander & Sadiku,
    # 6th ed., sec. 8.6), with p1,2 = -alpha +- sqrt(alpha^2 - w0^2).
    R, L, C = 100.0, 1e-3, 1e-6
    alpha, w0 = R / (2 * L), 1 / math.sqrt(L * C)
    p1, p2 = -alpha + math.sqrt(alpha**2 - w0**2), -alpha - math.sqrt(alpha**2 - w0**2)
    t = np.linspace(0.0, 5e-4, 37)
    out = np.asarray(linear_response(rlc_model(), Step("v_in", 0.5, t0=1.1e-5), t))[:, 0]
    tt = np.maximum(t - 1.1e-5, 0.0)
    ref = 0.5 * (1 - (p2 * np.exp(p1 * tt) - p1 * np.exp(p2 * tt)) / (p2 - p1))
    assert np.max(np.abs(out - ref)) < 1e-12


def test_stiff_rlc_step_closed_form():
    # Poles -1 and -1e12 rad/s: on a grid that resolves the slow pole, |A h| is
    # ~3e11, far beyond the 16 squarings jax's expm does by default (it then
    # returns NaN).  Same closed form as above (Alexander & Sadiku, 6th ed.,
    # sec. 8.6), with p1 = w0^2 / p2 to avoid cancellation.
    R, L, C = 1e3, 1e-9, 1e-3
    s = series_rlc(R, L, C)
    model = adlin.linearize(s, adlin.steady_state(s, inputs={"v_in": 1.0}))
    alpha, w0 = R / (2 * L), 1 / math.sqrt(L * C)
    p2 = -alpha - math.sqrt(alpha**2 - w0**2)
    p1 = w0**2 / p2
    t = np.linspace(0.0, 10.0, 37)
    out = np.asarray(linear_response(model, Step("v_in", 0.5), t))[:, 0]
    ref = 0.5 * (1 - (p2 * np.exp(p1 * t) - p1 * np.exp(p2 * t)) / (p2 - p1))
    err = np.max(np.abs(out - ref))
    # ~36 squarings cost accuracy: measured 9e-7 on 0.5; scipy.signal.lsim on
    # the same grid is off by 5e-6, so adlin must do at least as well.
    lsim_err = np.max(np.abs(_lsim(model, np.full(t.size, 0.5), t)[:, 0] - ref))
    assert err < 2e-6 and err <= lsim_err


def test_pulse_and_table_off_grid_equal_lsim_on_their_breakpoints():
    # lsim's hold is exact when every break point is a grid point: on a 1 us
    # grid that holds them all it is the reference; our 20 us output grid
    # misses them and must still give the same values.
    lin = rlc_model()
    pulse = Pulse("v_in", 0.3, t0=0.051e-3, width=0.11e-3, rise=0.013e-3, fall=0.029e-3)
    table = PiecewiseLinear("v_in", [0.0, 0.07e-3, 0.31e-3, 0.33e-3], [0.0, 0.1, -0.2, 0.05])
    t = np.linspace(0.0, 0.5e-3, 26)
    fine = np.linspace(0.0, 0.5e-3, 501)
    for stim in (pulse, table):
        u = np.asarray(jax.vmap(stim)(jnp.asarray(fine)))
        ref = _lsim(lin, u, fine)[::20]  # reference: scipy.signal.lsim
        out = np.asarray(linear_response(lin, stim, t))
        assert np.max(np.abs(out - ref)) < 1e-9 * np.ptp(ref), type(stim).__name__


def test_descriptor_model_with_feedthrough():
    # Index-1 model (two storage-free nodes and a source current) whose output
    # jumps at the step: H(s) = K (1 + s C Resr) / (1 + s C (Rth + R2 + Resr))
    # (closed_forms.descriptor_divider, Thevenin's theorem), so the step
    # response is K (1 - (1 - Resr / Rtot) e^{-t / (C Rtot)}).
    R1, R2, R3, Resr, C = 1e3, 2e3, 3e3, 500.0, 1e-7
    s = descriptor_divider(R1, R2, R3, Resr, C)
    lin = adlin.linearize(s, adlin.steady_state(s))
    K = R3 / (R1 + R3)
    Rtot = R1 * R3 / (R1 + R3) + R2 + Resr
    t = np.linspace(0.0, 2e-3, 51)
    out = np.asarray(linear_response(lin, Step(s.inputs[0], 1.0), t))
    col = list(s.outputs).index("v_b") if "v_b" in s.outputs else 0
    ref = K * (1 - (1 - Resr / Rtot) * np.exp(-t / (C * Rtot)))
    assert np.max(np.abs(out[:, col] - ref)) < 1e-12


def test_smooth_function_is_second_order():
    # A function of time the response cannot know in closed form is held
    # linearly between cuts: halving the step divides the error by ~4.
    tau = R_RC * C_RC
    w = 2 * np.pi * 300.0
    stim = FromFunction("v_in", lambda t: jnp.sin(w * t))
    errs = []
    for n in (101, 201):
        t = np.linspace(0.0, 4e-3, n)
        ref = np.asarray(linear_response(rc_model(), Sine("v_in", 1.0, 300.0), t))[:, 0]
        out = np.asarray(linear_response(rc_model(), stim, t))[:, 0]
        errs.append(np.max(np.abs(out - ref)))
    assert errs[0] > 0 and 3.5 < errs[0] / errs[1] < 4.5
    assert errs[1] < (w * 2e-5) ** 2 * 1.0 / (1 + (w * tau) ** 2) ** 0.5  # (w h)^2 bound


# --- differentiable, and errors that name the culprit ------------------------------------

def test_gradient_with_respect_to_a_parameter():
    # d y(t1) / dR for an RC step: y = a (1 - e^{-t/(RC)}),
    # dy/dR = -a t/(R^2 C) e^{-t/(RC)} (derivative of the closed form above).
    s = rc()
    t = np.array([0.0, 0.5e-3, 1e-3])

    def y_end(R):
        op = adlin.steady_state(s, params={"R": R})
        return linear_response(adlin.linearize(s, op), Step("v_in", 0.2), t)[-1, 0]

    g = jax.grad(y_end)(R_RC)
    ref = -0.2 * 1e-3 / (R_RC**2 * C_RC) * math.exp(-1e-3 / (R_RC * C_RC))
    assert abs(g - ref) < 1e-9 * abs(ref)


def test_method_on_the_model_and_errors():
    lin = rc_model()
    t = np.linspace(0.0, 1e-3, 11)
    direct = np.asarray(linear_response(lin, Step("v_in", 0.1), t))
    np.testing.assert_array_equal(np.asarray(lin.response(Step("v_in", 0.1), t)), direct)
    with pytest.raises(adlin.ParameterError, match="'v_inn'.*'v_in'"):
        linear_response(lin, Step("v_inn", 0.1), t)
    with pytest.raises(adlin.AnalysisError, match="increase strictly"):
        linear_response(lin, Step("v_in", 0.1), t[::-1])
    with pytest.raises(adlin.AnalysisError, match="'grid'"):
        linear_response(lin, Step("v_in", 0.1), t, method="gird")


# --- adlin.compare ----------------------------------------------------------------------------

def test_compare_on_a_linear_circuit_is_exact_to_solver_tolerance():
    # RC step response a (1 - exp(-(t - t0)/tau)) (Alexander & Sadiku, 6th ed.,
    # sec. 7.6): the linear waveform equals it to rounding, the nonlinear one
    # (the circuit is linear) to the solver's tolerance, and the swing is a
    # (1 - exp(-(t_end - t0)/tau)).
    s = rc()
    op = adlin.steady_state(s)
    tau, a, t0, t_end = R_RC * C_RC, 0.5, 1e-4, 5e-3
    c = adlin.compare(s, op, Step("v_in", a, t0=t0), t_end, n_points=201)
    t = np.asarray(c.t)
    ref = 1.0 + np.where(t >= t0, a * (1 - np.exp(-(t - t0) / tau)), 0.0)
    y_nl, y_lin = (np.asarray(v) for v in c["v_c"])
    assert np.max(np.abs(y_lin - ref)) < 1e-13
    assert np.max(np.abs(y_nl - ref)) < 1e-6 * a
    assert float(c.swing[0]) == pytest.approx(a * (1 - math.exp(-(t_end - t0) / tau)), rel=1e-12)
    assert float(c.peak_error[0]) < 1e-6
    assert float(c.rms_error[0]) <= float(c.peak_error[0])
    assert int(c.status) == 0 and int(c.steps) > 0
    assert "v_c" in str(c)


def test_compare_on_a_diode_gives_the_static_error():
    # A static diode-resistor circuit: every sample is the new steady state, so
    # the error is |v(V + a) - v(V) - G a| / |G a| at all times, with v from the
    # Lambert W closed form (Banwell & Jayakumar, Electronics Letters 36(4),
    # 2000) and G = r_d / (R + r_d), r_d = V_T / (I + I_S) (Shockley law).
    from closed_forms import VT, diode_resistor, diode_resistor_exact

    V, R, Is, a = 5.0, 1e3, 1e-14, -0.5
    s = diode_resistor(V, R, Is)
    op = adlin.steady_state(s)
    c = adlin.compare(s, op, Step("v_s", a), 1e-3, n_points=5, output="v_a")
    v0 = diode_resistor_exact(V, R, Is)
    r_d = VT / ((V - v0) / R + Is)
    G = r_d / (R + r_d)
    rel = abs(diode_resistor_exact(V + a, R, Is) - v0 - G * a) / abs(G * a)
    assert float(c.final_error[0]) == pytest.approx(rel, rel=1e-6)
    assert float(c.peak_error[0]) == pytest.approx(rel, rel=1e-6)
    assert c.output_names == ("v_a",) and c.stimulus_inputs == ("v_s",)
    with pytest.raises(adlin.ParameterError, match="'v_b'.*'v_a'"):
        adlin.compare(s, op, Step("v_s", a), 1e-3, output="v_b")
    with pytest.raises(adlin.ParameterError, match="no output 'x'"):
        c["x"]
