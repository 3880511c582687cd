"""Steady-state strategies: each on a case plain Newton cannot solve, checked
against outside references; path-independent gradients; batches; messages."""

from __future__ import annotations

import functools
import math

import jax
import jax.numpy as jnp
import numpy as np
import pytest
import scipy.linalg
import scipy.optimize
import sympy
from closed_forms import VT, diode_resistor, diode_resistor_exact, van_der_pol
from hypothesis import example, given, settings
from hypothesis import strategies as st

import adlin
from adlin.scenarios.hard import latch as hard_latch
from adlin.strategies import (
    Auto,
    ConductanceStepping,
    Newton,
    NewtonHomotopy,
    PseudoTransient,
    SourceStepping,
)


# --- reference circuits --------------------------------------------------------------
def _tunnel_current(v, Ip, Vp, Is):
    # Tunnel current Ip (v/Vp) exp(1 - v/Vp), peaking at Ip when v = Vp (a common empirical
    # form, quoted from memory), plus the Shockley diffusion current (Sedra & Smith,
    # Microelectronic Circuits, 7th ed., sec. 4.2).
    return Ip * (v / Vp) * np.exp(1 - v / Vp) + Is * (np.exp(v / VT) - 1)


@functools.cache
def tunnel_diode() -> adlin.System:
    """Source - R - tunnel diode to ground.  With R = 100 ohm and 1.5 V the load line
    meets the diode's characteristic once, on the diffusion branch near 0.7 V; from
    0 V plain Newton stalls at the current peak, where |f| has a local minimum."""

    def current(x, u, p):
        v = x[0]
        i_t = p["Ip"] * (v / p["Vp"]) * jnp.exp(1 - v / p["Vp"])
        return jnp.stack([(v - u[0]) / p["R"] + i_t + p["Is"] * (jnp.exp(v / VT) - 1)])

    return adlin.System(current, unknowns=("v_d",), inputs={"v_s": 1.5},
                        params={"R": 100.0, "Ip": 0.01, "Vp": 0.1, "Is": 1e-14},
                        junctions=[adlin.Junction("v_d", None)], name="tunnel_diode")


def tunnel_reference(V=1.5, R=100.0, Ip=0.01, Vp=0.1, Is=1e-14) -> float:
    """The one root of (v - V)/R + i(v), by scipy's brentq on a bracket with one sign change."""
    f = lambda v: (v - V) / R + _tunnel_current(v, Ip, Vp, Is)
    grid = np.linspace(0.0, V, 20001)
    changes = np.flatnonzero(np.diff(np.sign(f(grid))))
    assert changes.size == 1  # one crossing of the load line: the answer is unique
    k = int(changes[0])
    return scipy.optimize.brentq(f, grid[k], grid[k + 1], xtol=1e-15, rtol=1e-15)


@functools.cache
def cubic_conductor() -> adlin.System:
    """Current source i_in into a node with a cubic conductor i = k v^3 to ground.
    At v = 0 the Jacobian 3 k v^2 vanishes, so Newton from zero cannot take a step."""
    return adlin.System(lambda x, u, p: jnp.stack([p["k"] * x[0] ** 3 - u[0]]),
                        unknowns=("v_n",), inputs={"i_in": 8e-3}, params={"k": 1e-3},
                        name="cubic_conductor")


def cubic_reference(i_in=8e-3, k=1e-3) -> float:
    # the one real root of k v^3 = i_in, from sympy
    v = sympy.Symbol("v", real=True)
    (root,) = sympy.solve(sympy.Float(k, 30) * v**3 - sympy.Float(i_in, 30), v)
    return float(root)


@functools.cache
def no_solution() -> adlin.System:
    # x^2 + c = 0 has no real root for c > 0
    return adlin.System(lambda x, u, p: jnp.stack([x[0] ** 2 + p["c"] + 0.0 * x[0]]),
                        unknowns=("x",), params={"c": 1.0}, name="no_real_root")


# --- every strategy agrees with the published closed form ----------------------------
ALL = ["newton", "conductance", "source", "pseudo-transient", "homotopy"]


@pytest.mark.parametrize("strategy", ALL)
def test_each_strategy_matches_lambert_w(strategy):
    """Diode and resistor at 50 V: Lambert W closed form (Banwell & Jayakumar,
    Electronics Letters 36(4), 2000)."""
    op = adlin.steady_state(diode_resistor(1.0), inputs={"v_s": 50.0}, strategy=strategy)
    assert op.method == strategy
    assert float(op["v_a"]) == pytest.approx(diode_resistor_exact(50.0, 1e3, 1e-14), rel=1e-12)
    assert op.attempts.tolist() == [0 if k == strategy else -1 for k in ALL]
    assert int(op.evaluations) >= int(op.attempt_evaluations.sum())


