"""adlin.sensitivities against outside references.

- Pole derivatives: the first-order perturbation formula ds = y^H dA x / (y^H x)
  with left and right eigenvectors from scipy.linalg.eig (Greenbaum, Li &
  Overton, "First-order perturbation theory for eigenvalues and eigenvectors",
  SIAM Review 62(2), 2020), and central finite differences.
- Closed forms: series RLC natural frequency and damping (Alexander & Sadiku,
  Fundamentals of Electric Circuits, 6th ed., sec. 8.5); first-order RC
  low-pass pole and magnitude (same book, sec. 14.2); resistor divider
  (voltage division, same book, sec. 2.5; section numbers from memory);
  common-emitter gain A = -g_m R_C, g_m = I_C / V_T (Sedra & Smith,
  Microelectronic Circuits, 7th ed., sec. 7.2; from memory).
"""

from __future__ import annotations

import functools
import math

import jax.numpy as jnp
import numpy as np
import pytest
import scipy.constants as const
import scipy.linalg
from closed_forms import descriptor_divider, series_rlc
from hypothesis import given, settings
from hypothesis import strategies as st

import adlin
from adlin.quantities import (
    Bias,
    DCGain,
    Expression,
    Pole,
    PoleDamping,
    PoleFrequency,
    TransferMagnitude,
)

# --- models -------------------------------------------------------------------------


@functools.cache
def diode_filter():
    """Our own third-order circuit with a bias-dependent pole set: source - R1 - node 1
    (C1 to ground) - L and R2 in series - node 2 (C2 and a diode to ground)."""
    vt = 0.025852

    def current(x, u, p):
        v1, i_l, v2 = x
        i_d = p["Is"] * (jnp.exp(v2 / vt) - 1.0)
        return jnp.stack([(v1 - u[0]) / p["R1"] + i_l, -(v1 - v2 - p["R2"] * i_l), i_d - i_l])

    def charge(x, p):
        return jnp.stack([p["C1"] * x[0], p["L"] * x[1], p["C2"] * x[2]])

    return adlin.System(current, charge, unknowns=("v_1", "i_L", "v_2"),
                        inputs={"v_in": 2.0}, outputs=("v_2",),
                        params={"R1": 1e3, "R2": 10.0, "L": 1e-2, "C1": 1e-7, "C2": 1e-7,
                                "Is": 1e-14},
                        junctions=(adlin.Junction("v_2", None),), name="diode_filter")


CALLS = {"rc": 0}


@functools.cache
def rc_lowpass():
    def current(x, u, p):
        CALLS["rc"] += 1  # runs only while JAX traces: counts (re)traces
        return jnp.stack([(x[0] - u[0]) / p["R"]])

    def charge(x, p):
        return p["C"] * x

    return adlin.System(current, charge, unknowns=("v_out",), inputs={"v_in": 1.0},
                        params={"R": 1e3, "C": 1e-6}, name="rc_lowpass")


@functools.cache
def divider():
    c = adlin.Circuit("divider")
    c.input("v_in", 5.0, unit="V")
    c.voltage_source("V1", "src", "gnd", "v_in")
    c.resistor("R1", "src", "out", 10e3)
    c.resistor("R2", "out", "gnd", 4.7e3)
    c.output("v_out", "out")
    return c.build()


@functools.cache
def common_emitter():
    c = adlin.Circuit("common_emitter")
    c.input("v_in", 0.62, unit="V")
    c.voltage_source("VB", "b", "gnd", "v_in")
    c.voltage_source("VCC", "vcc", "gnd", 10.0)
    c.resistor("RC", "vcc", "c", 10e3)
    c.bjt("Q1", c="c", b="b", e="gnd", saturation_current=1e-15)
    c.output("v_out", "c")
    return c.build()


# --- helpers --------------------------------------------------------------------------


def reduced_A(system, params=None):
    op = adlin.steady_state(system, params=params)
    return np.asarray(adlin.linearize(system, op).reduce().A)


def perturbation_derivative(A, dA, target):
    """ds for the eigenvalue of A nearest `target`, from left/right eigenvectors."""
    w, vl, vr = scipy.linalg.eig(A, left=True, right=True)
    k = int(np.argmin(np.abs(w - target)))
    y, x = vl[:, k], vr[:, k]
    return (y.conj() @ dA @ x) / (y.conj() @ x)


