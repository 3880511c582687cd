"""Tests of adlin.devices against outside sources.

Each test names the source its numbers come from. The sympy re-derivations
of the laws live in tests/references.py (section "Devices").
"""

from __future__ import annotations

import functools
import math

import jax
import jax.numpy as jnp
import numpy as np
import pytest
import scipy.constants
from hypothesis import given, settings
from hypothesis import strategies as st
from references import DEVICE_JACOBIAN_CASES, device_reference

import adlin.devices as dev

VT_300 = scipy.constants.k * 300.15 / scipy.constants.e


@functools.partial(jax.jit, static_argnames=("law", "polarity"))
def _value_and_jacobian(law, voltages, params, polarity=None):
    # One compilation per law (and polarity) instead of per-primitive eager dispatch.
    if polarity is not None:
        params = dict(params, polarity=polarity)

    def f(*v):
        out = getattr(dev, law)(*v, **params)
        return jnp.stack(out) if isinstance(out, tuple) else jnp.stack([out])

    cols = jax.jacfwd(f, argnums=tuple(range(len(voltages))))(*voltages)
    return f(*voltages), jnp.stack(cols, axis=-1)


def _assert_rel(actual, reference, rtol, what):
    """Entry-wise |a - r| <= rtol |r|; an exactly zero reference needs an exact zero."""
    actual = np.atleast_1d(np.asarray(actual, dtype=float))
    ref = np.atleast_1d(np.asarray([float(x) for x in np.ravel(reference)], dtype=float))
    ref = ref.reshape(actual.shape)
    err = np.abs(actual - ref)
    bad = err > rtol * np.abs(ref)
    assert not bad.any(), (
        f"{what}: adlin {actual[bad]} vs reference {ref[bad]}, "
        f"relative error {(err[bad] / np.abs(ref[bad])).tolist()} > {rtol}"
    )


# --------------------------------------------------------------------------
# Thermal voltage
# --------------------------------------------------------------------------


def test_thermal_voltage_codata():
    """k T / q with the CODATA (2019-SI exact) constants; ~25.85 mV near room temperature."""
    vt = dev.thermal_voltage(300.15)
    assert float(vt) == pytest.approx(scipy.constants.k * 300.15 / scipy.constants.e, rel=1e-15)
    assert float(dev.thermal_voltage()) == float(vt)  # default is 27 degC
    # Textbook value: k/q = 86.173 uV/K, so V_T(300 K) = 25.852 mV, V_T(300.15 K) = 25.865 mV.
    assert float(dev.thermal_voltage(300.0)) == pytest.approx(25.852e-3, abs=0.5e-6)
    assert float(vt) == pytest.approx(25.85e-3, rel=1e-3)


# --------------------------------------------------------------------------
# AD Jacobians against sympy re-derivations of the published laws
# --------------------------------------------------------------------------


@pytest.mark.parametrize(
    "law, voltages, params",
    [pytest.param(*case[1:], id=case[0]) for case in DEVICE_JACOBIAN_CASES],
)
def test_jacobian_matches_sympy(law, voltages, params):
    """jax.jacfwd of each law equals the exact Jacobian of the law re-derived in sympy
    from its source (see references.py: Sedra & Smith; Ebers & Moll 1954; Shichman &
    Hodges 1968; Enz, Krummenacher & Vittoz 1995), to 1e-13 relative, entry by entry."""
    dynamic = {k: v for k, v in params.items() if k != "polarity"}
    polarity = params.get("polarity")
    value, jac = _value_and_jacobian(law, tuple(voltages), dynamic, polarity=polarity)
    ref_value, ref_jac = device_reference(law, voltages, params)
    _assert_rel(value, ref_value, 1e-13, f"{law} value")
    _assert_rel(jac, ref_jac, 1e-13, f"{law} Jacobian")


# --------------------------------------------------------------------------
# Junction: limited exponential, depletion charge, large forward voltages
# --------------------------------------------------------------------------


def test_limited_exp_is_c1_at_threshold():
    """Tangent continuation of exp at argument 80: value and slope match (C1)."""
    for x in (80.0 - 1e-9, 80.0, 80.0 + 1e-9):
        assert float(dev.limited_exp(x)) == pytest.approx(math.exp(80.0), rel=1e-8)
        assert float(jax.grad(dev.limited_exp)(x)) == pytest.approx(math.exp(80.0), rel=1e-8)
    assert float(dev.limited_exp(50.0)) == pytest.approx(math.exp(50.0), rel=1e-15)


