"""Shared, cited reference problems for the test suite.

Each section belongs to one part of adlin and says where its numbers come
from. Keep sections self-contained; heavy imports (sympy) happen inside the
functions that need them, so importing this module stays cheap.
"""

from __future__ import annotations

import functools

# ===========================================================================
# Devices (adlin.devices): device laws re-derived in sympy from their sources
# ===========================================================================
#
# These are independent re-derivations of the device laws, written from the
# published formulas (not by calling adlin), evaluated in exact/high-precision
# arithmetic. tests/test_devices.py compares adlin's values and forward-mode
# Jacobians against them.
#
# - Thermal voltage k*T/q with the exact 2019-SI values of k and q (CODATA 2018).
# - Shockley diode: Sedra & Smith, Microelectronic Circuits, 7th ed., 2015,
#   sec. 4.2; limited exponential above exp argument 80 continued by its
#   tangent (the documented numerical safeguard of adlin.devices).
# - Depletion charge: integral of C_j0 (1 - v/V_j)^-m below F*V_j; above it
#   the capacitance's tangent line at F*V_j, integrated (Massobrio &
#   Antognetti, Semiconductor Device Modeling, 2nd ed., 1993, ch. 1; from
#   memory). sympy does the differentiation and integration here.
# - Ebers-Moll transport form with Early factor (1 - v_bc/V_A): Ebers & Moll,
#   Proc. IRE 42(12), 1954; Gummel & Poon, Bell Syst. Tech. J. 49, 1970.
# - Square law: Shichman & Hodges, IEEE JSSC SC-3(3), 1968; Sedra & Smith,
#   7th ed., sec. 5.2.
# - EKV: Enz, Krummenacher & Vittoz, Analog Integrated Circuits and Signal
#   Processing 8, 1995 (i_f,r = ln^2(1 + exp((v_p - v_s,d)/(2 U_T))),
#   I_S = 2 n beta U_T^2, v_p = (v_g - V_T0)/n).
# - Complementary devices (pnp, p-channel) as the mirror of the n-type law.

DEVICE_DPS = 40  # decimal digits of the reference evaluation

_DIODE = dict(saturation_current=2e-14, emission_coefficient=1.8, temperature=350.0)
_DIODE_Q = dict(
    saturation_current=1e-14,
    emission_coefficient=1.0,
    temperature=300.15,
    zero_bias_capacitance=2e-12,
    built_in_potential=0.7,
    grading_coefficient=0.5,
    forward_fraction=0.5,
    transit_time=5e-9,
)
_BJT = dict(
    saturation_current=1e-16,
    forward_beta=150.0,
    reverse_beta=2.0,
    early_voltage=60.0,
    emission_coefficient=1.1,
    temperature=310.0,
)
_BJT_Q = dict(
    saturation_current=1e-16,
    emission_coefficient=1.0,
    temperature=300.15,
    base_emitter_capacitance=1e-12,
    base_collector_capacitance=0.4e-12,
    forward_transit_time=3e-10,
    reverse_transit_time=1e-8,
    built_in_potential=0.75,
    grading_coefficient=0.33,
    forward_fraction=0.5,
)
_SQUARE = dict(
    transconductance_parameter=3e-4, threshold_voltage=0.45, channel_length_modulation=0.05
)
_EKV = dict(
    transconductance_parameter=3e-4,
    threshold_voltage=0.45,
    slope_factor=1.35,
    channel_length_modulation=0.05,
    temperature=310.0,
)
_MOS_Q = dict(
    gate_source_capacitance=2e-15,
    gate_drain_capacitance=0.5e-15,
    gate_bulk_capacitance=0.3e-15,
    drain_bulk_capacitance=1e-15,
    source_bulk_capacitance=1.2e-15,
)

