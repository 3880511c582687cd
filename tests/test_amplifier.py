"""Transistor stages built with adlin.Circuit against textbook small-signal formulas."""

import numpy as np
import pytest
import scipy.constants as const

import adlin

VT = const.k * 300.15 / const.e  # CODATA k and e via scipy.constants


def common_emitter(R_C=4.7e3):
    c = adlin.Circuit("common_emitter")
    c.input("v_drive", 0.65)
    c.param("V_CC", 10.0)
    c.voltage_source("VCC", "vcc", "gnd", "V_CC")
    c.voltage_source("VIN", "base", "gnd", "v_drive")
    c.resistor("R_C", "vcc", "col", R_C)
    c.bjt("Q1", c="col", b="base", e="gnd", polarity="npn", saturation_current=1e-15,
          forward_beta=150.0, reverse_beta=2.0)
    c.output("v_col", "col")
    return c


def test_common_emitter_gain_is_minus_gm_rc():
    """Small-signal gain of a common-emitter stage without emitter degeneration
    and without Early effect: A_v = -g_m R_C with g_m = I_C / V_T
    (Sedra & Smith, Microelectronic Circuits, 7th ed., sec. 7.3)."""
    circuit = common_emitter()
    system = circuit.build()
    op = adlin.steady_state(system)
    i_c = float((10.0 - op["v_col"]) / 4.7e3)
    assert 1e-5 < i_c < 2e-3 and float(op["v_col"]) > 1.0  # forward active
    gain = float(adlin.linearize(system, op).dc_gain()[0, 0])
    assert gain == pytest.approx(-(i_c / VT) * 4.7e3, rel=1e-6)
    ss = circuit.small_signal(op)
    assert float(ss["Q1"]["g_m"]) == pytest.approx(i_c / VT, rel=1e-6)
    # beta_dc = I_C / I_B equals the law's forward beta in forward active operation
    assert float(ss["Q1"]["beta_dc"]) == pytest.approx(150.0, rel=1e-6)


def test_common_emitter_gain_with_early_effect():
    """With output resistance r_o = V_A / I_C the gain becomes -g_m (R_C || r_o)
    (Sedra & Smith 7th ed. sec. 7.3); here g_m and g_o are read from the
    device's own small-signal summary, so the check is the circuit algebra."""
    circuit = adlin.Circuit("ce_early")
    circuit.input("v_drive", 0.65)
    circuit.voltage_source("VCC", "vcc", "gnd", 10.0)
    circuit.voltage_source("VIN", "base", "gnd", "v_drive")
    circuit.resistor("R_C", "vcc", "col", 4.7e3)
    circuit.bjt("Q1", c="col", b="base", e="gnd", saturation_current=1e-15, forward_beta=150.0,
                early_voltage=50.0)
    circuit.output("v_col", "col")
    system = circuit.build()
    op = adlin.steady_state(system)
    ss = circuit.small_signal(op)
    gm, go = float(ss["Q1"]["g_m"]), float(ss["Q1"]["g_o"])
    gain = float(adlin.linearize(system, op).dc_gain()[0, 0])
    assert gain == pytest.approx(-gm / (1 / 4.7e3 + go), rel=1e-10)


def test_source_follower_square_law_gain():
    """Square-law NMOS source follower with source resistor R_S (bulk tied to source):
    A_v = g_m R_S / (1 + g_m R_S), g_m = sqrt(2 k I_D) (Sedra & Smith 7th ed. sec. 7.3)."""
    c = adlin.Circuit("follower")
    c.input("v_gate", 2.0)
    c.voltage_source("VDD", "vdd", "gnd", 5.0)
    c.voltage_source("VG", "g", "gnd", "v_gate")
    c.mosfet("M1", d="vdd", g="g", s="src", law="square", transconductance_parameter=2e-3,
             threshold_voltage=0.7)
    c.resistor("R_S", "src", "gnd", 2e3)
    c.output("v_src", "src")
    system = c.build()
    op = adlin.steady_state(system)
    i_d = float(op["v_src"]) / 2e3
    gm = np.sqrt(2 * 2e-3 * i_d)
    gain = float(adlin.linearize(system, op).dc_gain()[0, 0])
    assert gain == pytest.approx(gm * 2e3 / (1 + gm * 2e3), rel=1e-9)