@jax.jit
def _far_forward(v):
    q = dict(zero_bias_capacitance=1e-12, transit_time=1e-9)
    return jnp.stack(
        [
            dev.diode_current(v),
            jax.grad(dev.diode_current)(v),
            dev.diode_charge(v, **q),
            jax.grad(lambda x: dev.diode_charge(x, **q))(v),
            *dev.bjt_currents(v, v, 0.0),
            *jax.jacfwd(lambda b: jnp.stack(dev.bjt_currents(0.0, b, 0.0)))(v),
            *dev.bjt_charges(
                0.0, v, 0.0, forward_transit_time=1e-10, base_emitter_capacitance=1e-12
            ),
        ]
    )


@pytest.mark.parametrize("v", [10.0, 100.0, 1e4])
def test_large_forward_voltage_is_finite(v):
    """A Newton iterate far in forward bias (10 V, 100 V) must give finite values and
    derivatives (plain exp overflows float64 beyond ~18 V across an ideal junction)."""
    out = np.asarray(_far_forward(v))
    assert np.isfinite(out).all()
    assert out[1] > 0.0  # the conductance still points Newton back


def test_depletion_charge_continuity_at_forward_fraction():
    """Charge and capacitance are continuous where the capacitance is linearised
    (v = F V_j; Massobrio & Antognetti, 2nd ed., ch. 1, from memory), and the
    capacitance there equals C_j0 / (1 - F)^m."""
    p = dict(
        zero_bias_capacitance=1e-12,
        built_in_potential=0.8,
        grading_coefficient=0.4,
        forward_fraction=0.5,
    )
    edge = 0.4
    q = lambda v: dev.depletion_charge(v, **p)
    c = jax.grad(q)
    eps = 1e-9
    assert float(q(edge + eps)) == pytest.approx(float(q(edge - eps)), rel=1e-8)
    assert float(c(edge + eps)) == pytest.approx(float(c(edge - eps)), rel=1e-8)
    assert float(c(edge)) == pytest.approx(1e-12 / 0.5**0.4, rel=1e-8)
    assert float(c(0.0)) == pytest.approx(1e-12, rel=1e-15)
    assert float(q(0.0)) == 0.0


def test_diode_small_signal():
    """g_d = (i + I_S) / (n V_T) and c_d = C_j0 / (1 - v/V_j)^m + tau g_d
    (Sedra & Smith, 7th ed., secs. 3.6 and 4.3)."""
    p = dict(
        saturation_current=1e-14,
        emission_coefficient=1.5,
        zero_bias_capacitance=1e-12,
        built_in_potential=0.7,
        grading_coefficient=0.5,
        transit_time=4e-9,
    )
    s = dev.diode_small_signal(0.3, **p)
    g = (float(s["i_d"]) + 1e-14) / (1.5 * VT_300)
    assert float(s["g_d"]) == pytest.approx(g, rel=1e-14)
    assert float(s["c_d"]) == pytest.approx(1e-12 / (1 - 0.3 / 0.7) ** 0.5 + 4e-9 * g, rel=1e-14)
    with pytest.raises(TypeError, match="did you mean 'transit_time'"):
        dev.diode_small_signal(0.3, transit_tme=1e-9)


# --------------------------------------------------------------------------
# Ebers-Moll
# --------------------------------------------------------------------------


def test_ebers_moll_forward_beta():
    """Forward active with no Early effect: i_c / i_b = beta_F (Ebers & Moll, Proc. IRE 1954;
    Sedra & Smith, 7th ed., sec. 6.2). With v_bc = 0 the reverse current vanishes and the
    ratio is exact; at v_ce = 2 V it differs by ~I_S (1 + beta_F/beta_R) / I_C ~ 1e-11."""
    i_c, i_b, _ = dev.bjt_currents(0.7, 0.7, 0.0, forward_beta=120.0)
    assert float(i_c / i_b) == pytest.approx(120.0, rel=1e-15)
    i_c, i_b, _ = dev.bjt_currents(2.0, 0.7, 0.0, forward_beta=120.0, early_voltage=math.inf)
    assert float(i_c / i_b) == pytest.approx(120.0, rel=1e-9)
    s = dev.bjt_small_signal(2.0, 0.7, 0.0, forward_beta=120.0)
    assert float(s["beta_ac"]) == pytest.approx(120.0, rel=1e-9)
    assert float(s["g_m"]) == pytest.approx(float(i_c) / VT_300, rel=1e-9)  # g_m = I_C / V_T


