"""adlin.steady_states: several steady states by deflation and source ramp, classified.

Every check names the outside source of its expected value beside it.
"""

from __future__ import annotations

import functools
import math

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from closed_forms import diode_resistor, diode_resistor_exact, series_rlc, van_der_pol
from hypothesis import given, settings
from hypothesis import strategies as st

import adlin
from adlin._equilibria.classify import classify_poles, pole_counts
from adlin._equilibria.deflation import deflation_factor


# --- models (each built once per module) ------------------------------------------------------
@functools.cache
def cubic() -> adlin.System:
    """x' = r + x - x^3: Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., sec. 3.6
    (imperfect bifurcation h + r x - x^3 with r = 1, h = our r)."""

    def h(x, u, p):
        return jnp.stack([p["r"] + x[0] - x[0] ** 3])

    return adlin.System.from_ode(h, states=("x",), params={"r": 0.0}, name="cubic")


# Tunnel-diode circuit of Khalil, Nonlinear Systems, 3rd ed., 2002, Example 2.1
# (quoted from memory): x1 = capacitor voltage (V), x2 = inductor current (mA),
# time in ns, C = 2 pF, L = 5 uH, R = 1.5 kOhm, E = 1.2 V,
#   C x1' = -h(x1) + x2,   L x2' = -x1 - R x2 + E,
#   h(x1) = 17.76 x1 - 103.79 x1^2 + 229.62 x1^3 - 226.31 x1^4 + 83.72 x1^5  (mA).
# With currents in mA and time in ns, 1 mA / 1 pF = 1 V/ns and 1 V / 1 uH = 1 mA/ns,
# so the book's 0.5 and 0.2 are 1/C and 1/L.  The book finds three equilibria,
# Q1 = (0.063, 0.758) and Q3 = (0.884, 0.21) stable nodes, Q2 = (0.285, 0.61) a saddle.
TUNNEL_H = (17.76, -103.79, 229.62, -226.31, 83.72)


def tunnel_h(v):
    return sum(c * v ** (k + 1) for k, c in enumerate(TUNNEL_H))


@functools.cache
def tunnel_diode() -> adlin.System:
    def field(x, u, p):
        v, i = x
        return jnp.stack([(-tunnel_h(v) + i) / p["C"], (-v - p["R"] * i + u[0]) / p["L"]])

    return adlin.System.from_ode(field, states=("v_C", "i_L"), inputs={"E": 1.2},
                                 params={"C": 2.0, "L": 5.0, "R": 1.5}, name="tunnel_diode",
                                 units={"v_C": "V", "i_L": "mA"})


def tunnel_reference(E=1.2, R=1.5):
    """Equilibria from numpy.roots of h(v) - (E - v)/R = 0 and their Jacobian's eigenvalues."""
    ascending = np.array((0.0, *TUNNEL_H))
    ascending[0] -= E / R
    ascending[1] += 1.0 / R
    roots = np.roots(ascending[::-1])
    v = np.sort(roots[np.abs(roots.imag) < 1e-9].real)
    dh = np.polyder(np.array((*TUNNEL_H[::-1], 0.0)))
    out = []
    for vk in v:
        J = np.array([[-np.polyval(dh, vk) / 2.0, 1 / 2.0], [-1 / 5.0, -R / 5.0]])
        out.append(((vk, (E - vk) / R), np.linalg.eigvals(J)))
    return out


@functools.cache
def latch() -> adlin.System:
    """Two identical CMOS inverters in a ring (an SRAM-style latch), 10 fF per node."""
    c = adlin.Circuit("latch")
    c.input("v_dd", 1.8, unit="V")
    c.voltage_source("VDD", "vdd", "gnd", "v_dd")
    law = dict(transconductance_parameter=2e-4, threshold_voltage=0.5)
    for a, b, k in (("q", "qb", "1"), ("qb", "q", "2")):
        c.mosfet("MN" + k, d=b, g=a, s="gnd", b="gnd", **law)
        c.mosfet("MP" + k, d=b, g=a, s="vdd", b="vdd", polarity="pmos", **law)
        c.capacitor("C" + k, b, "gnd", 10e-15)
    return c.build()


