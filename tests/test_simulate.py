"""simulate: nonlinear transients against closed forms and independent references.

Each check names its outside source.  Systems are built once per module
(functools.cache); every new System costs a compilation (~10 s for the
diffrax program), so the tests reuse a few models and vary inputs,
amplitudes and parameters.
"""

import functools
import math

import jax
import jax.numpy as jnp
import numpy as np
import pytest
import scipy.integrate
import scipy.optimize
from closed_forms import VT, diode_resistor, diode_resistor_exact, van_der_pol

import adlin
from adlin.stimuli import Pulse, Sine, Step

# --- models -----------------------------------------------------------------------------------

RC_R, RC_C = 1e3, 1e-6
TRACES = {"current": 0, "rc": 0}


@functools.cache
def rc():
    """v_in - R - v_out - C to ground."""

    def current(x, u, p):
        TRACES["rc"] += 1  # counts traces (Python calls), not evaluations
        return jnp.stack([(x[0] - u[0]) / p["R"]])

    def charge(x, p):
        return jnp.stack([p["C"] * x[0]])

    return adlin.System(current, charge, unknowns=("v_out",), inputs=("v_in",),
                        params={"R": RC_R, "C": RC_C}, name="rc")


DAE_PARAMS = {"R1": 1e3, "R2": 2e3, "R3": 10e3, "Is": 1e-14, "C0": 0.2e-9, "C1": 2e-9}


@functools.cache
def clamp_dae():
    """An invented index-1 circuit with a nonlinear capacitance.

    v_in - R1 - node a; a diode from a to ground; R2 from a to b; R3 from b to
    ground; a voltage-dependent capacitor C(v) = C0 + C1 v from b to ground,
    i.e. charge q = C0 v + C1 v^2 / 2.  Node a has no capacitance, so v_a is an
    algebraic unknown and the diode makes its equation nonlinear.
    """

    def current(x, u, p):
        TRACES["current"] += 1  # counts traces (Python calls), not evaluations
        a, b = x[0], x[1]
        i_d = p["Is"] * (jnp.exp(a / VT) - 1.0)
        return jnp.stack([(a - u[0]) / p["R1"] + i_d + (a - b) / p["R2"],
                          (b - a) / p["R2"] + b / p["R3"]])

    def charge(x, p):
        b = x[1]
        return jnp.stack([0.0 * b, p["C0"] * b + 0.5 * p["C1"] * b**2])

    junction = adlin.Junction("v_a", None, VT, VT * math.log(VT / (math.sqrt(2) * 1e-14)))
    return adlin.System(current, charge, unknowns=("v_a", "v_b"), inputs={"v_in": 0.5},
                        outputs=("v_b",), params=DAE_PARAMS, junctions=[junction],
                        name="clamp_dae")


def clamp_reference(stim, t_grid, v_in0=0.5, params=DAE_PARAMS):
    """The same circuit written by hand: brentq for v_a, Radau (scipy) for v_b.

    Integrated piece by piece between the stimulus edges, with tolerances far
    tighter than simulate's.
    """
    p = params

    def node_a(b, vin):
        g = lambda a: ((a - vin) / p["R1"] + p["Is"] * math.expm1(a / VT) + (a - b) / p["R2"])
        return scipy.optimize.brentq(g, -10.0, 2.0, xtol=1e-16, rtol=1e-15)

    def rhs(t, y):
        b = y[0]
        vin = v_in0 + float(stim(t))
        a = node_a(b, vin)
        i = (b - a) / p["R2"] + b / p["R3"]
        return [-i / (p["C0"] + p["C1"] * b)]

    bias = scipy.optimize.brentq(
        lambda b: (b - node_a(b, v_in0)) / p["R2"] + b / p["R3"], -1.0, v_in0, xtol=1e-16)
    stops = [0.0, *[e for e in stim.edges() if 0 < e < t_grid[-1]], t_grid[-1]]
    y = [bias]
    out = []
    for k, (lo, hi) in enumerate(zip(stops[:-1], stops[1:], strict=True)):
        last = k == len(stops) - 2
        sel = t_grid[(t_grid >= lo) & ((t_grid <= hi) if last else (t_grid < hi))]
        t_eval = np.unique(np.concatenate([sel, [hi]]))
        sol = scipy.integrate.solve_ivp(rhs, (lo, hi), y, method="Radau", t_eval=t_eval,
                                        rtol=1e-12, atol=1e-15)
        out.append(sol.y[0][np.isin(t_eval, sel)])
        y = [sol.y[0, -1]]
    b = np.concatenate(out)
    a = np.array([node_a(bb, v_in0 + float(stim(t))) for bb, t in zip(b, t_grid, strict=True)])
    return a, b