def test_ebers_moll_early_effect_form():
    """i_c ~ I_S exp(v_be/V_T) (1 - v_bc/V_A) in forward active (transport form, Gummel &
    Poon 1970); within v_be/V_A of Sedra & Smith's I_S exp(v_be/V_T)(1 + v_ce/V_A)."""
    i_s, va, vbe = 1e-16, 50.0, 0.65
    for vce in (1.0, 2.0, 10.0):  # v_bc <= -0.35 V: the reverse current is negligible
        i_c = float(dev.bjt_currents(vce, vbe, 0.0, saturation_current=i_s, early_voltage=va)[0])
        transport = i_s * math.exp(vbe / VT_300) * (1 + (vce - vbe) / va)
        assert i_c == pytest.approx(transport, rel=1e-10)
        sedra_smith = i_s * math.exp(vbe / VT_300) * (1 + vce / va)
        assert abs(i_c / sedra_smith - 1) < vbe / va
        s = dev.bjt_small_signal(vce, vbe, 0.0, saturation_current=i_s, early_voltage=va)
        # g_o = I_C / (V_A - v_bc) exactly for this form (ignoring the ~I_S reverse current).
        assert float(s["g_o"]) == pytest.approx(i_c / (va - vbe + vce), rel=1e-10)


def test_bjt_capacitances():
    """C_pi = C_je/(1 - v_be/V_j)^m + tau_F g_m, C_mu = C_jc/(1 - v_bc/V_j)^m
    (Gray, Hurst, Lewis & Meyer, 5th ed., secs. 1.2 and 1.4)."""
    p = dict(
        base_emitter_capacitance=1e-12,
        base_collector_capacitance=0.3e-12,
        forward_transit_time=2e-10,
        built_in_potential=0.9,
        grading_coefficient=0.33,
    )
    s = dev.bjt_small_signal(3.0, 0.4, 0.0, **p)
    g_m = float(s["g_m"])
    assert float(s["c_be"]) == pytest.approx(
        1e-12 / (1 - 0.4 / 0.9) ** 0.33 + 2e-10 * g_m, rel=1e-12
    )
    assert float(s["c_bc"]) == pytest.approx(0.3e-12 / (1 + 2.6 / 0.9) ** 0.33, rel=1e-12)


# --------------------------------------------------------------------------
# Square law
# --------------------------------------------------------------------------

KP, VTH, LAM = 4e-4, 0.5, 0.08


def _sq(vd, vg, vs=0.0, vb=0.0, **kw):
    p = dict(transconductance_parameter=KP, threshold_voltage=VTH, channel_length_modulation=LAM)
    return dev.square_law_currents(vd, vg, vs, vb, **(p | kw))


def test_square_law_regions():
    """Shichman & Hodges 1968; Sedra & Smith, 7th ed., sec. 5.2: saturation
    k/2 (v_gs - V_t)^2 (1 + lambda v_ds), triode k ((v_gs - V_t) v_ds - v_ds^2/2)(1 + lambda v_ds),
    zero in cutoff, no gate or bulk current."""
    i_d, i_g, i_s, i_b = _sq(2.0, 1.3)
    assert float(i_d) == pytest.approx(KP / 2 * 0.8**2 * (1 + LAM * 2.0), rel=1e-15)
    assert float(i_s) == -float(i_d) and float(i_g) == 0.0 and float(i_b) == 0.0
    assert float(_sq(0.3, 1.3)[0]) == pytest.approx(
        KP * (0.8 * 0.3 - 0.045) * (1 + LAM * 0.3), rel=1e-15
    )
    assert float(_sq(2.0, 0.4)[0]) == 0.0
    assert float(jax.grad(lambda vg: _sq(2.0, vg)[0])(0.4)) == 0.0