# --- cases plain Newton cannot solve --------------------------------------------------
def test_plain_newton_fails_on_the_reference_cases():
    op = adlin.steady_state(tunnel_diode(), strategy="newton", throw=False)
    assert not bool(op.converged) and int(op.status) == 1  # stalls at the peak
    op = adlin.steady_state(cubic_conductor(), strategy="newton", throw=False)
    assert not bool(op.converged) and int(op.status) == 2  # singular at zero


@pytest.mark.parametrize("strategy", [PseudoTransient(), NewtonHomotopy(),
                                      SourceStepping(sources=("Ip",))],
                         ids=["pseudo-transient", "homotopy", "source(Ip)"])
def test_tunnel_diode_past_the_peak(strategy):
    op = adlin.steady_state(tunnel_diode(), strategy=strategy)
    assert float(op["v_d"]) == pytest.approx(tunnel_reference(), rel=1e-12)
    assert op.method == strategy.name


def test_source_stepping_stops_at_the_fold_and_says_where():
    """Ramping v_s walks the first branch up to the current peak, where that branch
    ends (a fold): the step underflows there, near v_s = Vp + R Ip = 1.1 V, i.e.
    source scale 1.1 / 1.5 = 0.73 (load line tangent at the peak, hand derivation)."""
    op = adlin.steady_state(tunnel_diode(), strategy="source", throw=False)
    assert not bool(op.converged)
    assert op.attempts[2] == 4
    scale = float(op.attempt_progress[2])
    assert 0.6 < scale < 0.75
    assert "step size underflow at source scale 0.7" in op.attempts_message


@pytest.mark.parametrize("strategy", [ConductanceStepping(), PseudoTransient(), NewtonHomotopy()],
                         ids=["conductance", "pseudo-transient", "homotopy"])
def test_cubic_conductor_from_a_singular_start(strategy):
    op = adlin.steady_state(cubic_conductor(), strategy=strategy)
    assert float(op["v_n"]) == pytest.approx(cubic_reference(), rel=1e-13)


def test_auto_escalates_and_records_what_it_tried():
    op = adlin.steady_state(tunnel_diode())
    assert float(op["v_d"]) == pytest.approx(tunnel_reference(), rel=1e-12)
    assert op.method == "pseudo-transient"
    assert op.attempts.tolist()[:4] == [1, 5, 4, 0] and int(op.attempts[4]) == -1
    names = [name for name, _, _ in op.history]
    assert names == ["newton", "conductance", "source", "pseudo-transient"]
    assert int(op.evaluations) > int(op.attempt_evaluations.sum()) - 1
    assert "newton: no convergence after 200 iterations" in op.attempts_message


# --- derivatives do not depend on the path ------------------------------------------
def _dv_dR_closed_form(v, V=1.5, R=100.0, Ip=0.01, Vp=0.1, Is=1e-14):
    # implicit differentiation of (v - V)/R + i(v) = 0:  dv/dR = ((v - V)/R^2) / (1/R + i'(v))
    di = Ip / Vp * (1 - v / Vp) * math.exp(1 - v / Vp) + Is / VT * math.exp(v / VT)
    return ((v - V) / R**2) / (1 / R + di)


@pytest.mark.parametrize("strategy", ["pseudo-transient", "homotopy", SourceStepping(("Ip",))],
                         ids=["pseudo-transient", "homotopy", "source(Ip)"])
def test_gradient_is_path_independent(strategy):
    system = tunnel_diode()

    def v_of(R, strategy, guess=None):
        return adlin.steady_state(system, params={"R": R}, guess=guess, strategy=strategy).x[0]

    g = float(jax.grad(v_of)(100.0, strategy))
    g_newton = float(jax.grad(v_of)(100.0, "newton", {"v_d": 0.7}))  # good guess
    h = 1e-4
    fd = (tunnel_reference(R=100.0 + h) - tunnel_reference(R=100.0 - h)) / (2 * h)
    assert g == pytest.approx(g_newton, rel=1e-12)
    assert g == pytest.approx(_dv_dR_closed_form(tunnel_reference()), rel=1e-9)
    assert g == pytest.approx(fd, rel=1e-6)