CLAMP_PULSE = Pulse("v_in", 1.5, t0=2e-6, width=10e-6, rise=1e-6, fall=1e-6)


# --- linear circuit: closed form ---------------------------------------------------------------

def test_rc_step_equals_closed_form():
    """v(t) = V (1 - exp(-t / RC)) for a step V into a first-order RC (e.g. Alexander &
    Sadiku, Fundamentals of Electric Circuits, 5th ed., sec. 7.6; quoted from memory)."""
    tr = adlin.simulate(rc(), Step("v_in", 1.0), 5e-3)
    t = np.asarray(tr.t)
    np.testing.assert_allclose(np.asarray(tr["v_out"]), 1.0 - np.exp(-t / (RC_R * RC_C)),
                               rtol=0, atol=1e-9)
    assert int(tr.status) == 0 and tr.stats["steps"] >= 1000  # one step per output time
    np.testing.assert_allclose(np.asarray(tr["v_in"]), 1.0)
    # a new amplitude and a free response from a given state reuse the same program
    tr2 = adlin.simulate(rc(), Step("v_in", 0.0), 5e-3, x0={"v_out": 0.5})
    np.testing.assert_allclose(np.asarray(tr2["v_out"]), 0.5 * np.exp(-t / (RC_R * RC_C)),
                               rtol=0, atol=1e-9)


def test_fixed_step_plan_converges_at_the_solver_order():
    """Equal steps (dt given, no error control) on the RC free response v = V exp(-t/RC)
    (Alexander & Sadiku, 5th ed., sec. 7.2, from memory): the error of Kvaerno5, an
    order-5 method (Kvaerno, BIT 44, 2004), must fall about 2^5 per halving of dt in
    the non-stiff range (accepted above 2^4), and the run takes exactly the planned steps."""
    tau = RC_R * RC_C
    t = np.linspace(0.0, 5 * tau, 41)
    errors = []
    for n in (4, 8, 16):
        tr = adlin.simulate(rc(), Step("v_in", 0.0), 5 * tau, x0={"v_out": 0.5}, t=t,
                            dt=tau / n)
        assert int(tr.steps) == 5 * n and int(tr.rejected_steps) == 0
        errors.append(np.max(np.abs(np.asarray(tr["v_out"]) - 0.5 * np.exp(-t / tau))))
    assert errors[0] / errors[1] > 16 and errors[1] / errors[2] > 16
    assert errors[2] < 1e-8


@pytest.mark.slow
def test_edges_reach_the_step_controller():
    """A 10 us pulse inside a 20 ms window, output every 2 ms, steps allowed to span
    output times: the controller must stop on the pulse edges to see it at all.
    After the pulse, v = V (1 - exp(-w/RC)) exp(-(t - t0 - w)/RC) (superposition of two
    steps; same source as the step response)."""
    w, t0 = 10e-6, 1e-3
    tr = adlin.simulate(rc(), Pulse("v_in", 1.0, t0=t0, width=w), 20e-3, n_points=11,
                        step_on_grid=False)
    t = np.asarray(tr.t)
    tau = RC_R * RC_C
    ref = np.where(t >= t0 + w, (1 - np.exp(-w / tau)) * np.exp(-(t - t0 - w) / tau), 0.0)
    np.testing.assert_allclose(np.asarray(tr["v_out"]), ref, rtol=1e-5, atol=1e-10)
    assert ref[1] > 1e-4  # the pulse leaves a visible trace on the grid


@pytest.mark.slow
def test_step_budget_exhausted_is_reported():
    with pytest.raises(adlin.AdlinError, match=r"step budget \(max_steps=50.*t = .* s of t_end"):
        adlin.simulate(rc(), Step("v_in", 1.0), 5e-3, max_steps=50)
    tr = adlin.simulate(rc(), Step("v_in", 1.0), 5e-3, max_steps=50, throw=False)
    assert int(tr.status) == 1 and "step budget" in tr.message
    reached = float(tr.reached)
    assert 0 <= reached < 5e-3
    late = np.asarray(tr.t) > reached
    assert late.any() and np.all(np.isnan(np.asarray(tr["v_out"])[late]))
    early = ~late
    t = np.asarray(tr.t)[early]
    np.testing.assert_allclose(np.asarray(tr["v_out"])[early], 1 - np.exp(-t / (RC_R * RC_C)),
                               atol=1e-9)