#: (id, law name in adlin.devices, terminal voltages, keyword parameters).
#: Bias points sit inside one region each (never on a region edge).
DEVICE_JACOBIAN_CASES = [
    ("diode-reverse", "diode_current", (-5.0,), _DIODE),
    ("diode-small-forward", "diode_current", (0.3,), _DIODE),
    ("diode-forward", "diode_current", (0.75,), _DIODE),
    ("diode-limited-10V", "diode_current", (10.0,), dict(_DIODE, emission_coefficient=1.0)),
    ("diode-q-reverse", "diode_charge", (-5.0,), _DIODE_Q),
    ("diode-q-below-edge", "diode_charge", (0.3,), _DIODE_Q),
    ("diode-q-above-edge", "diode_charge", (0.6,), _DIODE_Q),
    ("diode-q-far-forward", "diode_charge", (3.0,), _DIODE_Q),
    ("bjt-forward-active", "bjt_currents", (2.0, 0.7, 0.0), _BJT),
    ("bjt-saturation", "bjt_currents", (0.1, 0.75, 0.0), _BJT),
    ("bjt-reverse-active", "bjt_currents", (0.0, 0.7, 2.0), _BJT),
    ("bjt-cutoff", "bjt_currents", (2.0, -1.0, 0.0), _BJT),
    ("bjt-pnp-forward-active", "bjt_currents", (-2.0, -0.7, 0.0), dict(_BJT, polarity=-1)),
    ("bjt-q-forward-active", "bjt_charges", (2.0, 0.7, 0.0), _BJT_Q),
    ("bjt-q-saturation", "bjt_charges", (0.1, 0.75, 0.0), _BJT_Q),
    ("bjt-q-pnp", "bjt_charges", (-0.1, -0.75, 0.0), dict(_BJT_Q, polarity=-1)),
    ("square-saturation", "square_law_currents", (1.5, 1.2, 0.0, 0.0), _SQUARE),
    ("square-triode", "square_law_currents", (0.2, 1.5, 0.0, 0.0), _SQUARE),
    ("square-triode-reversed", "square_law_currents", (0.0, 1.5, 0.2, 0.0), _SQUARE),
    ("square-saturation-reversed", "square_law_currents", (0.0, 1.2, 1.5, 0.0), _SQUARE),
    ("square-cutoff", "square_law_currents", (1.0, 0.3, 0.0, 0.0), _SQUARE),
    (
        "square-pmos-saturation",
        "square_law_currents",
        (-1.5, -1.2, 0.0, 0.0),
        dict(_SQUARE, polarity=-1),
    ),
    ("ekv-weak-inversion", "ekv_currents", (1.0, 0.2, 0.0, 0.0), _EKV),
    ("ekv-moderate-inversion", "ekv_currents", (1.0, 0.55, 0.0, 0.0), _EKV),
    ("ekv-strong-saturation", "ekv_currents", (1.5, 1.5, 0.0, 0.0), _EKV),
    ("ekv-strong-triode", "ekv_currents", (0.1, 1.5, 0.0, 0.0), _EKV),
    ("ekv-source-above-bulk", "ekv_currents", (1.5, 1.5, 0.3, 0.0), _EKV),
    ("ekv-reversed", "ekv_currents", (0.0, 1.2, 1.0, 0.0), _EKV),
    ("ekv-pmos", "ekv_currents", (-1.5, -1.2, 0.0, 0.0), dict(_EKV, polarity=-1)),
    ("mos-q", "mosfet_charges", (1.0, 1.2, 0.1, -0.5), _MOS_Q),
]


def _exact(x):
    """The exact value of a float64 as a sympy number (no decimal rounding)."""
    import sympy

    return sympy.Float(x, DEVICE_DPS)


def _thermal_voltage(temperature):
    import sympy

    k = sympy.Rational("1.380649e-23")  # J/K, exact in the 2019 SI
    q = sympy.Rational("1.602176634e-19")  # C, exact in the 2019 SI
    return k * _exact(temperature) / q


def _limited_exp(x):
    import sympy

    x0 = 80
    return sympy.Piecewise((sympy.exp(x), x <= x0), (sympy.exp(x0) * (1 + (x - x0)), True))