@pytest.mark.slow  # compiles the whole chain (~13 s on 2 shared cores)
def test_traced_auto_chain_matches_closed_form():
    """Under grad and jit, auto is one pure-JAX chain; it reaches the same state by the
    same strategy and its derivative is the implicit one."""
    system = tunnel_diode()
    g = float(jax.grad(lambda R: adlin.steady_state(system, params={"R": R}).x[0])(100.0))
    assert g == pytest.approx(_dv_dR_closed_form(tunnel_reference()), rel=1e-9)
    op = jax.jit(lambda R: adlin.steady_state(system, params={"R": R}))(100.0)
    assert op.method == "pseudo-transient"
    assert op.attempts.tolist() == [1, 5, 4, 0, -1]
    assert int(op.evaluations) >= int(op.attempt_evaluations.sum())


# --- batches ----------------------------------------------------------------------
@pytest.mark.slow  # two batched programs (~13 s on 2 shared cores)
def test_vmap_reports_per_lane_status_and_strategy():
    system = tunnel_diode()
    V = jnp.array([0.2, 1.5, 3.0])
    ops = jax.vmap(lambda v: adlin.steady_state(system, inputs={"v_s": v},
                                                strategy="homotopy", throw=False))(V)
    assert ops.converged.tolist() == [True, True, True]
    ref = [tunnel_reference(V=float(v)) if float(v) > 1.1 else None for v in V]
    np.testing.assert_allclose(np.asarray(ops.x[1:, 0]), ref[1:], rtol=1e-12)
    assert ops.method == "homotopy"
    bad = jax.vmap(lambda c: adlin.steady_state(no_solution(), params={"c": c}, guess={"x": 1.0},
                                                strategy=PseudoTransient(), throw=False))(
        jnp.array([-4.0, 1.0]))
    assert bad.converged.tolist() == [True, False]
    assert float(bad.x[0, 0]) == pytest.approx(2.0, rel=1e-12)
    assert np.all(np.isfinite(np.asarray(bad.x)))
    assert bad.attempts[:, 3].tolist()[0] == 0 and bad.attempts[1, 3] > 0


# --- configuration and messages ----------------------------------------------------
def test_strategy_names_and_instances_resolve():
    cs = adlin.compile(diode_resistor(1.0))
    assert cs.solve_with(Newton()) is cs.solve
    assert cs.solve_with(PseudoTransient()) is cs.solve_with(PseudoTransient())
    with pytest.raises(adlin.ParameterError, match=r"unknown steady-state strategy 'homotopie'"
                                                   r".*'homotopy'"):
        adlin.steady_state(diode_resistor(1.0), strategy="homotopie")
    with pytest.raises(adlin.ParameterError, match=r"source 'Ipp'.*'Ip'"):
        adlin.steady_state(tunnel_diode(), strategy=SourceStepping(sources=("Ipp",)))
    with pytest.raises(adlin.ParameterError, match="start_conductance must be positive"):
        ConductanceStepping(start_conductance=-1.0)
    with pytest.raises(adlin.ParameterError, match="scaling must be one of"):
        PseudoTransient(scaling="identity")
    with pytest.raises(adlin.ParameterError, match="cannot be nested"):
        Auto(order=("newton", Auto()))


@pytest.mark.slow  # compiles every strategy for a new model (~13 s on 2 shared cores)
def test_auto_failure_says_what_it_tried():
    with pytest.raises(adlin.SteadyStateError,
                       match=r"not found after \d+ residual evaluations \(tried newton: .*; "
                             r"conductance: .*; source: .*; pseudo-transient: .*; homotopy: .*"
                             r"'x' equation off by"):
        adlin.steady_state(no_solution(), guess={"x": 1.0})


def test_single_strategy_failure_suggests_auto():
    with pytest.raises(adlin.SteadyStateError, match=r"tried source: step size underflow.*"
                                                     r"try strategy='auto'"):
        adlin.steady_state(tunnel_diode(), strategy="source")


# --- prefer a stable state -----------------------------------------------------------
@functools.cache
def latch() -> adlin.System:
    """Two cross-coupled gain stages: v1' = -v1 + a tanh(v2), v2' = -v2 + a tanh(v1)."""

    def h(x, u, p):
        return jnp.stack([-x[0] + p["a"] * jnp.tanh(x[1]), -x[1] + p["a"] * jnp.tanh(x[0])])

    return adlin.System.from_ode(h, states=("v_1", "v_2"), params={"a": 2.0}, name="latch")


