"""adlin.Circuit: modified nodal analysis checked against textbook circuits.

Sources of the reference numbers are named at each check.  Linear circuits are
solved without the steady-state solver: f is affine in x, so
x* = -J^-1 f(0) with J = df/dx (numpy.linalg.solve on jax.jacfwd).
"""

from __future__ import annotations

import importlib.util
import math

import jax
import jax.numpy as jnp
import numpy as np
import pytest
import scipy.linalg
from hypothesis import given, settings
from hypothesis import strategies as st

import adlin

needs_devices = pytest.mark.skipif(
    importlib.util.find_spec("adlin.devices") is None, reason="adlin.devices is not installed"
)

K_B = 1.380649e-23  # J/K, exact (2019 SI)
Q_E = 1.602176634e-19  # C, exact (2019 SI)


def vt(temperature=300.15):
    return K_B * temperature / Q_E


# Everything is evaluated under jax.jit: one compilation per function is much
# faster than op-by-op dispatch, and it checks that the functions trace.


def solve_linear(sys, inputs=None, params=None):
    """Solution of f(x, u, p) = 0 for a circuit that is linear in x."""
    u, p = sys.input_vector(inputs), sys.param_vector(params)
    x0 = jnp.zeros((sys.n,))
    f, J = jax.jit(lambda x: (sys.f(x, u, p), jax.jacfwd(sys.f)(x, u, p)))(x0)
    return np.linalg.solve(np.asarray(J), -np.asarray(f))


def pencil(sys, x=None, inputs=None, params=None):
    """E = dq/dx and A = -df/dx at x (zero by default)."""
    u, p = sys.input_vector(inputs), sys.param_vector(params)
    x = jnp.zeros((sys.n,)) if x is None else x
    E, J = jax.jit(lambda x: (jax.jacfwd(sys.q)(x, p), jax.jacfwd(sys.f)(x, u, p)))(x)
    return np.asarray(E), -np.asarray(J)


def F(sys, x, inputs=None, params=None):
    return jax.jit(sys.f)(jnp.asarray(x), sys.input_vector(inputs), sys.param_vector(params))


def G(sys, x, inputs=None, params=None):
    return jax.jit(sys.g)(jnp.asarray(x), sys.input_vector(inputs), sys.param_vector(params))


def finite_poles(sys, **kw):
    E, A = pencil(sys, **kw)
    lam = scipy.linalg.eig(A, E, right=False)
    return by_imag(lam[np.isfinite(lam) & (np.abs(lam) < 1e12)])


def by_imag(z):
    z = np.asarray(z, dtype=complex)
    return z[np.lexsort((z.real, z.imag))]


# -- linear circuits -------------------------------------------------------------


def divider(R1=10e3, R2=30e3, V=5.0):
    c = adlin.Circuit("divider")
    c.input("v_supply", V, unit="V")
    c.voltage_source("V1", "in", "gnd", "v_supply")
    c.resistor("R1", "in", "out", R1)
    c.resistor("R2", "out", "gnd", R2)
    c.output("v_out", "out")
    return c


def test_divider_f_is_hand_kcl_and_solution_is_divider_formula():
    # Ohm's and Kirchhoff's laws; divider rule v_out = V R2 / (R1 + R2)
    # (Alexander & Sadiku, Fundamentals of Electric Circuits, 6th ed., ch. 2).
    R1, R2, V = 10e3, 30e3, 5.0
    sys = divider(R1, R2, V).build()
    assert sys.unknowns == ("v_in", "v_out", "i_V1")
    assert sys.params == {"R1": R1, "R2": R2}
    assert sys.input_values == {"v_supply": V}
    x = jnp.array([4.0, 1.5, -2e-4])
    f = np.asarray(F(sys, x))
    v_in, v_out, i_v = 4.0, 1.5, -2e-4
    hand = [
        (v_in - v_out) / R1 + i_v,  # leaving "in": through R1 and into V1's + terminal
        (v_out - v_in) / R1 + v_out / R2,  # leaving "out"
        v_in - V,
    ]  # source row v_+ - v_- - V
    np.testing.assert_allclose(f, hand, rtol=1e-14, atol=1e-18)
    x_star = solve_linear(sys)
    np.testing.assert_allclose(x_star[1], V * R2 / (R1 + R2), rtol=1e-13)
    # The source delivers V/(R1+R2); its branch current (entering +) is negative.
    np.testing.assert_allclose(x_star[2], -V / (R1 + R2), rtol=1e-13)
    y = G(sys, x_star)
    np.testing.assert_allclose(y, [V * R2 / (R1 + R2)], rtol=1e-13)