def test_square_law_continuity_at_saturation_edge():
    """The textbook law is continuous with continuous first derivatives at v_ds = v_ov
    (Sedra & Smith, 7th ed., sec. 5.2) and at v_ov = 0."""
    grad = jax.grad(lambda vd, vg: _sq(vd, vg)[0], argnums=(0, 1))
    eps = 1e-9
    for vd, vg in ((0.8 - eps, 1.3), (0.8 + eps, 1.3)):
        assert float(_sq(vd, vg)[0]) == pytest.approx(KP / 2 * 0.64 * (1 + LAM * 0.8), rel=1e-7)
        g_ds, g_m = (float(x) for x in grad(vd, vg))
        assert g_ds == pytest.approx(KP / 2 * 0.64 * LAM, rel=1e-6)
        assert g_m == pytest.approx(KP * 0.8 * (1 + LAM * 0.8), rel=1e-7)
    for vg in (VTH - eps, VTH + eps):
        assert abs(float(grad(1.0, vg)[1])) < 1e-12


def test_square_law_symmetry_and_zero_bias_conductance():
    """Drain and source swap when v_ds < 0 (symmetric device); at v_ds = 0 the channel
    conductance is k (v_gs - V_t) (Sedra & Smith, 7th ed., sec. 5.2, triode as a resistor)."""
    fwd = _sq(0.3, 1.5, 0.0)[0]
    rev = _sq(0.0, 1.5, 0.3)[0]
    assert float(rev) == -float(fwd)
    g_ds = jax.grad(lambda vd: _sq(vd, 1.5, 0.2)[0])(0.2)
    assert float(g_ds) == pytest.approx(KP * (1.5 - 0.2 - VTH), rel=1e-15)
    s = dev.mosfet_small_signal(
        1.5,
        1.3,
        0.0,
        0.0,
        law="square",
        transconductance_parameter=KP,
        threshold_voltage=VTH,
        channel_length_modulation=LAM,
        gate_source_capacitance=3e-15,
        drain_bulk_capacitance=1e-15,
    )
    assert float(s["g_m"]) == pytest.approx(KP * 0.8 * (1 + LAM * 1.5), rel=1e-15)
    assert float(s["g_ds"]) == pytest.approx(KP / 2 * 0.64 * LAM, rel=1e-14)
    assert float(s["c_gs"]) == 3e-15 and float(s["c_db"]) == 1e-15 and float(s["c_gd"]) == 0.0
    with pytest.raises(ValueError, match="unknown MOSFET law 'bsim'"):
        dev.mosfet_small_signal(1.0, 1.0, 0.0, 0.0, law="bsim")


# --------------------------------------------------------------------------
# EKV limits (Enz, Krummenacher & Vittoz 1995)
# --------------------------------------------------------------------------


def test_ekv_weak_inversion_gm_over_id():
    """Deep weak inversion: g_m / I_D -> 1 / (n U_T) and g_ms / I_D -> 1 / U_T (EKV 1995,
    weak-inversion asymptote). The relative deviation is ~ exp(x)/2 with
    x = (v_p - v_s)/(2 U_T) = -7.2 here, i.e. ~4e-4."""
    n = 1.3
    p = dict(slope_factor=n, threshold_voltage=0.5)
    s = dev.mosfet_small_signal(1.0, 0.0, 0.0, 0.0, law="ekv", **p)
    i_d = float(s["i_d"])
    assert float(s["g_m"]) / i_d == pytest.approx(1 / (n * VT_300), rel=1e-3)
    g_ms = -float(jax.grad(lambda vs: dev.ekv_currents(1.0, 0.0, vs, 0.0, **p)[0])(0.0))
    assert g_ms / i_d == pytest.approx(1 / VT_300, rel=1e-3)


@pytest.mark.parametrize(
    "overdrive, bound",
    # Excess over the square law ~ 2 exp(-x)/x, x = overdrive/(2 n U_T); with n = 1.3:
    # x = 2.97 -> 3.4 %, x = 7.4 -> 1.6e-4, x = 14.9 -> 4.6e-8.
    [(0.2, 0.04), (0.5, 2e-4), (1.0, 1e-7)],
)
def test_ekv_strong_inversion_approaches_square_law(overdrive, bound):
    """Strong-inversion saturation: I_D -> beta/(2n)(v_gs - V_T0)^2 with the source at the
    bulk (EKV 1995, strong-inversion asymptote), within the stated bounds."""
    beta, n, vt0 = 2e-4, 1.3, 0.5
    i_d = float(
        dev.ekv_currents(
            3.0,
            vt0 + overdrive,
            0.0,
            0.0,
            transconductance_parameter=beta,
            slope_factor=n,
            threshold_voltage=vt0,
        )[0]
    )
    square = beta / (2 * n) * overdrive**2
    assert 0.0 < i_d / square - 1 < bound