@functools.cache
def linear2() -> adlin.System:
    """x' = M x + b with M = [[a, b], [c, d]]: one equilibrium with poles eig(M)."""

    def h(x, u, p):
        return jnp.stack([p["a"] * x[0] + p["b"] * x[1] + u[0],
                          p["c"] * x[0] + p["d"] * x[1] + u[1]])

    return adlin.System.from_ode(h, states=("x", "y"), inputs={"b1": 1.0, "b2": -0.5},
                                 params={"a": -1.0, "b": 0.0, "c": 0.0, "d": -2.0},
                                 name="linear2")


# --- the cubic: Strogatz sec. 2.4 (linear stability: the pole is f'(x*)) and 3.6 --------------
def test_cubic_three_equilibria_at_r_zero():
    """r = 0: x* = -1, 0, 1 (roots of x - x^3); poles f'(x*) = 1 - 3x*^2 = -2, 1, -2."""
    res = adlin.steady_states(cubic(), params={"r": 0.0})
    assert len(res) == 3
    np.testing.assert_allclose(res.x[:, 0], [-1.0, 0.0, 1.0], atol=1e-12)
    assert res.labels == ("stable node", "unstable node", "stable node")
    for op, poles in zip(res, res.poles, strict=True):
        x = float(op["x"])
        np.testing.assert_allclose(np.asarray(poles), [1 - 3 * x**2], rtol=1e-12, atol=1e-12)
    assert [op["x"] for op in res.stable] == [res[0]["x"], res[2]["x"]]


def test_cubic_single_equilibrium_beyond_the_cusp():
    """r = 0.5 > r_c = 2/(3 sqrt 3) = 0.385 (Strogatz sec. 3.6): one real root (numpy.roots)."""
    res = adlin.steady_states(cubic(), params={"r": 0.5})
    roots = np.roots([-1.0, 0.0, 1.0, 0.5])
    real = roots[np.abs(roots.imag) < 1e-9].real
    assert len(res) == len(real) == 1
    assert float(res[0]["x"]) == pytest.approx(float(real[0]), rel=1e-12)
    assert res.labels == ("stable node",)


@settings(max_examples=20, deadline=None, derandomize=True)
@given(st.floats(-1.0, 1.0).filter(lambda r: abs(abs(r) - 2 / (3 * math.sqrt(3))) > 0.02))
def test_cubic_count_and_stability_follow_the_real_roots(r):
    """Law: as many states as real roots of r + x - x^3 (numpy.roots), each stable iff
    f'(x*) = 1 - 3 x*^2 < 0 (Strogatz sec. 2.4).  r near the folds r = +-r_c is left
    out: there two roots nearly coincide."""
    res = adlin.steady_states(cubic(), params={"r": r}, ramp=False)
    roots = np.roots([-1.0, 0.0, 1.0, r])
    real = np.sort(roots[np.abs(roots.imag) < 1e-7].real)
    assert len(res) == len(real)
    np.testing.assert_allclose(res.x[:, 0], real, rtol=1e-9, atol=1e-12)
    for x, label in zip(real, res.labels, strict=True):
        assert label == ("stable node" if 1 - 3 * x**2 < 0 else "unstable node")


def test_max_states_caps_the_search():
    res = adlin.steady_states(cubic(), max_states=2)
    assert len(res) == 2
    assert all(abs(abs(x) - 1.0) < 1e-12 or abs(x) < 1e-12 for x in res.x[:, 0])


# --- Khalil's tunnel diode --------------------------------------------------------------------
def _check_tunnel(res):
    ref = tunnel_reference()
    assert len(ref) == 3
    assert len(res) == 3
    for op, poles, ((v, i), eig) in zip(res, res.poles, ref, strict=True):
        assert float(op["v_C"]) == pytest.approx(v, rel=1e-9)
        assert float(op["i_L"]) == pytest.approx(i, rel=1e-9)
        np.testing.assert_allclose(np.sort_complex(np.asarray(poles)), np.sort_complex(eig),
                                   rtol=1e-9)
    # Khalil, Example 2.1: Q1 and Q3 stable nodes, Q2 a saddle
    assert res.labels == ("stable node", "saddle", "stable node")
    # the book's rounded values (from memory), to three decimals
    np.testing.assert_allclose(res.x, [[0.063, 0.758], [0.285, 0.61], [0.884, 0.21]], atol=1.5e-3)


def test_tunnel_diode_by_deflation():
    res = adlin.steady_states(tunnel_diode(), ramp=False)
    _check_tunnel(res)
    assert res.found_by[0] == "newton from guess 0"  # Q1 from v = 0 by plain Newton
    assert all(how.startswith("deflation") for how in res.found_by[1:])
    assert res.evaluations > 0