def test_divider_parameters_override_and_differentiate():
    # d v_out / d R1 = -V R2 / (R1 + R2)^2 (differentiating the divider rule,
    # Alexander & Sadiku ch. 2); JAX sees the resistance as a parameter.
    R1, R2, V = 10e3, 30e3, 5.0
    sys = divider(R1, R2, V).build()
    np.testing.assert_allclose(solve_linear(sys, params={"R1": 30e3})[1], 2.5, rtol=1e-13)

    def v_out(pvec):
        u, x0 = sys.input_vector(), jnp.zeros((sys.n,))
        J = jax.jacfwd(sys.f)(x0, u, pvec)
        return jnp.linalg.solve(J, -sys.f(x0, u, pvec))[1]

    grad = jax.jit(jax.grad(v_out))(sys.param_vector())
    np.testing.assert_allclose(grad[0], -V * R2 / (R1 + R2) ** 2, rtol=1e-10)
    np.testing.assert_allclose(grad[1], V * R1 / (R1 + R2) ** 2, rtol=1e-10)


def test_functions_are_jit_and_vmap_safe():
    sys = divider().build()
    u, p = sys.input_vector(), sys.param_vector()
    xs = jnp.asarray(np.random.default_rng(1).normal(size=(7, 3)))
    jitted = jax.jit(sys.f)
    one_by_one = np.stack([np.asarray(jitted(x, u, p)) for x in xs])
    batched = jax.jit(jax.vmap(sys.f, in_axes=(0, None, None)))(xs, u, p)
    np.testing.assert_allclose(batched, one_by_one, rtol=1e-15)
    assert sys.charge is None  # no storage element: no charge function
    np.testing.assert_array_equal(sys.q(xs[0], p), np.zeros(3))


def series_rlc(R, L, C):
    c = adlin.Circuit("series_rlc")
    c.input("v_src", 0.0, unit="V")
    c.voltage_source("V1", "in", "gnd", "v_src")
    c.resistor("R1", "in", "a", R)
    c.inductor("L1", "a", "b", L)
    c.capacitor("C1", "b", "gnd", C)
    c.output("v_c", "b")
    c.output("i_l", "i_L1")
    return c


def test_series_rlc_stamps_and_characteristic_polynomial():
    # Series RLC: s^2 + (R/L) s + 1/(LC) = 0 (Alexander & Sadiku, ch. 8).
    R, L, C = 50.0, 1e-3, 1e-6
    sys = series_rlc(R, L, C).build()
    assert sys.unknowns == ("v_in", "v_a", "v_b", "i_V1", "i_L1")
    assert sys.units["i_L1"] == "A" and sys.units["v_b"] == "V"
    assert sys.units["L1"] == "H" and sys.units["C1"] == "F" and sys.units["R1"] == "ohm"
    E, A = pencil(sys)
    # Flux L i_L on the inductor row, charge C v_b on node b, nothing else.
    expected_E = np.zeros((5, 5))
    expected_E[2, 2] = C
    expected_E[4, 4] = L
    np.testing.assert_allclose(E, expected_E, rtol=1e-15)
    # Inductor row: f = -(v_a - v_b), so A holds +1 at v_a and -1 at v_b.
    np.testing.assert_allclose(A[4, 1:3], [1.0, -1.0])
    expected = by_imag(np.roots([1.0, R / L, 1.0 / (L * C)]))
    np.testing.assert_allclose(finite_poles(sys), expected, rtol=1e-9)


def test_two_section_rc_ladder_poles():
    # Equal two-section RC ladder: poles -(3 +- sqrt 5) / (2 R C) (Morgan-Voyce
    # polynomials, A. M. Morgan-Voyce, "Ladder network analysis using Fibonacci
    # numbers", IRE Trans. Circuit Theory 6(3), 1959).
    R, C = 1e3, 1e-6
    c = adlin.Circuit("ladder")
    c.voltage_source("V1", "in", "gnd", 0.0)
    c.resistor("R1", "in", "n1", R)
    c.capacitor("C1", "n1", "gnd", C)
    c.resistor("R2", "n1", "n2", R)
    c.capacitor("C2", "n2", "gnd", C)
    poles = finite_poles(c.build())
    expected = by_imag(np.array([-(3 + math.sqrt(5)), -(3 - math.sqrt(5))]) / (2 * R * C))
    np.testing.assert_allclose(poles, expected, rtol=1e-10)