# --- index-1 DAE with a nonlinear capacitance ------------------------------------------------

@pytest.mark.slow
def test_dae_with_nonlinear_capacitance_matches_a_hand_written_reference():
    """Reference: the same equations by hand, scipy.integrate.solve_ivp (Radau, rtol 1e-12)
    with scipy.optimize.brentq for the node without capacitance.

    Tolerance: simulate runs at rtol 1e-8 (default atol 3.8e-9 V here); its global error
    measured about 2.5e-8 V, 6e-8 of the 0.4 V swing, so 1e-7 V is the solver's accuracy."""
    tr = adlin.simulate(clamp_dae(), CLAMP_PULSE, 30e-6, n_points=301)
    t = np.asarray(tr.t)
    a_ref, b_ref = clamp_reference(CLAMP_PULSE, t)
    assert tr.n_dynamic == 1
    np.testing.assert_allclose(np.asarray(tr["v_b"]), b_ref, rtol=0, atol=1e-7)
    np.testing.assert_allclose(np.asarray(tr["v_a"]), a_ref, rtol=0, atol=1e-7)
    # the circuit is driven hard: the diode turns on and C(v_b) changes by a third
    cap = lambda v: DAE_PARAMS["C0"] + DAE_PARAMS["C1"] * v
    assert np.max(a_ref) > 0.6 and cap(np.max(b_ref)) / cap(np.min(b_ref)) > 1.3


def test_new_amplitude_and_parameters_do_not_retrace():
    """linear_range calls simulate many times with scaled stimuli: one trace only."""
    stim = Step("v_in", 1.0)  # the same program as the closed-form test: no new compile
    adlin.simulate(rc(), stim, 5e-3)
    before = TRACES["rc"]
    op = adlin.steady_state(rc(), params={"R": 2e3}, inputs={"v_in": 0.3})
    tr = adlin.simulate(rc(), stim.scaled(-0.5), 5e-3, op=op)
    assert TRACES["rc"] == before
    assert int(tr.status) == 0 and float(tr["v_out"][-1]) < 0.3


@pytest.mark.slow
def test_dae_new_amplitude_does_not_retrace():
    """The same with Newton inside the vector field."""
    adlin.simulate(clamp_dae(), CLAMP_PULSE, 30e-6, n_points=301)
    before = TRACES["current"]
    op = adlin.steady_state(clamp_dae(), params={"R3": 12e3})
    # (a negative swing would drive C(v_b) = C0 + C1 v_b through zero: no model there)
    tr = adlin.simulate(clamp_dae(), CLAMP_PULSE.scaled(0.5), 30e-6, op=op, n_points=301)
    assert TRACES["current"] == before
    assert int(tr.status) == 0


@pytest.mark.slow
def test_gradient_through_the_transient_matches_finite_differences():
    """d v_b(t_end) / d R2 under jit(grad) against a central difference of two runs."""
    def v_end(r2):
        tr = adlin.simulate(clamp_dae(), CLAMP_PULSE, 8e-6, params={"R2": r2}, n_points=41)
        return tr.y[-1, 0]

    g = float(jax.jit(jax.grad(v_end))(2e3))
    h = 1.0
    fd = (float(v_end(2e3 + h)) - float(v_end(2e3 - h))) / (2 * h)
    assert g == pytest.approx(fd, rel=1e-4)
    assert abs(g) > 1e-6


# --- a static model and a limit cycle ---------------------------------------------------------

def test_static_model_follows_the_lambert_w_closed_form():
    """No storage at all: the response is the sequence of steady states; the diode voltage
    is the Lambert W closed form (Banwell & Jayakumar, Electronics Letters 36(4), 2000)."""
    sys = diode_resistor(1.0)
    tr = adlin.simulate(sys, Sine("v_s", 0.5, f_hz=1e3), 1e-3, n_points=9)
    assert tr.n_dynamic == 0
    for k in range(0, 9, 2):
        v_s = 1.0 + 0.5 * math.sin(2 * math.pi * 1e3 * float(tr.t[k]))
        assert float(tr["v_a"][k]) == pytest.approx(diode_resistor_exact(v_s, 1e3, 1e-14),
                                                    abs=1e-12)