def nearest(values, target):
    values = np.asarray(values)
    return values[np.argmin(np.abs(values - target))]


# --- poles ----------------------------------------------------------------------------


def test_pole_derivatives_match_perturbation_formula_and_finite_differences():
    system = diode_filter()
    n_rows = len(adlin.linearize(system, adlin.steady_state(system)).pole_table().roots)
    of = [Pole(k) for k in range(n_rows)]
    sens = adlin.sensitivities(system, of=of)
    assert sens.values.dtype == jnp.complex128 and not sens.notes
    A0 = reduced_A(system)
    base = system.params
    checked = 0
    for name in ("R1", "R2", "L", "C1", "C2", "Is"):
        h = 1e-6 * base[name]
        Ap = reduced_A(system, {name: base[name] + h})
        Am = reduced_A(system, {name: base[name] - h})
        dA = (Ap - Am) / (2 * h)
        for k in range(n_rows):
            s0 = complex(sens.values[k])
            ours = sens.derivative(f"pole {k}", name)
            formula = perturbation_derivative(A0, dA, s0)
            fd = (nearest(np.linalg.eigvals(Ap), s0) - nearest(np.linalg.eigvals(Am), s0)) / (2 * h)
            scale = abs(s0) / base[name]  # the size of a unit normalized sensitivity
            assert abs(ours - formula) <= 1e-6 * scale, (name, k, ours, formula)
            assert abs(ours - fd) <= 1e-6 * scale, (name, k, ours, fd)
            checked += 1
    assert checked == 6 * n_rows and n_rows >= 2


def test_series_rlc_natural_frequency_and_damping():
    # omega0 = 1/sqrt(LC): d omega0/dL = -omega0/(2L), normalized -1/2 for L and C, 0 for R;
    # zeta = (R/2) sqrt(C/L): normalized +1 (R), -1/2 (L), +1/2 (C).  Alexander & Sadiku 8.5.
    R, L, C = 10.0, 1e-3, 1e-6
    sens = adlin.sensitivities(series_rlc(R, L, C), of=[PoleFrequency(0), PoleDamping(0), Pole(0)])
    w0 = 1 / math.sqrt(L * C)
    assert sens.values[0] == pytest.approx(w0 / (2 * math.pi), rel=1e-12)
    assert sens.derivative("pole 0 frequency", "L") == pytest.approx(-w0 / (2 * L) / (2 * math.pi),
                                                                     rel=1e-9)
    for p, want in (("L", -0.5), ("C", -0.5)):
        assert sens.normalized_sensitivity("pole 0 frequency", p) == pytest.approx(want, rel=1e-9)
    assert abs(sens.normalized_sensitivity("pole 0 frequency", "R")) < 1e-9
    for p, want in (("R", 1.0), ("L", -0.5), ("C", 0.5)):
        assert sens.normalized_sensitivity("pole 0 damping", p) == pytest.approx(want, rel=1e-9)
    # the pole -R/2L + j omega_d: d/dR = -1/(2L) + j (d omega_d / dR)
    wd = math.sqrt(w0**2 - (R / (2 * L)) ** 2)
    want = complex(-1 / (2 * L), -(R / (2 * L)) / (2 * L) / wd)
    assert sens.derivative("pole 0", "R") == pytest.approx(want, rel=1e-9)
    assert [r["parameter"] for r in sens.ranked("pole 0 damping")] == ["R", "L", "C"]


@settings(max_examples=25, deadline=None)
@given(st.floats(10.0, 1e6), st.floats(1e-12, 1e-3))
def test_rc_pole_normalized_sensitivities_are_minus_one(R, C):
    # pole -1/(RC): (p/s) ds/dp = -1 for both R and C, for any values (Alexander & Sadiku 14.2)
    sens = adlin.sensitivities(rc_lowpass(), params={"R": R, "C": C},
                               of=[Pole(0), PoleFrequency(0)])
    assert complex(sens.values[0]) == pytest.approx(-1 / (R * C), rel=1e-12)
    for q in ("pole 0", "pole 0 frequency"):
        for p in ("R", "C"):
            assert sens.normalized_sensitivity(q, p) == pytest.approx(-1.0, rel=1e-9, abs=1e-12)


