"""Reference problems with closed-form answers from outside the project.

Each entry is a small System together with the published formula it must
reproduce; the source is named beside each one.  Tests import these and
compare adlin's numbers with the formulas.
"""

from __future__ import annotations

import functools
import math

import jax.numpy as jnp
import mpmath
import scipy.constants as const

import adlin

# Thermal voltage at 300.15 K from CODATA constants (scipy.constants).
VT = const.k * 300.15 / const.e


# --- diode with series resistor -------------------------------------------------
@functools.cache
def diode_resistor(v_source: float, R: float = 1e3, Is: float = 1e-14, n: float = 1.0,
                   junction: bool = True) -> adlin.System:
    """Source - R - diode to ground, written with the bare exponential (no limiting)."""

    def current(x, u, p):
        v = x[0]
        i_d = p["Is"] * (jnp.exp(v / (p["n"] * VT)) - 1.0)
        return jnp.stack([(v - u[0]) / p["R"] + i_d])

    junctions = [adlin.Junction("v_a", None, n * VT, n * VT * math.log(n * VT / (math.sqrt(2) * Is)))]
    return adlin.System(current, unknowns=("v_a",), inputs={"v_s": v_source},
                        params={"R": R, "Is": Is, "n": n},
                        junctions=junctions if junction else (), name="diode_resistor")


def diode_resistor_exact(v_source: float, R: float, Is: float, n: float = 1.0) -> float:
    """Diode voltage from the Lambert W closed form.

    I = (n VT / R) W((Is R / (n VT)) exp((V + Is R) / (n VT))) - Is
    (Banwell & Jayakumar, "Exact analytical solution for current flow through
    diode with series resistance", Electronics Letters 36(4), 2000).
    Evaluated with mpmath at 50 digits, so large V does not overflow.
    """
    mpmath.mp.dps = 50
    nvt = mpmath.mpf(n) * mpmath.mpf(VT)
    arg = (mpmath.mpf(Is) * R / nvt) * mpmath.exp((mpmath.mpf(v_source) + Is * R) / nvt)
    i = nvt / R * mpmath.lambertw(arg).real - Is
    return float(v_source - i * R)


# --- series RLC -------------------------------------------------------------------
@functools.cache
def series_rlc(R: float, L: float, C: float) -> adlin.System:
    """Voltage source - R - L - C to ground; unknowns capacitor voltage and inductor current.

    Characteristic polynomial s^2 + (R/L) s + 1/(LC): omega0 = 1/sqrt(LC),
    zeta = (R/2) sqrt(C/L) (Alexander & Sadiku, Fundamentals of Electric
    Circuits, 6th ed., sec. 8.5).
    """

    def current(x, u, p):
        v_c, i_l = x
        return jnp.stack([-i_l, -(u[0] - p["R"] * i_l - v_c)])

    def charge(x, p):
        return jnp.stack([p["C"] * x[0], p["L"] * x[1]])

    return adlin.System(current, charge, unknowns=("v_c", "i_L"), inputs=("v_in",),
                        outputs=("v_c",), params={"R": R, "L": L, "C": C}, name="series_rlc")


# --- equal two-section RC ladder ---------------------------------------------------------
@functools.cache
def rc_ladder(R: float, C: float) -> adlin.System:
    """Source - R - node 1 (C to ground) - R - node 2 (C to ground).

    Poles -(3 +- sqrt 5) / (2 R C) (Morgan-Voyce polynomials, A. M. Morgan-Voyce,
    "Ladder network analysis using Fibonacci numbers", IRE Trans. Circuit
    Theory 6(3), 1959).
    """

    def current(x, u, p):
        v1, v2 = x
        return jnp.stack([(v1 - u[0]) / p["R"] + (v1 - v2) / p["R"], (v2 - v1) / p["R"]])

    def charge(x, p):
        return p["C"] * x

    return adlin.System(current, charge, unknowns=("v_1", "v_2"), inputs=("v_in",),
                        outputs=("v_2",), params={"R": R, "C": C}, name="rc_ladder")


def rc_ladder_poles(R: float, C: float) -> tuple[float, float]:
    return (-(3 - math.sqrt(5)) / (2 * R * C), -(3 + math.sqrt(5)) / (2 * R * C))


# --- Van der Pol -------------------------------------------------------------------------------
@functools.cache
def van_der_pol(mu: float) -> adlin.System:
    """x'' - mu (1 - x^2) x' + x = 0 as x' = y, y' = mu (1 - x^2) y - x.

    At the origin the eigenvalues are (mu +- sqrt(mu^2 - 4)) / 2 (Strogatz,
    Nonlinear Dynamics and Chaos, 2nd ed., sec. 7.6 and the linearization of
    sec. 6.3).
    """

    def h(x, u, p):
        return jnp.stack([x[1], p["mu"] * (1 - x[0] ** 2) * x[1] - x[0]])

    return adlin.System.from_ode(h, states=("x", "y"), params={"mu": mu}, name="van_der_pol")


# --- descriptor circuit with singular E -----------------------------------------------------------
@functools.cache
def descriptor_divider(R1, R2, R3, Resr, C) -> adlin.System:
    """Ideal source at node s; R1 from s to a; R3 from a to ground; R2 from a to b;
    C from b to c; Resr from c to ground.  Nodes s and a carry no storage, the
    source current is algebraic, and C floats between b and c, so E is singular.

    By Thevenin's theorem at node a (Vth = Vin R3/(R1+R3), Rth = R1 || R3) the
    transfer function to v_b is
        H(s) = R3/(R1+R3) * (1 + s C Resr) / (1 + s C (Rth + R2 + Resr))
    (hand derivation; Thevenin equivalent as in Alexander & Sadiku, 6th ed., sec. 4.5).
    """

    def current(x, u, p):
        vs, va, vb, vc, i_src = x
        return jnp.stack([
            (vs - va) / p["R1"] + i_src,
            (va - vs) / p["R1"] + va / p["R3"] + (va - vb) / p["R2"],
            (vb - va) / p["R2"],
            vc / p["Resr"],
            vs - u[0],
        ])

    def charge(x, p):
        vb, vc = x[2], x[3]
        qc = p["C"] * (vb - vc)
        return jnp.stack([0.0 * vb, 0.0 * vb, qc, -qc, 0.0 * vb])

    return adlin.System(current, charge, unknowns=("v_s", "v_a", "v_b", "v_c", "i_src"),
                        inputs={"v_in": 1.0}, outputs=("v_b",),
                        params={"R1": R1, "R2": R2, "R3": R3, "Resr": Resr, "C": C},
                        name="descriptor_divider")


def descriptor_divider_tf(s, R1, R2, R3, Resr, C):
    rth = R1 * R3 / (R1 + R3)
    return R3 / (R1 + R3) * (1 + s * C * Resr) / (1 + s * C * (rth + R2 + Resr))