def _depletion_charge(v, c0, vj, m, f):
    # Below F*V_j: integral of the graded-junction capacitance. Above: the
    # tangent line of that capacitance at F*V_j, integrated from F*V_j.
    import sympy

    u, w = sympy.symbols("u w", real=True)  # integration variable, junction voltage
    cap = c0 * (1 - u / vj) ** (-m)
    v_edge = f * vj
    q_low = sympy.integrate(cap, (u, 0, w))
    tangent = cap.subs(u, v_edge) + sympy.diff(cap, u).subs(u, v_edge) * (u - v_edge)
    q_high = q_low.subs(w, v_edge) + sympy.integrate(tangent, (u, v_edge, w))
    # `v` may be an expression (e.g. v_b - v_e): substitute it only at the end.
    return sympy.Piecewise((q_low, w < v_edge), (q_high, True)).subs(w, v)


def _diode_current(v, p):
    vt = _thermal_voltage(p.get("temperature", 300.15))
    i_s = _exact(p.get("saturation_current", 1e-14))
    n = _exact(p.get("emission_coefficient", 1.0))
    return [i_s * (_limited_exp(v / (n * vt)) - 1)]


def _diode_charge(v, p):
    (i,) = _diode_current(v, p)
    q_dep = _depletion_charge(
        v,
        _exact(p["zero_bias_capacitance"]),
        _exact(p["built_in_potential"]),
        _exact(p["grading_coefficient"]),
        _exact(p["forward_fraction"]),
    )
    return [q_dep + _exact(p["transit_time"]) * i]


def _bjt_transport(v_be, v_bc, p):
    vt = _thermal_voltage(p.get("temperature", 300.15))
    n_vt = _exact(p.get("emission_coefficient", 1.0)) * vt
    i_s = _exact(p["saturation_current"])
    return i_s * (_limited_exp(v_be / n_vt) - 1), i_s * (_limited_exp(v_bc / n_vt) - 1)


def _bjt_currents(v_c, v_b, v_e, p):
    s = p.get("polarity", 1)
    v_be, v_bc = s * (v_b - v_e), s * (v_b - v_c)
    i_cc, i_ec = _bjt_transport(v_be, v_bc, p)
    beta_f, beta_r = _exact(p["forward_beta"]), _exact(p["reverse_beta"])
    i_t = (i_cc - i_ec) * (1 - v_bc / _exact(p["early_voltage"]))
    i_c = i_t - i_ec / beta_r
    i_b = i_cc / beta_f + i_ec / beta_r
    i_e = -(i_c + i_b)  # Kirchhoff's current law
    return [s * i_c, s * i_b, s * i_e]


def _bjt_charges(v_c, v_b, v_e, p):
    s = p.get("polarity", 1)
    v_be, v_bc = s * (v_b - v_e), s * (v_b - v_c)
    i_cc, i_ec = _bjt_transport(v_be, v_bc, p)
    shape = [
        _exact(p[k]) for k in ("built_in_potential", "grading_coefficient", "forward_fraction")
    ]
    q_be = _depletion_charge(v_be, _exact(p["base_emitter_capacitance"]), *shape)
    q_bc = _depletion_charge(v_bc, _exact(p["base_collector_capacitance"]), *shape)
    q_be += _exact(p["forward_transit_time"]) * i_cc
    q_bc += _exact(p["reverse_transit_time"]) * i_ec
    return [-s * q_bc, s * (q_be + q_bc), -s * q_be]


def _square_law(v_d, v_g, v_s, v_b, p):
    import sympy

    s = p.get("polarity", 1)
    k = _exact(p["transconductance_parameter"])
    v_t = _exact(p["threshold_voltage"])
    lam = _exact(p["channel_length_modulation"])

    def i_ds(v_gs, v_ds):  # Sedra & Smith sec. 5.2, v_ds >= 0
        v_ov = v_gs - v_t
        return sympy.Piecewise(
            (0, v_ov <= 0),
            (k * (v_ov * v_ds - v_ds**2 / 2) * (1 + lam * v_ds), v_ds < v_ov),
            (k / 2 * v_ov**2 * (1 + lam * v_ds), True),
        )

    d, g, src = s * v_d, s * v_g, s * v_s
    # Symmetric device: the lower channel end acts as the source.
    i = sympy.Piecewise((i_ds(g - src, d - src), d >= src), (-i_ds(g - d, src - d), True))
    return [s * i, 0, -s * i, 0]


