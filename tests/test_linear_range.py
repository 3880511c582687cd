"""adlin.linear_range against amplitude limits derived by hand from the device laws.

The error of a slow step is a static quantity when the only storage sits
behind a linear element: both the nonlinear and the linear output then move
along the same exponential 1 - exp(-t/tau), so the peak error over the swing
equals |static deviation / (gain a) - 1|.  The static transfer comes from the
device law solved by scipy.optimize.brentq (or the Lambert W closed form), and
brentq on that error gives the limit each computed bracket must contain.
"""

from __future__ import annotations

import functools
import math

import jax.numpy as jnp
import numpy as np
import pytest
import scipy.constants as const
import scipy.optimize as so
from closed_forms import diode_resistor, diode_resistor_exact

import adlin

VT = const.k * 300.15 / const.e  # the device laws' default temperature, CODATA k and e


def _assert_bracket_holds(bracket, reference, precision):
    lo, hi = sorted(abs(b) for b in bracket)
    assert hi / lo <= 1 + precision * 1.0001
    # a small allowance for the transient solver's own error (rtol 1e-8)
    assert lo * (1 - 1e-4) <= abs(reference) <= hi * (1 + 1e-4), (bracket, reference)


# --- diode with series resistor (static): Lambert W reference ------------------------------

V_S, R_D, IS_D = 5.0, 1e3, 1e-14


@functools.cache
def diode_case():
    system = diode_resistor(V_S, R_D, IS_D)
    op = adlin.steady_state(system)
    return system, op


def _diode_reference():
    """Relative error of the linear model vs the Lambert W static transfer
    (Banwell & Jayakumar, Electronics Letters 36(4), 2000)."""
    v0 = diode_resistor_exact(V_S, R_D, IS_D)
    i0 = (V_S - v0) / R_D
    r_d = VT / (i0 + IS_D)  # Shockley small-signal resistance
    gain = r_d / (R_D + r_d)  # divider of R and r_d

    def rel(a):
        return abs(diode_resistor_exact(V_S + a, R_D, IS_D) - v0 - gain * a) / abs(gain * a)

    return gain, rel


def test_diode_limits_and_monotone_error():
    system, op = diode_case()
    gain, rel = _diode_reference()
    lin_gain = float(adlin.linearize(system, op).dc_gain()[0, 0])
    assert lin_gain == pytest.approx(gain, rel=1e-9)
    tol, precision = 0.01, 0.01
    r = adlin.linear_range(system, op, input="v_s", output="v_a", tol=tol, amplitude_min=0.01,
                           amplitude_max=1.0, precision=precision, n_points=11)
    ref_pos = so.brentq(lambda a: rel(a) - tol, 0.01, 1.0)
    ref_neg = -so.brentq(lambda a: rel(-a) - tol, 0.01, 1.0)
    _assert_bracket_holds(r.positive_bracket, ref_pos, precision)
    _assert_bracket_holds(r.negative_bracket, ref_neg, precision)
    assert r.positive > 0 > r.negative
    # the error-versus-amplitude curve: matches the closed form at every sample
    # and grows with the amplitude in each polarity
    for a, e in zip(r.amplitudes, r.errors, strict=True):
        assert e == pytest.approx(rel(a), rel=1e-4, abs=1e-7)
    for polarity in ("positive", "negative"):
        mags, errs = r.curve(polarity)
        assert mags.size >= 5
        assert np.all(np.diff(errs) > 0), polarity


# --- linear circuit: no limit -----------------------------------------------------------------

@functools.cache
def rc_case():
    def current(x, u, p):
        return jnp.stack([(x[0] - u[0]) / p["R"]])

    def charge(x, p):
        return jnp.stack([p["C"] * x[0]])

    system = adlin.System(current, charge, unknowns=("v_c",), inputs={"v_in": 1.0},
                          outputs=("v_c",), params={"R": 1e3, "C": 1e-6}, name="rc")
    return system, adlin.steady_state(system)


def test_linear_circuit_has_no_limit_and_default_timing():
    system, op = rc_case()
    r = adlin.linear_range(system, op, input="v_in", output="v_c", kind="sine",
                           amplitude_min=0.01, amplitude_max=10.0, growth=10.0, n_points=61)
    tau = 1e-3
    # defaults: a decade below the pole 1/(2 pi tau), run the longer of 10 tau and 3 periods
    assert r.f_hz == pytest.approx(1 / (2 * math.pi * tau) / 10, rel=1e-9)
    assert r.t_end == pytest.approx(3 / r.f_hz, rel=1e-9)
    assert r.limiting == "none"
    assert r.positive == 10.0 and r.negative == -10.0
    assert math.isinf(r.positive_bracket[1]) and math.isinf(r.negative_bracket[1])
    assert any("no positive limit found up to amplitude 10" in n for n in r.notes)
    assert np.max(r.errors) < 1e-5  # only the solver's tolerance separates them