def test_prefer_stable_leaves_the_saddle_of_a_latch():
    """With a = 2 the origin is a saddle: the Jacobian there is [[-1, a], [a, -1]], with
    eigenvalues -1 +- a = 1, -3 (hand linearization).  The stable states are
    +-(s, s) with s = a tanh(s) (root by scipy's brentq), where the eigenvalues
    -1 +- a sech^2(s) are both negative.  The model has no input, so the power-up run
    starts and stays at the saddle; the run from beside it along +d, d = (1, 1) with
    its largest entry positive, is tried first and ends at +(s, s)."""
    op = adlin.steady_state(latch(), strategy="newton")
    np.testing.assert_allclose(np.asarray(op.x), [0.0, 0.0], atol=1e-14)
    np.testing.assert_allclose(np.sort(adlin.linearize(latch(), op).poles().real), [-3.0, 1.0],
                               rtol=1e-12)
    stable = adlin.steady_state(latch())  # auto prefers a stable state by default
    s_ref = scipy.optimize.brentq(lambda s: s - 2.0 * np.tanh(s), 0.5, 3.0, xtol=1e-15)
    np.testing.assert_allclose(np.asarray(stable.x), [s_ref, s_ref], rtol=1e-12)
    assert stable.method == "pseudo-transient"
    assert [name for name, _, _ in stable.history] == ["newton", "pseudo-transient"]
    sech2 = 1.0 / math.cosh(s_ref) ** 2
    np.testing.assert_allclose(np.sort(adlin.linearize(latch(), stable).poles().real),
                               [-1 - 2 * sech2, -1 + 2 * sech2], rtol=1e-10)
    kept = adlin.steady_state(latch(), strategy=Auto(prefer_stable=False))
    np.testing.assert_allclose(np.asarray(kept.x), [0.0, 0.0], atol=1e-14)


def test_prefer_stable_keeps_an_oscillator_bias():
    """The Van der Pol origin is its only equilibrium and unstable for mu > 0 (Strogatz,
    Nonlinear Dynamics and Chaos, 2nd ed., sec. 7.6): it must still be returned, with a
    note that no stable state was found."""
    op = adlin.steady_state(van_der_pol(0.5), guess={"x": 0.3, "y": -0.2})
    np.testing.assert_allclose(np.asarray(op.x), [0.0, 0.0], atol=1e-12)
    assert op.method == "newton" and bool(op.converged)
    assert "pseudo-transient: found no stable state" in op.attempts_message
    # the origin is an unstable focus (poles mu/2 +- i sqrt(1 - mu^2/4), same section) and
    # the run from the guess oscillates without settling: no runs from beside the focus,
    # so the evaluations are Newton's plus one pseudo-transient run's
    slots = np.asarray(op.attempt_evaluations)
    assert int(op.evaluations) == int(slots.sum())


def test_real_and_complex_unstable_poles_are_told_apart():
    """Hand pencils (E = I): the latch saddle [[-1, 2], [2, -1]] has the real unstable
    pole +1; the Van der Pol linearization [[0, 1], [-1, mu]] at mu = 0.5 has the
    complex pair mu/2 +- i sqrt(1 - mu^2/4) (Strogatz sec. 7.6); a stable node has none."""
    from adlin._steady.stability import has_real_unstable_pole

    eye = np.eye(2)
    assert has_real_unstable_pole(eye, np.array([[-1.0, 2.0], [2.0, -1.0]]))
    assert not has_real_unstable_pole(eye, np.array([[0.0, 1.0], [-1.0, 0.5]]))
    assert not has_real_unstable_pole(eye, np.array([[-1.0, 0.0], [0.0, -2.0]]))
    # an algebraic unknown (a zero row of E) gives an infinite eigenvalue, not a pole
    E = np.diag([1.0, 0.0])
    assert has_real_unstable_pole(E, np.array([[1.0, 0.0], [0.0, -1.0]]))


@functools.cache
def bistable_cell() -> adlin.System:
    """dx/dt = x - x^3: unstable at 0 (slope +1), stable at +-1 (slope -2)."""
    return adlin.System.from_ode(lambda x, u, p: jnp.stack([x[0] - x[0] ** 3]),
                                 states=("x",), name="bistable_cell")