def test_vcvs_inverting_amplifier_closed_loop_gain():
    # Inverting amplifier with a finite open-loop gain A:
    # G = -(R2/R1) / (1 + (1 + R2/R1) / A) (Sedra & Smith, Microelectronic
    # Circuits, 7th ed., sec. 2.2.3).
    R1, R2, A, V = 1e3, 10e3, 1e4, 0.1
    c = adlin.Circuit("inverting")
    c.input("v_sig", V, unit="V")
    c.voltage_source("VS", "in", "gnd", "v_sig")
    c.resistor("R1", "in", "minus", R1)
    c.resistor("R2", "minus", "out", R2)
    c.vcvs("E1", "out", "gnd", "gnd", "minus", A)  # v_out = A (v_+ - v_-), v_+ grounded
    c.output("v_out", "out")
    sys = c.build()
    x = solve_linear(sys)
    gain = -(R2 / R1) / (1 + (1 + R2 / R1) / A)
    np.testing.assert_allclose(G(sys, x), [gain * V], rtol=1e-12)
    assert sys.units["E1"] == "V/V"


def test_vccs_cccs_ccvs_closed_forms():
    # Dependent sources by KCL/KVL (Alexander & Sadiku, ch. 2 and 3):
    # a transconductance stage into R_L gives v = -gm R_L v_in; a 0 V source
    # used as an ammeter senses i, a CCCS copies k i into R_L (v = -k i R_L by
    # the convention "from out_plus through the source to out_minus") and a
    # CCVS gives v = r i.
    gm, RL, k, r, V, RS = 2e-3, 5e3, 3.0, 700.0, 0.2, 1e3
    c = adlin.Circuit("dependent")
    c.voltage_source("VIN", "in", "gnd", V)
    c.resistor("RS", "in", "s", RS)
    c.voltage_source("VSENSE", "s", "gnd", 0.0)  # i_VSENSE = V / RS, entering at s
    c.vccs("G1", "o1", "gnd", "in", "gnd", gm)
    c.resistor("RL1", "o1", "gnd", RL)
    c.cccs("F1", "o2", "gnd", "VSENSE", k)
    c.resistor("RL2", "o2", "gnd", RL)
    c.ccvs("H1", "o3", "gnd", "VSENSE", r)
    c.resistor("RL3", "o3", "gnd", RL)
    c.output("v1", "o1")
    c.output("v2", "o2")
    c.output("v3", "o3")
    sys = c.build()
    y = G(sys, solve_linear(sys))
    i = V / RS
    np.testing.assert_allclose(y, [-gm * RL * V, -k * i * RL, r * i], rtol=1e-12)


def test_current_source_direction():
    # A source of I from node a to ground draws I out of a: with a resistor R
    # from ground to a, v_a = -I R (Ohm's law).
    c = adlin.Circuit("isource")
    c.current_source("I1", "a", "gnd", 1e-3)
    c.resistor("R1", "a", "gnd", 2e3)
    np.testing.assert_allclose(solve_linear(c.build()), [-2.0], rtol=1e-14)


def test_declared_params_inputs_and_ground_alias():
    c = adlin.Circuit("names", ground="ground")
    assert c.param("R_load", 100.0, unit="ohm") == "R_load"
    c.input("i_bias", 1e-3, unit="A")
    c.current_source("I1", "0", "a", "i_bias")  # "0" is ground too
    c.resistor("R1", "a", "ground", "R_load")
    sys = c.build()
    assert sys.unknowns == ("v_a",)
    assert sys.params == {"R_load": 100.0}
    assert sys.units["R_load"] == "ohm" and sys.units["i_bias"] == "A"
    np.testing.assert_allclose(solve_linear(sys), [0.1], rtol=1e-14)
    np.testing.assert_allclose(
        solve_linear(sys, inputs={"i_bias": 2e-3}, params={"R_load": 50.0}), [0.1], rtol=1e-14
    )
    assert c.nodes == ("a",) and c.elements == ("I1", "R1")


def test_output_kinds():
    c = series_rlc(10.0, 1e-3, 1e-6)
    c.output("v_ab", ("a", "b"))
    c.output("p_r", lambda s: (s["v_in"] - s["v_a"]) ** 2 / s["R1"] + 0.0 * s["v_in"], unit="W")
    sys = c.build()
    assert sys.outputs == ("v_c", "i_l", "v_ab", "p_r")
    assert [sys.units[o] for o in sys.outputs] == ["V", "A", "V", "W"]
    x = jnp.array([1.0, 0.5, 0.2, -0.05, 0.03])
    y = G(sys, x)
    np.testing.assert_allclose(y, [0.2, 0.03, 0.3, 0.25 / 10.0], rtol=1e-14)