def test_descriptor_model_pole_and_gain():
    # singular E: H(s) = R3/(R1+R3) (1 + s C Resr) / (1 + s C (Rth + R2 + Resr)), Rth = R1||R3
    # (Thevenin, Alexander & Sadiku sec. 4.5): pole -1/(C Rt) with Rt = Rth + R2 + Resr, so
    # (p/s) ds/dp = -1 for C, -R2/Rt for R2, -Resr/Rt for Resr; the DC gain R3/(R1+R3) has
    # normalized sensitivities -R1/(R1+R3) (R1) and +R1/(R1+R3) (R3), none from R2, C, Resr.
    R1, R2, R3, Resr, C = 1e3, 2.2e3, 4.7e3, 50.0, 1e-7
    sens = adlin.sensitivities(descriptor_divider(R1, R2, R3, Resr, C),
                               of=[Pole(0), DCGain("v_b", "v_in")])
    rt = R1 * R3 / (R1 + R3) + R2 + Resr
    assert complex(sens.values[0]) == pytest.approx(-1 / (C * rt), rel=1e-12)
    for p, want in (("C", -1.0), ("R2", -R2 / rt), ("Resr", -Resr / rt)):
        assert sens.normalized_sensitivity("pole 0", p) == pytest.approx(want, rel=1e-9)
    gain = "dc gain v_b/v_in"
    k = R1 / (R1 + R3)
    assert sens.normalized_sensitivity(gain, "R1") == pytest.approx(-k, rel=1e-9)
    assert sens.normalized_sensitivity(gain, "R3") == pytest.approx(k, rel=1e-9)
    for p in ("R2", "C", "Resr"):
        assert abs(sens.normalized_sensitivity(gain, p)) < 1e-12


def test_transfer_magnitude_of_rc_lowpass():
    # |H| = 1/sqrt(1 + (w R C)^2): (R/|H|) d|H|/dR = -(w R C)^2 / (1 + (w R C)^2)
    R, C, f = 1e3, 1e-6, 250.0
    sens = adlin.sensitivities(rc_lowpass(), params={"R": R, "C": C},
                               of=[TransferMagnitude("v_out", "v_in", f)])
    x = 2 * math.pi * f * R * C
    assert float(sens.values[0]) == pytest.approx(1 / math.sqrt(1 + x * x), rel=1e-12)
    for p in ("R", "C"):
        assert sens.normalized[0, sens.parameters.index(p)] == pytest.approx(-x * x / (1 + x * x),
                                                                            rel=1e-9)


def test_second_call_does_not_retrace():
    sens = adlin.sensitivities(rc_lowpass(), params={"R": 2e3}, of=["v_out", Pole(0)])
    before = CALLS["rc"]
    again = adlin.sensitivities(rc_lowpass(), params={"R": 5e3, "C": 2e-9},
                                of=["v_out", Pole(0)])
    assert CALLS["rc"] == before
    assert complex(again.values[1]) == pytest.approx(-1 / (5e3 * 2e-9), rel=1e-12)
    assert complex(sens.values[1]) != complex(again.values[1])


# --- bias values and gains ------------------------------------------------------------------


@settings(max_examples=25, deadline=None)
@given(st.floats(100.0, 1e6), st.floats(100.0, 1e6))
def test_divider_normalized_sensitivities(R1, R2):
    # v_out = v_in R2 / (R1 + R2): normalized -R1/(R1+R2) for R1, +R1/(R1+R2) for R2, 1 for v_in
    sens = adlin.sensitivities(divider(), params={"R1": R1, "R2": R2}, of=["v_out"],
                               wrt=["R1", "R2", "v_in"])
    k = R1 / (R1 + R2)
    assert float(sens.values[0]) == pytest.approx(5.0 * R2 / (R1 + R2), rel=1e-12)
    assert sens.normalized_sensitivity("v_out", "R1") == pytest.approx(-k, rel=1e-9)
    assert sens.normalized_sensitivity("v_out", "R2") == pytest.approx(k, rel=1e-9)
    assert sens.derivative("v_out", "v_in") == pytest.approx(R2 / (R1 + R2), rel=1e-9)