def _ekv(v_d, v_g, v_s, v_b, p):
    import sympy

    s = p.get("polarity", 1)
    beta = _exact(p["transconductance_parameter"])
    v_t0 = _exact(p["threshold_voltage"])
    n = _exact(p["slope_factor"])
    lam = _exact(p["channel_length_modulation"])
    u_t = _thermal_voltage(p.get("temperature", 300.15))
    d, g, src, b = s * v_d, s * v_g, s * v_s, s * v_b
    v_p = (g - b - v_t0) / n
    i_f = sympy.log(1 + sympy.exp((v_p - (src - b)) / (2 * u_t))) ** 2
    i_r = sympy.log(1 + sympy.exp((v_p - (d - b)) / (2 * u_t))) ** 2
    i = 2 * n * beta * u_t**2 * (i_f - i_r) * (1 + lam * sympy.Abs(d - src))
    return [s * i, 0, -s * i, 0]


def _mosfet_charges(v_d, v_g, v_s, v_b, p):
    c = {k: _exact(v) for k, v in p.items() if k.endswith("capacitance")}
    q_gs = c["gate_source_capacitance"] * (v_g - v_s)
    q_gd = c["gate_drain_capacitance"] * (v_g - v_d)
    q_gb = c["gate_bulk_capacitance"] * (v_g - v_b)
    q_db = c["drain_bulk_capacitance"] * (v_d - v_b)
    q_sb = c["source_bulk_capacitance"] * (v_s - v_b)
    return [q_db - q_gd, q_gs + q_gd + q_gb, q_sb - q_gs, -q_gb - q_db - q_sb]


_DEVICE_REFERENCE_LAWS = {
    "diode_current": _diode_current,
    "diode_charge": _diode_charge,
    "bjt_currents": _bjt_currents,
    "bjt_charges": _bjt_charges,
    "square_law_currents": _square_law,
    "ekv_currents": _ekv,
    "mosfet_charges": _mosfet_charges,
}


@functools.cache
def _device_reference_functions(law, n_voltages, params_items):
    # Symbolic work (integration, differentiation) once per law and parameter
    # set; the bias points are then evaluated by mpmath.
    import sympy

    symbols = sympy.symbols(f"v0:{n_voltages}", real=True)
    exprs = sympy.Matrix(_DEVICE_REFERENCE_LAWS[law](*symbols, dict(params_items)))
    jac = exprs.jacobian(symbols)
    values = sympy.lambdify(symbols, list(exprs), modules="mpmath")
    jacobian = sympy.lambdify(symbols, jac.tolist(), modules="mpmath")
    return values, jacobian


def device_reference(law, voltages, params):
    """Values and Jacobian of a device law, re-derived in sympy, at one bias point.

    **Arguments:**

    - `law`: the name of the law in `adlin.devices` (e.g. ``"ekv_currents"``).
    - `voltages`: terminal potentials (Python floats, taken as exact binary values).
    - `params`: the keyword parameters given to the adlin law.

    **Returns:**

    ``(values, jacobian)`` as nested lists of mpmath numbers with
    `DEVICE_DPS` digits: ``values[i]`` is terminal quantity ``i`` and
    ``jacobian[i][j]`` its derivative with respect to voltage ``j``.
    """
    import mpmath

    values, jacobian = _device_reference_functions(
        law, len(voltages), tuple(sorted(params.items()))
    )
    with mpmath.workdps(DEVICE_DPS):
        point = [mpmath.mpf(v) for v in voltages]  # exact binary values
        return values(*point), jacobian(*point)