# -- charge and current conservation (property) -----------------------------------


def _shockley(v, p):
    # Shockley diode law (Sedra & Smith, 7th ed., sec. 4.2).
    return p["saturation_current"] * jnp.expm1(v / (p["emission_coefficient"] * vt()))


def kcl_circuit():
    c = adlin.Circuit("kcl")
    c.voltage_source("V1", "a", "gnd", 1.0)
    c.resistor("R1", "a", "b", 1.0)
    c.resistor("R2", "b", "gnd", 1.0)
    c.current_source("I1", "gnd", "c", 1.0)
    c.two_terminal(
        "D1",
        "c",
        "gnd",
        current=_shockley,
        params={"saturation_current": 1e-14, "emission_coefficient": 1.0},
    )
    c.vccs("G1", "a", "gnd", "b", "c", 1.0)
    c.resistor("R3", "c", "a", 1.0)
    c.capacitor("C1", "b", "c", 1.0)
    c.capacitor("C2", "c", "gnd", 1.0)
    c.inductor("L1", "b", "gnd", 1.0)
    return c.build()


KCL_SYS = kcl_circuit()
KCL_F = jax.jit(KCL_SYS.f)
KCL_Q = jax.jit(KCL_SYS.q)
volts = st.floats(-2.0, 0.7, allow_nan=False)
positive = st.floats(0.1, 10.0, allow_nan=False)


@settings(max_examples=40, deadline=None)
@given(
    va=volts,
    vb=volts,
    vc=volts,
    iv=volts,
    il=volts,
    r2=positive,
    i1=positive,
    gm=positive,
    c2=positive,
)
def test_kcl_node_rows_sum_to_minus_ground_current(va, vb, vc, iv, il, r2, i1, gm, c2):
    # Kirchhoff's current law over the whole circuit: the currents leaving all
    # nodes, ground included, sum to zero (Alexander & Sadiku, ch. 2).  The
    # current leaving ground is computed here by hand, element by element.
    sys = KCL_SYS
    p = sys.param_vector({"R2": r2, "I1": i1, "G1": gm, "C2": c2})
    x = jnp.array([va, vb, vc, iv, il])
    f = np.asarray(KCL_F(x, sys.input_vector(), p))
    n_nodes = 3
    i_diode = 1e-14 * math.expm1(vc / vt())
    ground_out = (
        -iv  # V1 branch current enters at a and returns to ground
        + (0.0 - vb) / r2  # R2 from ground to b
        + i1  # I1 takes i1 out of ground
        - i_diode  # diode current arrives at ground
        - gm * (vb - vc)  # G1 current arrives at ground
        - il  # L1 current arrives at ground
    )
    total = f[:n_nodes].sum() + ground_out
    scale = 1.0 + np.abs(f).sum() + abs(ground_out)
    assert abs(total) <= 1e-12 * scale
    # Charge: capacitor charges on the nodes plus the charge on ground cancel.
    q = np.asarray(KCL_Q(x, p))
    assert abs(q[:n_nodes].sum() + (-c2 * vc)) <= 1e-12 * (1.0 + np.abs(q).sum())


# -- nonlinear elements ------------------------------------------------------------


def _ebers_moll(v, p):
    # Ebers-Moll transport model, npn, no Early effect (Ebers & Moll, Proc. IRE
    # 42(12), 1954; Sedra & Smith, 7th ed., sec. 6.1).
    t = vt()
    i_f = p["saturation_current"] * jnp.expm1((v["b"] - v["e"]) / t)
    i_r = p["saturation_current"] * jnp.expm1((v["b"] - v["c"]) / t)
    i_c = i_f - i_r - i_r / p["reverse_beta"]
    i_b = i_f / p["forward_beta"] + i_r / p["reverse_beta"]
    return {"c": i_c, "b": i_b, "e": -(i_c + i_b)}