@pytest.mark.slow
def test_van_der_pol_settles_on_a_cycle_of_amplitude_two():
    """For small mu the Van der Pol limit cycle has amplitude 2 + O(mu^2) and angular
    frequency 1 + O(mu^2) (Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 7.6)."""
    mu = 0.1
    t_late = np.linspace(150.0, 200.0, 2001)
    tr = adlin.simulate(van_der_pol(mu), None, 200.0, x0={"x": 0.5, "y": 0.0}, t=t_late)
    x = np.asarray(tr["x"])
    assert np.max(np.abs(x)) == pytest.approx(2.0, abs=0.01)
    rising = np.flatnonzero((x[:-1] < 0) & (x[1:] >= 0))
    period = np.mean(np.diff(t_late[rising]))
    assert period == pytest.approx(2 * np.pi, rel=0.01)


# --- rejected inputs --------------------------------------------------------------------------

def test_higher_index_is_rejected_by_name():
    """An ideal voltage source straight across a capacitor: index 2."""
    def current(x, u, p):
        return jnp.stack([x[1], x[0] - u[0]])  # node a: source current; source: v_a = v_in

    def charge(x, p):
        return jnp.stack([1e-6 * x[0], 0.0 * x[0]])

    sys = adlin.System(current, charge, unknowns=("v_a", "i_src"), inputs=("v_in",))
    with pytest.raises(adlin.HighIndexError, match="i_src|v_a"):
        adlin.simulate(sys, Step("v_in", 1.0), 1e-3)


def test_bad_arguments_are_named():
    with pytest.raises(adlin.ParameterError, match="'v_inn'.*'v_in'"):
        adlin.simulate(rc(), Step("v_inn", 1.0), 1e-3)
    with pytest.raises(adlin.ParameterError, match="t_end"):
        adlin.simulate(rc(), Step("v_in", 1.0), -1.0)
    with pytest.raises(adlin.ParameterError, match="within"):
        adlin.simulate(rc(), Step("v_in", 1.0), 1e-3, t=[0.0, 2e-3])
    op = adlin.steady_state(rc())
    with pytest.raises(adlin.ParameterError, match="either op"):
        adlin.simulate(rc(), Step("v_in", 1.0), 1e-3, op=op, params={"R": 2e3})
    with pytest.raises(adlin.ParameterError, match="dt must be a positive"):
        adlin.simulate(rc(), Step("v_in", 1.0), 1e-3, dt=-1e-6)
    with pytest.raises(adlin.ParameterError, match="max_steps=10"):
        adlin.simulate(rc(), Step("v_in", 1.0), 1e-3, dt=1e-6, max_steps=10)
    tr = adlin.simulate(rc(), Step("v_in", 1.0), 5e-3)
    with pytest.raises(adlin.ParameterError, match="'v_ot'.*'v_out'"):
        tr["v_ot"]


# --- stiff models: the stage iteration must not fight rounding noise ----------------------


def test_widely_spread_poles_settle_in_few_steps():
    # Two cascaded first-order sections, poles -1e3 and -1e12 rad/s (the demo
    # regulator spans 1e3 .. 1.8e12), biased at 1.8 V and stepped by 1 mV.
    # The exact response of the cascade a/(s+a) * b/(s+b) to a step is
    # 1 - (b e^{-at} - a e^{-bt}) / (b - a) (partial fractions; Ogata, Modern
    # Control Engineering, 5th ed., sec. 5.3).  With the stage equations solved
    # for derivatives against the unknowns' tolerances, diffrax rejected more
    # than half of 4000 steps and stopped near 2 ms: the iteration cannot
    # resolve derivatives to 1e-11 V/s when their rounding noise is
    # eps * 1.8 V * 1e12 / s.  Solved for increments, one step per output
    # interval suffices.
    a, b, v0, dv = 1e3, 1e12, 1.8, 1e-3
    system = adlin.System.from_ode(
        lambda x, u, p: jnp.stack([p["a"] * (u[0] - x[0]), p["b"] * (x[0] - x[1])]),
        states=("x1", "x2"), inputs={"u": v0}, params={"a": a, "b": b}, name="stiff_pair")
    op = adlin.steady_state(system, strategy="newton")
    tr = adlin.simulate(system, Step("u", dv), 10e-3, op=op, n_points=401, max_steps=4000)
    assert int(tr.steps) <= 2 * 400 and int(tr.rejected_steps) <= 20
    t = np.asarray(tr.t)
    exact = v0 + dv * (1 - (b * np.exp(-a * t) - a * np.exp(-b * t)) / (b - a))
    # rtol 1e-8 on 1.8 V (the default absolute floor is rtol * |state|)
    assert np.max(np.abs(np.asarray(tr["x2"]) - exact)) < 1e-8 * v0