def test_ekv_matches_square_law_for_unit_slope():
    """With n = 1 and source at bulk, strong-inversion saturation equals the square law
    k/2 (v_gs - V_t)^2 (EKV 1995 vs Shichman & Hodges 1968)."""
    i_ekv = dev.ekv_currents(3.0, 2.0, 0.0, 0.0, slope_factor=1.0)[0]
    i_sq = dev.square_law_currents(3.0, 2.0, 0.0, 0.0)[0]
    assert float(i_ekv) == pytest.approx(float(i_sq), rel=1e-12)


# --------------------------------------------------------------------------
# Polarity mirror and Kirchhoff's laws
# --------------------------------------------------------------------------

_FOUR_TERMINAL = [dev.square_law_currents, dev.ekv_currents, dev.mosfet_charges]
_THREE_TERMINAL = [dev.bjt_currents, dev.bjt_charges]
_CHARGES = dict(
    base_emitter_capacitance=1e-12,
    base_collector_capacitance=0.4e-12,
    forward_transit_time=1e-10,
    reverse_transit_time=1e-8,
)
_MOS_CHARGES = dict(
    gate_source_capacitance=2e-15,
    gate_drain_capacitance=1e-15,
    gate_bulk_capacitance=0.5e-15,
    drain_bulk_capacitance=1e-15,
    source_bulk_capacitance=1e-15,
)


def _params(fn):
    return {dev.bjt_charges: _CHARGES, dev.mosfet_charges: _MOS_CHARGES}.get(fn, {})


@pytest.mark.parametrize("fn", _THREE_TERMINAL + _FOUR_TERMINAL, ids=lambda f: f.__name__)
def test_polarity_mirror(fn):
    """A pnp / p-channel device is the mirror of the npn / n-channel one:
    law(-v, polarity=-1) == -law(v) (Sedra & Smith, 7th ed., secs. 5.2 and 6.2)."""
    nterm = 3 if fn in _THREE_TERMINAL else 4
    v = (1.7, 0.72, 0.1, -0.3)[:nterm]
    pos = fn(*v, **_params(fn))
    neg = fn(*(-x for x in v), polarity=-1, **_params(fn))
    for a, b in zip(pos, neg, strict=True):
        assert float(b) == -float(a)


_CURRENT_LAWS = {
    "npn": lambda v: dev.bjt_currents(v[0], v[1], v[2], early_voltage=40.0),
    "pnp": lambda v: dev.bjt_currents(v[0], v[1], v[2], polarity=-1),
    "square": lambda v: dev.square_law_currents(*v, channel_length_modulation=0.1),
    "ekv": lambda v: dev.ekv_currents(*v),
}
_CHARGE_LAWS = {
    "bjt": lambda v: dev.bjt_charges(v[0], v[1], v[2], **_CHARGES),
    "mos": lambda v: dev.mosfet_charges(*v, **_MOS_CHARGES),
}


_volts = st.floats(min_value=-5.0, max_value=5.0, allow_nan=False)


@settings(max_examples=60, deadline=None, derandomize=True, database=None)
@given(st.lists(_volts, min_size=4, max_size=4))
def test_kirchhoff_current_and_charge_sums(v):
    """Kirchhoff's current law: terminal currents into a device sum to zero exactly (the
    last is formed as minus the sum of the others; eager evaluation, where no compiler
    fusion reorders the arithmetic), and terminal charges sum to zero up to rounding."""
    for name, law in _CURRENT_LAWS.items():
        out = [float(x) for x in law(v)]
        assert sum(out[:-1]) + out[-1] == 0.0, name
    for name, law in _CHARGE_LAWS.items():
        out = np.array([float(x) for x in law(v)])
        assert abs(out.sum()) <= 8 * np.finfo(float).eps * np.abs(out).max(), name


# --------------------------------------------------------------------------
# Transformations: jit, vmap, grad
# --------------------------------------------------------------------------