def test_user_two_terminal_and_device_give_params_junctions_and_small_signal():
    c = adlin.Circuit("user_laws")
    c.param("Is_shared", 2e-14, unit="A")
    c.two_terminal(
        "D1",
        "a",
        "gnd",
        current=_shockley,
        charge=lambda v, p: p["c0"] * v,
        params={"saturation_current": "Is_shared", "emission_coefficient": 1.0, "c0": 3e-12},
        units={"c0": "F"},
        junction=True,
    )
    c.device(
        "Q1",
        {"c": "col", "b": "a", "e": "gnd"},
        currents=_ebers_moll,
        params={"saturation_current": 1e-16, "forward_beta": 100.0, "reverse_beta": 1.0},
        junctions=(("b", "e"), ("b", "c")),
    )
    c.resistor("R1", "col", "gnd", 1e3)
    sys = c.build()
    assert set(sys.params) == {
        "Is_shared",
        "D1.emission_coefficient",
        "D1.c0",
        "Q1.saturation_current",
        "Q1.forward_beta",
        "Q1.reverse_beta",
        "R1",
    }
    assert sys.units["D1.c0"] == "F" and sys.units["Q1.saturation_current"] == "A"
    assert [(j.anode, j.cathode) for j in sys.junctions] == [
        ("v_a", None),
        ("v_a", None),
        ("v_a", "v_col"),
    ]
    # Critical voltage n V_T ln(n V_T / (sqrt 2 I_s)) (Vlach & Singhal, 1994).
    j = sys.junctions[0]
    assert j.thermal_voltage == pytest.approx(vt(), rel=1e-12)
    assert j.critical_voltage == pytest.approx(
        vt() * math.log(vt() / (math.sqrt(2) * 2e-14)), rel=1e-12
    )
    # The diode row of f is the Shockley current plus the BJT base current.
    x = jnp.array([0.65, 3.0])
    f = F(sys, x)
    expected = (
        2e-14 * math.expm1(0.65 / vt())
        + 1e-16 * math.expm1(0.65 / vt()) / 100.0
        + 1e-16 * math.expm1((0.65 - 3.0) / vt()) / 1.0
    )
    np.testing.assert_allclose(f[0], expected, rtol=1e-12)
    ss = c.small_signal({"v_a": 0.65, "v_col": 3.0})
    # g_d = (I + I_s) / (n V_T) (Sedra & Smith, sec. 4.3).
    np.testing.assert_allclose(ss["D1"]["g"], (ss["D1"]["i"] + 2e-14) / vt(), rtol=1e-12)
    np.testing.assert_allclose(ss["D1"]["c"], 3e-12, rtol=1e-15)
    assert ss.units["D1"] == {"i": "A", "g": "S", "c": "F"}
    # A generic device reports its whole conductance matrix by terminal pair.
    i_c = ss["Q1"]["i[c]"]
    np.testing.assert_allclose(ss["Q1"]["g[c,b]"], i_c / vt(), rtol=1e-6)  # g_m = I_C / V_T
    np.testing.assert_allclose(
        ss["Q1"]["g[b,b]"] + ss["Q1"]["g[b,c]"] + ss["Q1"]["g[b,e]"], 0.0, atol=1e-15
    )  # only voltage differences matter
    assert ss.units["Q1"]["g[c,b]"] == "S" and "c[c,b]" not in ss["Q1"]


def test_device_laws_may_leave_out_terminals():
    def law(v, p):
        return {"a": p["g"] * (v["a"] - v["b"])}  # into a; nothing into b or c (not KCL-proof)

    c = adlin.Circuit("partial")
    c.device("X1", {"a": "n1", "b": "gnd", "c": "n2"}, currents=law, params={"g": 1e-3})
    c.resistor("R1", "n1", "n2", 1e3)
    sys = c.build()
    f = F(sys, [2.0, 1.0])
    np.testing.assert_allclose(f, [2e-3 + 1e-3, -1e-3], rtol=1e-14)