def test_common_emitter_gain_and_bias():
    # A = -g_m R_C, g_m = I_C / V_T, I_C independent of R_C without the Early effect
    # (Sedra & Smith 7th ed. sec. 7.2, from memory): dA/dR_C = -g_m, normalized +1;
    # v_C = V_CC - I_C R_C: dv_C/dR_C = -I_C; dA/dv_BE = -R_C I_C / V_T^2.
    system = common_emitter()
    sens = adlin.sensitivities(system, of=[DCGain("v_out", "v_in"), "v_out"],
                               wrt=["RC", "VCC", "v_in"])
    op = adlin.steady_state(system)
    vt = const.k * 300.15 / const.e  # the device law's default temperature, CODATA constants
    rc, vc = 10e3, float(op["v_out"])
    ic = (10.0 - vc) / rc
    gm = ic / vt
    gain = "dc gain v_out/v_in"
    assert float(sens.values[0]) == pytest.approx(-gm * rc, rel=1e-6)
    assert sens.derivative(gain, "RC") == pytest.approx(-gm, rel=1e-6)
    assert sens.normalized_sensitivity(gain, "RC") == pytest.approx(1.0, rel=1e-6)
    assert abs(sens.derivative(gain, "VCC")) < 1e-9 * gm * rc
    assert sens.derivative(gain, "v_in") == pytest.approx(-rc * ic / vt**2, rel=1e-6)
    assert sens.derivative("v_out", "RC") == pytest.approx(-ic, rel=1e-6)
    assert sens.derivative("v_out", "VCC") == pytest.approx(1.0, rel=1e-9)
    table = sens.table()
    assert len(table) == 2 * 3 and table[0]["quantity"] == gain and table[0]["rank"] == 1
    assert table[0]["parameter"] == "v_in"  # normalized V_BE/V_T ~ 24 beats R_C's 1


def test_expression_quantity_matches_its_closed_form():
    # power in R2 of the divider: v_out^2 / R2 with v_out = v_in R2/(R1+R2)
    power = Expression("P_R2", lambda op, m: op["v_out"] ** 2 / op["R2"], "W")
    sens = adlin.sensitivities(divider(), of=[power])
    R1, R2, v = 10e3, 4.7e3, 5.0
    # P = v^2 R2 / (R1 + R2)^2 -> dP/dR2 = v^2 (R1 - R2) / (R1 + R2)^3
    assert float(sens.values[0]) == pytest.approx(v**2 * R2 / (R1 + R2) ** 2, rel=1e-12)
    assert sens.derivative("P_R2", "R2") == pytest.approx(v**2 * (R1 - R2) / (R1 + R2) ** 3,
                                                          rel=1e-9)
    assert sens.units == ("W",)


# --- coalescing poles, messages -----------------------------------------------------------


def test_coalescing_poles_get_nan_and_a_note():
    R, L, C = 2 * math.sqrt(1e-3 / 1e-6), 1e-3, 1e-6  # critically damped
    sens = adlin.sensitivities(series_rlc(10.0, L, C), params={"R": R},
                               of=[Pole(0), PoleFrequency(0), "v_c"])
    assert np.isnan(np.asarray(sens.derivatives)[:2]).all()
    assert np.isfinite(np.asarray(sens.derivatives)[2]).all()
    assert any("pole 0" in n and "coincides" in n for n in sens.notes)
    with pytest.raises(adlin.AnalysisError, match="coincides"):
        sens.check("pole 0")
    assert sens.ranked("pole 0")[0]["parameter"] in ("R", "L", "C")
    assert "note:" in str(sens)


def test_errors_name_the_culprit():
    system = rc_lowpass()
    with pytest.raises(adlin.ParameterError, match="'v_ot'.*'v_out'"):
        adlin.sensitivities(system, of=["v_ot"])
    with pytest.raises(adlin.ParameterError, match="'Rx'.*'R'"):
        adlin.sensitivities(system, of=["v_out"], wrt=["Rx"])
    with pytest.raises(adlin.AnalysisError, match="pole table"):
        adlin.sensitivities(system, of=[Pole(3)])
    with pytest.raises(adlin.AnalysisError, match="of="):
        adlin.sensitivities(system, of=[])
    with pytest.raises(adlin.ParameterError, match="pole number"):
        Pole(-1)
    with pytest.raises(adlin.ParameterError, match="output"):
        adlin.sensitivities(system, of=[DCGain("v_in", "v_out")])
    sens = adlin.sensitivities(system, of=[Bias("v_out")], inputs={"v_in": 0.0})
    assert any("zero" in n for n in sens.notes)
    assert np.isnan(np.asarray(sens.normalized)).all()
    with pytest.raises(adlin.ParameterError, match="no quantity 'v_c'"):
        sens.derivative("v_c", "R")