@settings(max_examples=12, deadline=None)
@given(start=st.floats(1e-9, 0.9), sign=st.sampled_from([1.0, -1.0]))
@example(start=1e-6, sign=1.0)  # without the step cap the run falls back into 0 from here
def test_storage_pseudo_transient_follows_the_flow_away_from_an_unstable_state(start, sign):
    """Law of the phase line of dx/dt = x - x^3 (Strogatz, Nonlinear Dynamics and Chaos,
    2nd ed., sec. 2.2): every solution that starts in (0, 1) ends at +1, every one in
    (-1, 0) at -1.  Backward Euler with growing steps would fall back into the unstable
    root 0 (it is a root of f like the others); the storage-scaled run must not."""
    op = adlin.steady_state(bistable_cell(), guess={"x": sign * start},
                            strategy=PseudoTransient(scaling="storage"))
    assert float(op["x"]) == pytest.approx(sign, rel=1e-12)


def test_storage_pseudo_transient_runs_batched():
    """Same phase-line law under jit(vmap): one lane per start, each ends on its side."""
    starts = jnp.array([-0.5, -1e-6, 1e-6, 0.5, 3.0])
    ops = jax.jit(jax.vmap(lambda x0: adlin.steady_state(
        bistable_cell(), guess=jnp.stack([x0]), strategy=PseudoTransient(scaling="storage"),
        throw=False)))(starts)
    assert ops.converged.tolist() == [True] * 5
    np.testing.assert_allclose(np.asarray(ops.x[:, 0]), np.sign(np.asarray(starts)), rtol=1e-12)


def test_storage_pseudo_transient_checks_its_ramp():
    with pytest.raises(adlin.ParameterError, match="ramp_steps .* must be smaller"):
        PseudoTransient(scaling="storage", ramp_steps=400, max_steps=400)
    with pytest.raises(adlin.ParameterError, match="max_change must be positive"):
        SourceStepping(max_change=0.0)


# --- the preset latch of the hard corpus: the state it powers up in --------------------
@functools.cache
def latch_power_up_reference() -> np.ndarray:
    """Outside definition of the power-up state: scipy.optimize.root (MINPACK hybrd)
    along a fine supply ramp (all inputs times s, s = 0 -> 1 in 400 steps, each point
    from the previous one), then polished at s = 1."""
    system = hard_latch.preset_latch()
    u1 = np.asarray(system.input_vector())
    p = system.param_vector()
    f = jax.jit(lambda x, u: system.f(x, u, p))
    jac = jax.jit(jax.jacfwd(lambda x, u: system.f(x, u, p)))
    x = np.zeros(system.n)
    for s in np.linspace(0.0, 1.0, 401)[1:]:
        sol = scipy.optimize.root(lambda x, u=s * u1: np.asarray(f(x, u)), x,
                                  jac=lambda x, u=s * u1: np.asarray(jac(x, u)), method="hybr")
        # hybrd may stop with "not making good progress" at a point already solved
        assert sol.success or np.max(np.abs(sol.fun)) < 1e-15, f"scipy ramp lost at s = {s}"
        x = sol.x
    sol = scipy.optimize.root(lambda x: np.asarray(f(x, u1)), x,
                              jac=lambda x: np.asarray(jac(x, u1)), method="hybr",
                              options={"xtol": 1e-13})
    assert sol.success or np.max(np.abs(sol.fun)) < 1e-15, sol.message
    return sol.x


def _stable(system, op) -> bool:
    lin = adlin.linearize(system, op)
    w = scipy.linalg.eigvals(np.asarray(lin.A), np.asarray(lin.E))
    return bool(np.all(w[np.isfinite(w)].real < 0))


@pytest.mark.slow  # compiles Newton, the power-up run and source stepping (~1 min loaded)
def test_preset_latch_reaches_its_power_up_state():
    """Newton from zero lands on the latch's metastable saddle; auto (prefer_stable by
    default) and source stepping (branch-keeping controls) both return the state a slow
    supply ramp ends in, q at the supply and qb at ground (the corpus entry's intended
    state), which is stable (scipy QZ on the pencil (A, E))."""
    system = hard_latch.preset_latch()
    ref = latch_power_up_reference()
    q, qb = system.unknowns.index("v_q"), system.unknowns.index("v_qb")
    assert ref[q] > 0.9 * hard_latch.V_DD and ref[qb] < 0.1 * hard_latch.V_DD
    saddle = adlin.steady_state(system, strategy="newton")
    assert not _stable(system, saddle)
    for strategy in ("auto", "source"):
        op = adlin.steady_state(system, strategy=strategy)
        np.testing.assert_allclose(np.asarray(op.x), ref, rtol=1e-7, atol=1e-9)
        assert _stable(system, op)
    op = adlin.steady_state(system)
    assert op.method == "pseudo-transient"
    assert [name for name, _, _ in op.history] == ["newton", "pseudo-transient"]