def test_grad_wrt_saturation_current_is_analytic():
    """d i / d I_S = exp(v/(n V_T)) - 1 (Shockley law, Sedra & Smith, 7th ed., sec. 4.2)."""
    g = jax.grad(lambda i_s: dev.diode_current(0.6, saturation_current=i_s))(1e-14)
    assert float(g) == pytest.approx(math.expm1(0.6 / VT_300), rel=1e-13)
    # Gradient through an infinite default Early voltage stays finite (zero).
    g_va = jax.grad(lambda va: dev.bjt_currents(2.0, 0.7, 0.0, early_voltage=va)[0])(math.inf)
    assert float(g_va) == 0.0


@pytest.mark.parametrize(
    "law, voltages, params",
    [
        pytest.param(*case[1:], id=case[0])
        for case in DEVICE_JACOBIAN_CASES
        if case[0]
        in (
            "diode-q-above-edge",
            "bjt-saturation",
            "bjt-q-saturation",
            "square-triode",
            "ekv-moderate-inversion",
            "mos-q",
        )
    ],
)
def test_grad_wrt_every_parameter_is_finite_and_matches_finite_differences(law, voltages, params):
    """jax.grad with respect to each float parameter is finite and agrees with a central
    difference (relative step 1e-6, tolerance 1e-5) of the same law."""
    dynamic = {k: float(v) for k, v in params.items() if k != "polarity"}
    fn = getattr(dev, law)

    def weighted(p):  # terminal quantities sum to zero (KCL): weight them instead
        out = fn(*voltages, **p)
        out = out if isinstance(out, tuple) else (out,)
        return sum((k + 1.0) * x for k, x in enumerate(out))

    grad = jax.jit(jax.grad(weighted))(dynamic)
    f = jax.jit(weighted)
    scale = abs(float(f(dynamic)))
    for name, g in grad.items():
        assert np.isfinite(float(g)), name
        h = 1e-6 * max(abs(dynamic[name]), 1e-3)
        up, down = dict(dynamic), dict(dynamic)
        up[name] += h
        down[name] -= h
        fd = (float(f(up)) - float(f(down))) / (2 * h)
        # Rounding error of the difference quotient is ~ eps * |f| / h.
        assert float(g) == pytest.approx(fd, rel=1e-5, abs=1e-12 * scale / h), name


def test_jit_matches_eager():
    """jax.jit gives the same numbers as eager evaluation (EKV 1995 law)."""
    args = (1.2, 0.9, 0.1, 0.0)
    eager = dev.ekv_currents(*args, slope_factor=1.4)
    jitted = jax.jit(lambda *a: dev.ekv_currents(*a, slope_factor=1.4))(*args)
    assert [float(x) for x in jitted] == pytest.approx([float(x) for x in eager], rel=1e-15)
    s = jax.jit(lambda vb: dev.bjt_small_signal(2.0, vb, 0.0))(0.7)
    assert float(s["beta_ac"]) == pytest.approx(100.0, rel=1e-9)


def test_vmap_over_bias_and_traced_parameters():
    """jax.vmap over bias points and over a traced parameter (temperature) gives the
    Shockley law I_S expm1(v/(n k T/q)) (Sedra & Smith, 7th ed., sec. 4.2) point by point."""
    vs = np.linspace(-1.0, 0.8, 7)
    temps = np.array([250.0, 300.15, 400.0])

    @jax.jit
    def batched(vs, temps):
        i_v = jax.vmap(lambda v: dev.diode_current(v, emission_coefficient=1.2))(vs)
        i_t = jax.vmap(lambda t: dev.diode_current(0.6, temperature=t))(temps)
        g_m = jax.vmap(lambda vg: dev.mosfet_small_signal(1.0, vg, 0.0, 0.0)["g_m"])(vs + 1.0)
        return i_v, i_t, g_m

    i_v, i_t, g_m = (np.asarray(x) for x in batched(vs, temps))
    vt = scipy.constants.k * temps / scipy.constants.e
    assert i_v == pytest.approx(1e-14 * np.expm1(vs / (1.2 * VT_300)), rel=1e-13)
    assert i_t == pytest.approx(1e-14 * np.expm1(0.6 / vt), rel=1e-13)
    assert (g_m > 0).all()