@needs_devices
def test_diode_wrapper_params_junction_and_small_signal():
    c = adlin.Circuit("diode")
    c.voltage_source("V1", "in", "gnd", 1.0)
    c.resistor("R1", "in", "a", 1e3)
    c.diode("D1", "a", "gnd", saturation_current=1e-14, emission_coefficient=1.5)
    sys = c.build()
    assert sys.params["D1.saturation_current"] == 1e-14
    assert sys.params["D1.emission_coefficient"] == 1.5
    assert sys.params["D1.temperature"] == 300.15  # law default, still a parameter
    assert sys.units["D1.saturation_current"] == "A" and sys.units["D1.temperature"] == "K"
    assert sys.charge is None  # no capacitance given: no charge law
    (j,) = sys.junctions
    nvt = 1.5 * vt()
    assert (j.anode, j.cathode) == ("v_a", None)
    assert j.thermal_voltage == pytest.approx(nvt, rel=1e-12)
    assert j.critical_voltage == pytest.approx(
        nvt * math.log(nvt / (math.sqrt(2) * 1e-14)), rel=1e-12
    )
    ss = c.small_signal({"v_in": 1.0, "v_a": 0.6, "i_V1": 0.0})
    # Shockley: I = I_s (exp(v/(n V_T)) - 1), g_d = (I + I_s)/(n V_T) (Sedra & Smith 4.3).
    i_d = 1e-14 * math.expm1(0.6 / nvt)
    np.testing.assert_allclose(ss["D1"]["i_d"], i_d, rtol=1e-10)
    np.testing.assert_allclose(ss["D1"]["g_d"], (i_d + 1e-14) / nvt, rtol=1e-10)
    assert float(ss["D1"]["c_d"]) == 0.0
    # With a capacitance the charge law appears and c_d is its derivative.
    c.diode("D2", "a", "in", zero_bias_capacitance=2e-12)
    sys2 = c.build()
    assert sys2.charge is not None and "D2.built_in_potential" in sys2.params
    ss2 = c.small_signal({"v_in": 1.0, "v_a": 0.6, "i_V1": 0.0})
    # Depletion capacitance C_j0 / (1 - v/V_j)^m at v = -0.4 V (Sedra & Smith 3.6).
    np.testing.assert_allclose(ss2["D2"]["c_d"], 2e-12 / (1 + 0.4 / 0.7) ** 0.5, rtol=1e-9)


@needs_devices
def test_bjt_wrapper_junctions_params_and_gm():
    c = adlin.Circuit("ce_stage")
    c.param("beta_f", 150.0)
    c.voltage_source("VCC", "vcc", "gnd", 5.0)
    c.resistor("RC", "vcc", "col", 2e3)
    c.voltage_source("VB", "base", "gnd", 0.68)
    c.bjt("Q1", c="col", b="base", e="gnd", polarity="npn", forward_beta="beta_f")
    sys = c.build()
    assert sys.params["Q1.saturation_current"] == 1e-16
    assert "Q1.early_voltage" not in sys.params  # infinite law default: left to the law
    assert "Q1.forward_beta" not in sys.params  # bound to the declared "beta_f"
    labels = {j.label: (j.anode, j.cathode) for j in sys.junctions}
    assert labels == {"Q1 b-e": ("v_base", None), "Q1 b-c": ("v_base", "v_col")}
    x = {"v_vcc": 5.0, "v_col": 3.0, "v_base": 0.68, "i_VCC": 0.0, "i_VB": 0.0}
    ss = c.small_signal(x)
    q = ss["Q1"]
    # Forward active: g_m = I_C / V_T (Sedra & Smith, 7th ed., sec. 7.2.1).
    assert float(q["i_c"]) > 0
    np.testing.assert_allclose(q["g_m"], q["i_c"] / vt(), rtol=1e-6)
    # g_pi = g_m / beta with beta = beta_F in this law (Sedra & Smith 7.2.1).
    np.testing.assert_allclose(q["g_pi"], q["g_m"] / 150.0, rtol=1e-6)
    np.testing.assert_allclose(q["beta"], 150.0, rtol=1e-6)
    assert ss.units["Q1"]["g_m"] == "S" and "c_be" not in q
    # pnp: junctions point the other way; small-signal g_m stays positive.
    c.voltage_source("VE", "emit", "gnd", 5.0)
    c.resistor("RP", "pcol", "gnd", 1e3)
    c.bjt(
        "Q2",
        c="pcol",
        b="vcc",
        e="emit",
        polarity="pnp",
        base_emitter_capacitance=1e-12,
        early_voltage=80.0,
    )
    sys2 = c.build()
    assert sys2.params["Q2.early_voltage"] == 80.0
    assert sys2.params["Q2.base_emitter_capacitance"] == 1e-12
    labels = {j.label: (j.anode, j.cathode) for j in sys2.junctions}
    assert labels["Q2 e-b"] == ("v_emit", "v_vcc")
    x2 = dict(x, v_emit=5.68, v_pcol=2.0, i_VE=0.0, v_vcc=5.0)
    q2 = c.small_signal(x2)["Q2"]
    # With the Early factor (1 - v_bc / V_A) of the transport form (Gummel & Poon,
    # Bell Syst. Tech. J. 49, 1970), moving v_b at fixed v_c also moves v_bc:
    # g_m = I_C / V_T - I_C / (V_A - v_bc), here v_bc = -3 V in the npn mirror.
    i_c = -float(q2["i_c"])
    np.testing.assert_allclose(q2["g_m"], i_c / vt() - i_c / 83.0, rtol=1e-6)
    assert float(q2["c_be"]) > 0