@pytest.mark.slow
def test_tunnel_diode_source_ramp_crosses_three_times():
    """Ramping E from 0 follows the S-shaped load-line branch E = v + R h(v), which folds
    at E = 1.64 V and 0.66 V (numpy: extrema of the polynomial), so it crosses E = 1.2 V
    three times."""
    res = adlin.steady_states(tunnel_diode(), deflation=False)
    _check_tunnel(res)
    assert res.found_by == ("source ramp",) * 3
    assert res.ramp_note == "reached the stop value"


# --- cross-coupled latch ----------------------------------------------------------------------
@pytest.mark.slow
def test_latch_two_stable_states_and_a_saddle():
    """A symmetric CMOS latch holds either value (two stable states, mirror images) and
    has a metastable saddle at v_q = v_qb = V_M = V_DD/2, the switching threshold of an
    inverter with equal n and p devices (Rabaey, Chandrakasan & Nikolic, Digital
    Integrated Circuits, 2nd ed., 2003, sec. 5.3; from memory).  Static CMOS swings rail
    to rail: V_OH = V_DD, V_OL = 0 (same section)."""
    system = latch()
    res = adlin.steady_states(system)
    assert len(res) == 3
    assert sorted(res.labels) == ["saddle", "stable node", "stable node"]
    saddle = res[res.labels.index("saddle")]
    assert float(saddle["v_q"]) == pytest.approx(0.9, rel=1e-9)
    assert float(saddle["v_qb"]) == pytest.approx(0.9, rel=1e-9)
    a, b = res.stable
    assert float(a["v_q"]) == pytest.approx(float(b["v_qb"]), abs=1e-12)
    assert float(a["v_qb"]) == pytest.approx(float(b["v_q"]), abs=1e-12)
    highs = sorted([float(a["v_q"]), float(a["v_qb"])])
    assert highs[0] == pytest.approx(0.0, abs=1e-6) and highs[1] == pytest.approx(1.8, abs=1e-6)
    # the saddle's unstable pole: one positive real pole (regenerative mode)
    rows = res.table()
    assert rows[res.labels.index("saddle")]["unstable_poles"] == 1


# --- single state -----------------------------------------------------------------------------
def test_diode_resistor_has_one_state():
    """A diode fed through a resistor has one operating point (the load line meets the
    monotone Shockley curve once); its value is the Lambert W closed form (Banwell &
    Jayakumar, Electronics Letters 36(4), 2000).  No storage: no poles, "static"."""
    system = diode_resistor(1.0)
    res = adlin.steady_states(system, inputs={"v_s": 5.0})
    assert len(res) == 1
    assert float(res[0]["v_a"]) == pytest.approx(diode_resistor_exact(5.0, 1e3, 1e-14),
                                                 rel=1e-12)
    assert res.labels == ("static",)
    assert res.stable.labels == ()