def test_bad_arguments_name_the_culprit():
    system, op = rc_case()
    with pytest.raises(adlin.ParameterError, match="'v_inn'.*'v_in'"):
        adlin.linear_range(system, op, input="v_inn", output="v_c")
    with pytest.raises(adlin.ParameterError, match="'v_cc'.*'v_c'"):
        adlin.linear_range(system, op, input="v_in", output="v_cc")
    with pytest.raises(adlin.ParameterError, match="kind must be 'step' or 'sine'"):
        adlin.linear_range(system, op, input="v_in", output="v_c", kind="ramp")
    with pytest.raises(adlin.ParameterError, match="tol must lie in"):
        adlin.linear_range(system, op, input="v_in", output="v_c", tol=2.0)


# --- npn common-emitter stage with emitter degeneration, biased near cut-off ----------------

IS, BF, BR = 1e-16, 100.0, 1.0
VCC, RC, RE, CL, VB0 = 50.0, 1e3, 10e3, 10e-9, 2.7


@functools.cache
def ce_case():
    c = adlin.Circuit("degenerated_ce")
    c.input("v_b", VB0)
    c.voltage_source("VCC", "vcc", "gnd", VCC)
    c.voltage_source("VB", "base", "gnd", "v_b")
    c.resistor("R_C", "vcc", "col", RC)
    c.resistor("R_E", "emit", "gnd", RE)
    c.capacitor("C_L", "col", "gnd", CL)
    c.bjt("Q1", c="col", b="base", e="emit", saturation_current=IS, forward_beta=BF,
          reverse_beta=BR)
    c.output("v_out", "col")
    system = c.build()
    return system, adlin.steady_state(system)


def _ce_reference():
    """Static transfer of the stage from the transport-form Ebers-Moll law
    (Ebers & Moll, Proc. IRE 42(12), 1954) in forward-active operation: the
    base-collector junction is reverse biased by tens of volts, so
    exp(v_bc / V_T) underflows to 0 and I_EC = -I_S exactly.  KCL at the
    emitter, (i_c + i_b) R_E = v_e, is solved by brentq.  The small-signal
    gain is -alpha R_C / (r_e + R_E) (Sedra & Smith, Microelectronic Circuits,
    7th ed., sec. 7.3, common emitter with an emitter resistance), written
    here as -R_C g_m / (1 + g_m (1 + 1/beta_F) R_E)."""

    def i_c(vb):
        def kcl(ve):
            e = math.exp((vb - ve) / VT)
            return (IS * e + IS / BR + IS * (e - 1) / BF - IS / BR) * RE - ve

        ve = so.brentq(kcl, vb - 1.2, max(vb, 0.0) + 1e-3, xtol=1e-15, rtol=1e-15)
        return IS * math.exp((vb - ve) / VT) + IS / BR, ve

    ic0, ve0 = i_c(VB0)
    gm = IS * math.exp((VB0 - ve0) / VT) / VT
    gain = -RC * gm / (1 + gm * (1 + 1 / BF) * RE)

    def rel(a):
        return abs(-(i_c(VB0 + a)[0] - ic0) * RC - gain * a) / abs(gain * a)

    return gain, rel


@pytest.mark.slow
def test_common_emitter_near_cut_off_limits_on_the_negative_swing():
    system, op = ce_case()
    gain, rel = _ce_reference()
    assert float(adlin.linearize(system, op).dc_gain()[0, 0]) == pytest.approx(gain, rel=1e-7)
    tol, precision = 0.005, 0.01
    r = adlin.linear_range(system, op, input="v_b", output="v_out", tol=tol,
                           amplitude_min=0.01, amplitude_max=10.0, precision=precision)
    ref_neg = -so.brentq(lambda a: rel(-a) - tol, 0.1, 2.0)  # about -1.0 V: towards cut-off
    ref_pos = so.brentq(lambda a: rel(a) - tol, 0.1, 8.0)  # about +2.9 V
    _assert_bracket_holds(r.negative_bracket, ref_neg, precision)
    _assert_bracket_holds(r.positive_bracket, ref_pos, precision)
    assert r.limiting == "negative"
    assert r.t_end == pytest.approx(10 * RC * CL, rel=1e-6)  # default: 10 tau of the load
    for a, e in zip(r.amplitudes, r.errors, strict=True):
        assert e == pytest.approx(rel(a), rel=5e-3), a