@needs_devices
def test_mosfet_wrapper_square_law_gm():
    # Saturation: g_m = sqrt(2 k I_D) = k V_ov (Sedra & Smith, 7th ed., sec. 7.2.2).
    k, v_t = 4e-4, 0.5
    c = adlin.Circuit("cs_stage")
    c.voltage_source("VDD", "vdd", "gnd", 3.0)
    c.voltage_source("VG", "gate", "gnd", 1.2)
    c.resistor("RD", "vdd", "drain", 5e3)
    c.mosfet(
        "M1",
        d="drain",
        g="gate",
        s="gnd",
        law="square",
        transconductance_parameter=k,
        threshold_voltage=v_t,
        gate_drain_capacitance=5e-15,
    )
    sys = c.build()
    assert sys.params["M1.transconductance_parameter"] == k
    assert sys.junctions == ()
    x = {"v_vdd": 3.0, "v_gate": 1.2, "v_drain": 2.0, "i_VDD": 0.0, "i_VG": 0.0}
    m = c.small_signal(x)["M1"]
    np.testing.assert_allclose(m["i_d"], 0.5 * k * 0.7**2, rtol=1e-12)
    np.testing.assert_allclose(m["g_m"], math.sqrt(2 * k * float(m["i_d"])), rtol=1e-12)
    np.testing.assert_allclose(m["c_gd"], 5e-15, rtol=1e-12)
    assert float(m["g_mb"]) == 0.0


@needs_devices
def test_small_signal_accepts_operating_point_vector_and_jit():
    c = adlin.Circuit("diode_only")
    c.current_source("I1", "gnd", "a", 1e-3)
    c.diode("D1", "a", "gnd")
    x = jnp.array([0.6])
    direct = c.small_signal(x)
    jitted = jax.jit(c.small_signal)(x)
    np.testing.assert_allclose(jitted["D1"]["g_d"], direct["D1"]["g_d"], rtol=1e-14)
    # Gradient of g_d with respect to the saturation current: g_d is linear in I_s.
    grad = jax.jit(
        jax.grad(lambda i_s: c.small_signal(x, {"D1.saturation_current": i_s})["D1"]["g_d"])
    )
    np.testing.assert_allclose(grad(1e-14), direct["D1"]["g_d"] / 1e-14, rtol=1e-10)
    assert "g_d" in str(direct)


# -- errors ----------------------------------------------------------------------


def _small():
    c = adlin.Circuit("e")
    c.param("R_load", 100.0)
    c.input("v_in", 1.0)
    c.resistor("R1", "a", "gnd", 1e3)
    return c


@pytest.mark.parametrize(
    "call, error, match",
    [
        (lambda c: c.resistor("R1", "a", "b", 1.0), adlin.ModelError, "'R1' is used twice"),
        (lambda c: c.resistor("R2", "b", "b", 1.0), adlin.ModelError, "both terminals on node"),
        (lambda c: c.resistor("R2", "gnd", "0", 1.0), adlin.ModelError, "both terminals on ground"),
        (lambda c: c.resistor("R2", "a", "b", "R_lod"), adlin.ParameterError, "'R_load'"),
        (lambda c: c.resistor("R2", "a", "b", [1.0]), adlin.ModelError, "number or the name"),
        (lambda c: c.resistor("R2", "a", "b", True), adlin.ModelError, "number or the name"),
        (lambda c: c.resistor("R2", "a", "b", 0.0), adlin.ModelError, "zero resistance"),
        (lambda c: c.resistor("R_load", "a", "b", 5.0), adlin.ModelError, "already declared"),
        (lambda c: c.capacitor("C1", "a", "b", "v_in"), adlin.ModelError, "cannot depend on inp"),
        (lambda c: c.vccs("G1", "a", "gnd", "b", "b", 1.0), adlin.ModelError, "both controls"),
        (lambda c: c.bjt("Q1", c="a", e="gnd"), adlin.ModelError, r"missing terminal\(s\) \['b'\]"),
        (
            lambda c: c.bjt("Q1", c="a", b="b", e="gnd", polarity="nnp"),
            adlin.ModelError,
            "polarity must be one of",
        ),
        (
            lambda c: c.mosfet("M1", d="a", g="b", s="gnd", polarity="n"),
            adlin.ModelError,
            "polarity",
        ),
        (
            lambda c: c.device("X1", {"p": "a", "n": "a"}, currents=lambda v, p: {}),
            adlin.ModelError,
            "all its terminals",
        ),
        (lambda c: c.two_terminal("X1", "a", "gnd"), adlin.ModelError, "needs a current="),
        (lambda c: c.param("R_load", 1.0), adlin.ModelError, "declared twice"),
        (
            lambda c: c.output("v_out", "a") and c.output("v_out", "a"),
            adlin.ModelError,
            "declared twice",
        ),
    ],
)
def test_element_errors(call, error, match):
    with pytest.raises(error, match=match):
        call(_small())