# --- classification ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    "M, label",
    [
        ([[-1.0, 0.0], [0.0, -2.0]], "stable node"),  # eigenvalues -1, -2
        ([[-1.0, 2.0], [-2.0, -1.0]], "stable focus"),  # -1 +- 2j
        ([[1.0, 0.0], [0.0, -3.0]], "saddle"),  # 1, -3
        ([[2.0, 0.0], [1.0, 3.0]], "unstable node"),  # 2, 3
        ([[0.5, 1.0], [-1.0, 0.5]], "unstable focus"),  # 0.5 +- 1j
        ([[0.0, 1.0], [-1.0, 0.0]], "marginal"),  # +-1j (a centre)
    ],
)
def test_linear_systems_fall_into_their_class(M, label):
    """Equilibria of x' = M x + b with known eigenvalues, in the classes of Strogatz
    sec. 5.2 (node, focus = spiral, saddle; a centre is not hyperbolic).  The equilibrium
    is -M^-1 b (numpy.linalg.solve)."""
    (a, b), (c, d) = M
    res = adlin.steady_states(linear2(), params={"a": a, "b": b, "c": c, "d": d}, ramp=False)
    assert len(res) == 1
    np.testing.assert_allclose(res.x[0], np.linalg.solve(np.array(M), -np.array([1.0, -0.5])),
                               rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(np.sort_complex(np.asarray(res.poles[0])),
                               np.sort_complex(np.linalg.eigvals(np.array(M))), atol=1e-12)
    assert res.labels == (label,)


@settings(max_examples=200, deadline=None, derandomize=True)
@given(st.lists(st.floats(-3.0, 3.0), min_size=4, max_size=4))
def test_classes_match_the_trace_determinant_plane(m):
    """Strogatz sec. 5.2: with tau = trace, Delta = det, Delta < 0 is a saddle; Delta > 0
    and tau^2 - 4 Delta < 0 a focus (spiral), > 0 a node; stable iff tau < 0.  Borders
    (Delta, tau or the discriminant near zero) are left out."""
    M = np.array(m).reshape(2, 2)
    tau, delta = np.trace(M), np.linalg.det(M)
    disc = tau**2 - 4 * delta
    if min(abs(delta), abs(tau), abs(disc)) < 1e-3:
        return
    label = classify_poles(np.linalg.eigvals(M))
    if delta < 0:
        assert label == "saddle"
    else:
        kind = "focus" if disc < 0 else "node"
        assert label == ("stable " if tau < 0 else "unstable ") + kind


def test_classes_in_three_dimensions():
    """Kuznetsov, Elements of Applied Bifurcation Theory, 3rd ed., 2004, ch. 2 (from memory): the
    counts (n-, n0, n+) decide; n- n+ != 0 is a saddle (also with a complex pair),
    n0 > 0 is not hyperbolic."""
    assert classify_poles([-1.0, -2.0 + 3.0j, -2.0 - 3.0j]) == "stable focus"
    assert classify_poles([1.0, -2.0 + 3.0j, -2.0 - 3.0j]) == "saddle"
    assert classify_poles([-1.0, -2.0, 4.0]) == "saddle"
    assert classify_poles([1.0, 2.0, 3.0]) == "unstable node"
    assert classify_poles([-1.0, 1e-9j, -1e-9j]) == "marginal"
    assert classify_poles([-1.0, 0.0, -2.0]) == "marginal"
    assert classify_poles([]) == "static"
    assert pole_counts([-1.0, 2.0, 3.0j, -3.0j]) == (1, 2, 1)
    # widely spread poles: a slow real pole is not marginal next to a fast one
    assert classify_poles([-1.0, -1e9]) == "stable node"


@pytest.mark.parametrize("R, label", [(0.5, "stable focus"), (2.0, "stable node")])
def test_series_rlc_focus_below_critical_damping(R, label):
    """Series RLC, L = C = 1: zeta = (R/2) sqrt(C/L); underdamped (zeta < 1) gives complex
    poles, overdamped real ones (Alexander & Sadiku, Fundamentals of Electric Circuits,
    6th ed., sec. 8.5).  Poles: roots of s^2 + (R/L) s + 1/(LC) (numpy.roots)."""
    res = adlin.steady_states(series_rlc(1.0, 1.0, 1.0), inputs={"v_in": 1.0}, params={"R": R},
                              ramp=False)
    assert len(res) == 1
    assert float(res[0]["v_c"]) == pytest.approx(1.0, rel=1e-12)  # C charged to the source
    np.testing.assert_allclose(np.sort_complex(np.asarray(res.poles[0])),
                               np.sort_complex(np.roots([1.0, R, 1.0])), rtol=1e-12)
    assert res.labels == (label,)


@pytest.mark.parametrize("mu, label", [(0.5, "unstable focus"), (3.0, "unstable node")])
def test_van_der_pol_origin_is_unstable(mu, label):
    """Origin of the Van der Pol oscillator: eigenvalues (mu +- sqrt(mu^2 - 4))/2, a
    focus for mu < 2 and a node for mu > 2 (Strogatz sec. 7.6 and 6.3)."""
    res = adlin.steady_states(van_der_pol(mu))
    assert len(res) == 1
    np.testing.assert_allclose(res.x[0], [0.0, 0.0], atol=1e-14)
    assert res.labels == (label,)
    assert res.table()[0]["growth_rate_rad_s"] == pytest.approx(
        (mu + np.sqrt(complex(mu**2 - 4))).real / 2, rel=1e-12)


# --- deflation operator -----------------------------------------------------------------------
def test_deflated_newton_step_is_a_scaled_newton_step():
    """For G = M f, dG/dx = M J + f grad(M)^T, and Sherman-Morrison (Golub & Van Loan,
    Matrix Computations, 4th ed., sec. 2.1.4, from memory) gives the Newton step of G as
    the Newton step dx of f times 1 / (1 - grad(ln M) . dx).  The shifted operator of
    Farrell, Birkisson & Funke (SIAM J. Sci. Comput. 2015) tends to 1 far from the roots
    (shift 1) and is large near one."""
    system = tunnel_diode()
    u, p = system.input_vector(), system.param_vector()
    roots = jnp.array([[0.1, 0.7], [0.9, 0.2], [0.0, 0.0]])
    mask = jnp.array([True, True, False])
    scale = jnp.array([0.5, 0.8])

    def M(x):
        return deflation_factor(x, roots, mask, scale, 2.0, 1.0)

    def G(x):
        return M(x) * system.f(x, u, p)

    @jax.jit
    def steps(x):
        J = jax.jacfwd(lambda z: system.f(z, u, p))(x)
        dx = -jnp.linalg.solve(J, system.f(x, u, p))
        dG = -jnp.linalg.solve(jax.jacfwd(G)(x), G(x))
        tau = 1.0 / (1.0 - jax.grad(lambda z: jnp.log(M(z)))(x) @ dx)
        return dG, tau * dx

    dG, scaled = steps(jnp.array([0.4, 0.5]))
    np.testing.assert_allclose(np.asarray(dG), np.asarray(scaled), rtol=1e-10)
    assert float(M(jnp.array([1e6, -1e6]))) == pytest.approx(1.0, abs=1e-10)
    assert float(M(roots[0] + 1e-6)) > 1e10
    # padded rows do not count, and give finite derivatives
    assert bool(jnp.all(jnp.isfinite(jax.grad(M)(roots[2]))))


# --- results and errors -----------------------------------------------------------------------
def test_table_rows_and_indexing():
    res = adlin.steady_states(cubic())
    rows = res.table()
    assert [r["index"] for r in rows] == [0, 1, 2]
    assert [r["class"] for r in rows] == list(res.labels)
    assert [r["stable"] for r in rows] == [True, False, True]
    for row, op in zip(rows, res, strict=True):
        assert row["values"]["x"] == float(op["x"])
        assert row["residual"] < 1e-12
    assert res[-1] is res.states[2]
    assert "3 found" in repr(res)
    with pytest.raises(adlin.AnalysisError, match="3 states"):
        res[3]
    with pytest.raises(adlin.AnalysisError, match="integer"):
        res["x"]
    assert len(jax.tree_util.tree_leaves(res)) > 0  # a pytree


def test_bad_arguments_name_the_culprit():
    system = cubic()
    with pytest.raises(adlin.AnalysisError, match="max_states"):
        adlin.steady_states(system, max_states=0)
    with pytest.raises(adlin.ParameterError, match="'r'"):
        adlin.steady_states(system, params={"rr": 1.0})
    with pytest.raises(adlin.AnalysisError, match="nothing to do"):
        adlin.steady_states(system, ramp=False, deflation=False)
    with pytest.raises(adlin.ParameterError, match="not an unknown"):
        adlin.steady_states(system, options=adlin.SteadyStatesOptions(scales={"y": 1.0}))
    with pytest.raises(adlin.AnalysisError, match="power"):
        adlin.SteadyStatesOptions(power=0.5)
    with pytest.raises(adlin.AnalysisError, match="ramp_stop"):
        adlin.SteadyStatesOptions(ramp_stop=0.9)
    with pytest.raises(adlin.ModelError, match="shape"):
        adlin.steady_states(system, guesses=[np.zeros(3)])
    with pytest.raises(adlin.AnalysisError, match="jit"):
        jax.jit(lambda r: adlin.steady_states(system, params={"r": r}).x)(0.0)


def test_guesses_by_name_are_used():
    res = adlin.steady_states(cubic(), guesses=[{"x": 0.9}], max_states=1, ramp=False)
    assert float(res[0]["x"]) == pytest.approx(1.0, rel=1e-12)  # Newton's nearest root
    assert res.found_by == ("newton from guess 0",)


@functools.cache
def index_two_at_one_state() -> adlin.System:
    """x' = z - x, 0 = (z - 1)^2 + x - 1: states (0, 0) and (1, 1).  The algebraic
    equation's derivative in z, 2 (z - 1), vanishes at (1, 1), so the model has
    differential index 2 there and index 1 elsewhere (Brenan, Campbell & Petzold,
    Numerical Solution of Initial-Value Problems in DAEs, SIAM 1996, ch. 2, on the index
    of semi-explicit systems; from memory)."""

    def current(x, u, p):
        return jnp.stack([x[0] - x[1], (x[1] - 1.0) ** 2 + x[0] - 1.0])

    def charge(x, p):
        return jnp.stack([x[0], 0.0 * x[1]])

    return adlin.System(current, charge, unknowns=("x", "z"), name="index_two_at_one_state")


def test_state_without_small_signal_model_is_unclassified():
    """At (0, 0): dz/dx = -1 / (2 (z - 1)) = 1/2 (implicit function theorem), so the
    reduced model is x' = (1/2 - 1) x: one pole at -0.5, a stable node.  At (1, 1) no
    index-1 model exists: the state is kept, labelled, and the note says why."""
    res = adlin.steady_states(index_two_at_one_state())
    np.testing.assert_allclose(res.x, [[0.0, 0.0], [1.0, 1.0]], atol=1e-9)
    assert res.labels == ("stable node", "unclassified")
    np.testing.assert_allclose(np.asarray(res.poles[0]), [-0.5], rtol=1e-12)
    assert len(res.notes) == 1 and "state 1" in res.notes[0] and "index" in res.notes[0]
    assert res.table()[1]["growth_rate_rad_s"] is None


def test_each_state_is_differentiable_through_steady_state():
    """Re-solving from a found state under jax.grad gives the implicit derivative
    dx*/dr = -1 / (1 - 3 x*^2) of r + x - x^3 = 0 (implicit function theorem)."""
    system = cubic()
    res = adlin.steady_states(system, params={"r": 0.1})
    for state in res:
        def x_of(r, state=state):
            return adlin.steady_state(system, params={"r": r}, guess=state).x[0]

        x = float(state["x"])
        assert float(jax.grad(x_of)(0.1)) == pytest.approx(-1.0 / (1.0 - 3.0 * x**2), rel=1e-9)


@functools.cache
def bjt_flip_flop() -> adlin.System:
    """Two NPN stages, each collector driving the other's base through 10 kOhm."""
    c = adlin.Circuit("flip_flop")
    c.input("v_cc", 5.0, unit="V")
    c.voltage_source("VCC", "vcc", "gnd", "v_cc")
    for a, b, k in (("c1", "c2", "1"), ("c2", "c1", "2")):
        c.resistor("RC" + k, "vcc", a, 1e3)
        c.resistor("RB" + k, b, "b" + k, 10e3)
        c.bjt("Q" + k, c=a, b="b" + k, e="gnd")
        c.capacitor("CC" + k, a, "gnd", 1e-12)
        c.capacitor("CB" + k, "b" + k, "gnd", 1e-12)
    return c.build()


@pytest.mark.slow
def test_bjt_flip_flop_is_bistable():
    """A collector-coupled bistable multivibrator has two stable states, one transistor
    saturated and the other cut off, mirror images, and a symmetric unstable state
    between them (Sedra & Smith, Microelectronic Circuits, 7th ed., 2015, chapter on
    bistable circuits; from memory).  With Q2 cut off, its collector feeds Q1's base
    alone: v_c2 = (V_CC R_B + v_b1 R_C) / (R_C + R_B) (Ohm's law and KCL at c2), and
    no current flows in Q2's base resistor: v_b2 = v_c1."""
    res = adlin.steady_states(bjt_flip_flop())
    assert len(res) == 3
    middle = res.labels[1]
    assert middle == "saddle" and res.stable.labels == (res.labels[0], res.labels[2])
    assert float(res[1]["v_c1"]) == pytest.approx(float(res[1]["v_c2"]), rel=1e-9)
    one, two = (op for op in res.stable)
    assert float(one["v_c1"]) == pytest.approx(float(two["v_c2"]), rel=1e-9)
    q1_on = one if float(one["v_c1"]) < float(one["v_c2"]) else two
    v_b1 = float(q1_on["v_b1"])
    assert float(q1_on["v_c2"]) == pytest.approx((5.0 * 10e3 + v_b1 * 1e3) / 11e3, rel=1e-9)
    assert float(q1_on["v_b2"]) == pytest.approx(float(q1_on["v_c1"]), abs=1e-9)
    assert float(q1_on["v_c1"]) < 0.2  # saturated: V_CE(sat) of a few tenths at most