@needs_devices
@pytest.mark.parametrize(
    "call, match",
    [
        (lambda c: c.mosfet("M1", d="a", g="b", s="gnd", law="bsim"), "law must be one of"),
        (
            lambda c: c.diode("D1", "a", "gnd", saturation_curent=1e-14),
            "closest valid names are 'saturation_current'",
        ),
        (lambda c: c.bjt("Q1", c="a", b="b", e="gnd", forward_beta=[1.0]), "number or the name"),
        (
            lambda c: c.bjt("Q1", c="a", b="b", e="gnd", forward_beta="beta"),
            "neither a declared parameter.*valid names are 'R_load', 'R1', 'v_in'",
        ),
    ],
)
def test_wrapper_errors(call, match):
    with pytest.raises(adlin.ModelError, match=match):
        call(_small())


@needs_devices
def test_failed_element_leaves_no_trace():
    c = _small()
    with pytest.raises(adlin.ModelError):
        c.diode("D1", "new_node", "gnd", saturation_current=1e-14, emission_coefficient="nope")
    assert "D1.saturation_current" not in c.build().params
    assert c.nodes == ("a",)


@pytest.mark.parametrize(
    "setup, error, match",
    [
        (lambda c: None, adlin.ModelError, "has no elements"),
        (
            lambda c: c.resistor("R1", "a", "b", 1.0),
            adlin.FloatingNodeError,
            "connects to ground 'gnd'",
        ),
        (
            lambda c: (c.resistor("R1", "a", "gnd", 1.0), c.resistor("R2", "b", "c", 1.0)),
            adlin.FloatingNodeError,
            r"nodes \['b', 'c'\] are not connected",
        ),
        (
            lambda c: (c.resistor("R1", "out", "gnd", 1.0), c.output("v", "ot")),
            adlin.ModelError,
            "node 'ot'.*closest valid name is 'out'",
        ),
        (
            lambda c: (c.resistor("R1", "out", "gnd", 1.0), c.output("v", 3)),
            adlin.ModelError,
            "must be a node name",
        ),
        (
            lambda c: (c.resistor("R1", "a", "gnd", 1.0), c.cccs("F1", "a", "gnd", "R1", 2.0)),
            adlin.ModelError,
            "controlled by the current of 'R1'",
        ),
        (
            lambda c: (c.input("v_bat", 3.7), c.voltage_source("VB", "bat", "gnd", "v_bat")),
            adlin.ModelError,
            "input 'v_bat' has the same name as the voltage unknown of node 'bat'",
        ),
        (
            lambda c: (
                c.resistor("R1", "a", "gnd", 1.0),
                c.device("X1", {"p": "a", "n": "gnd"}, currents=lambda v, p: {"q": v["p"]}),
            ),
            adlin.ModelError,
            "terminal 'q', which is not one of its terminals",
        ),
        (
            lambda c: (
                c.resistor("R1", "a", "gnd", 1.0),
                c.two_terminal("X1", "a", "gnd", current=lambda v, p: jnp.stack([v, v])),
            ),
            adlin.ModelError,
            r"current has shape \(2,\)",
        ),
    ],
)
def test_build_errors(setup, error, match):
    c = adlin.Circuit("b")
    setup(c)
    with pytest.raises(error, match=match):
        c.build()


def test_small_signal_needs_every_unknown():
    c = adlin.Circuit("d")
    c.current_source("I1", "gnd", "a", 1e-3)
    c.two_terminal(
        "D1",
        "a",
        "gnd",
        current=_shockley,
        params={"saturation_current": 1e-14, "emission_coefficient": 1.0},
    )
    with pytest.raises(adlin.ModelError, match=r"no value for unknown\(s\) \['v_a'\]"):
        c.small_signal({"v_b": 0.3})
