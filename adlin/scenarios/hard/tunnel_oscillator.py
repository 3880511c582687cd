"""A tunnel-diode LC oscillator biased in the negative-resistance region.

A 1.5 V cell and the divider ``RA`` (130 Ohm) / ``RB`` (22 Ohm) make a stiff
0.22 V source (18.8 Ohm); the inductor ``L1`` (2.2 uH) carries the bias to a
germanium tunnel diode ``TD`` with the tank capacitor ``CT`` (1 nF) across
it.  The diode sits between its peak (65 mV) and its valley, where its
differential resistance is about -43 Ohm; the bias source is stiffer than
that, so there is exactly one steady state.  The negative resistance undamps
the tank: the small-signal characteristic equation
L C s^2 + (R C - G L) s + (1 - R G) = 0 (R the source resistance, -G the
diode's differential conductance) has a complex pole pair in the right
half-plane, so the bias point is unstable and the circuit oscillates (it
starts near 2.3 MHz).

Intended state: that bias point (unstable on purpose).  A solver that prefers
stable states must still return it, since no stable one exists.

Newton from zero: the diode law is not monotonic (a peak and a valley), yet
plain Newton converges here (measured: 7 iterations), as expected: with a
bias source stiffer than the most negative differential resistance (18.8
against 37.7 Ohm, the least of `differential_conductance` on a 1 mV grid)
the load line crosses the characteristic once, so the DC equations reduce
to one monotone equation in the diode voltage, which the damped Newton's
line search handles.  A softer bias (source resistance above
37.7 Ohm) would give three crossings, but then the constant term 1 - R G of
the characteristic equation above is negative and the middle crossing is a
saddle: the circuit becomes a bistable switch, not an oscillator, so that is
no honest "oscillator bias" for Newton to miss.  This case is kept as the
control on which Newton converges and `auto` must not escalate; the
negative-resistance oscillator on which Newton from zero fails is the
current-controlled one of `put_oscillator`.  `Auto(prefer_stable=True)`
finds the bias unstable (a complex pole pair) and looks for a stable state:
its power-up run oscillates without settling, so it stops there and keeps the
bias (2454 residual evaluations in all, measured; 7266 when it also ran from
both sides of the focus).

Diode law (a common textbook form, from memory): tunnelling current
I_p (v / V_p) exp(1 - v / V_p) plus a diffusion current I_s (exp(v / (n V_T))
- 1), with I_p = 4.7 mA and V_p = 65 mV (a small germanium tunnel diode),
I_s = 60 nA, n = 1.5 (diffusion current about 0.5 mA at 0.35 V).
"""

from __future__ import annotations

import functools
import math

import jax.numpy as jnp
import mpmath
import scipy.constants as const

from ..._circuit import Circuit
from ..._system import System
from ...devices import limited_expm1, thermal_voltage
from ._case import NEWTON_CONVERGES, Expected, HardCase

V_CELL = 1.5
RA, RB = 130.0, 22.0
L_BIAS, C_TANK = 2.2e-6, 1e-9
TUNNEL = dict(peak_current=4.7e-3, peak_voltage=0.065, saturation_current=60e-9,
              emission_coefficient=1.5)


def tunnel_current(v, p):
    """Current of the tunnel diode from anode to cathode (A) at voltage v (V)."""
    vp = p["peak_voltage"]
    tunnelling = p["peak_current"] * (v / vp) * jnp.exp(1.0 - v / vp)
    diffusion = p["saturation_current"] * limited_expm1(
        v / (p["emission_coefficient"] * thermal_voltage(300.15)))
    return tunnelling + diffusion


@functools.cache
def tunnel_oscillator() -> System:
    """The oscillator as an `adlin.System` (input ``v_cell``, output ``v_diode``)."""
    c = Circuit("tunnel_oscillator")
    c.input("v_cell", V_CELL, unit="V")
    c.voltage_source("VC", "plus", "gnd", "v_cell")
    c.resistor("RA", "plus", "bias", RA)
    c.resistor("RB", "bias", "gnd", RB)
    c.inductor("L1", "bias", "td", L_BIAS)
    c.two_terminal("TD", "td", "gnd", current=tunnel_current, params=TUNNEL)
    c.capacitor("CT", "td", "gnd", C_TANK)
    c.output("v_diode", "td")
    return c.build()


def _law(v):
    vt = mpmath.mpf(const.k) * mpmath.mpf("300.15") / mpmath.mpf(const.e)
    t = TUNNEL
    return (t["peak_current"] * (v / t["peak_voltage"]) * mpmath.exp(1 - v / t["peak_voltage"])
            + t["saturation_current"] * mpmath.expm1(v / (t["emission_coefficient"] * vt)))


def bias_voltage() -> float:
    """Diode voltage on the load line of the divider's Thevenin source.

    V_th = V RB / (RA + RB), R_th = RA || RB (the inductor is a short at DC);
    solves (V_th - v) / R_th = i(v) with mpmath.findroot at 30 digits from
    the middle of the negative-resistance region.
    """
    mpmath.mp.dps = 30
    v_th = mpmath.mpf(V_CELL) * RB / (RA + RB)
    r_th = mpmath.mpf(RA) * RB / (RA + RB)
    return float(mpmath.findroot(lambda v: (v_th - v) / r_th - _law(v), mpmath.mpf("0.15")))


def differential_conductance(v: float) -> float:
    """di/dv of the diode law at v (S), by mpmath's numerical derivative at 30 digits."""
    mpmath.mp.dps = 30
    return float(mpmath.diff(_law, mpmath.mpf(v)))


def small_signal_poles() -> tuple[complex, complex]:
    """Roots of L C s^2 + (R C + g L) s + (1 + R g) = 0, g = di/dv at the bias.

    The tank's characteristic equation by hand: KCL at the diode,
    (s C + g) V = I_L, and the bias branch, (s L + R) I_L = -V, with R = RA || RB
    (nodal analysis, e.g. Alexander & Sadiku, Fundamentals of Electric
    Circuits, 6th ed., ch. 8, second-order circuits).
    """
    import numpy as np

    g = differential_conductance(bias_voltage())
    r = RA * RB / (RA + RB)
    roots = np.roots([L_BIAS * C_TANK, r * C_TANK + g * L_BIAS, 1.0 + r * g])
    return complex(roots[0]), complex(roots[1])


def _region(op) -> bool:
    # on the falling branch: negative differential conductance at the bias
    v = float(op["v_td"])
    vp = TUNNEL["peak_voltage"]
    slope = TUNNEL["peak_current"] / vp * math.exp(1.0 - v / vp) * (1.0 - v / vp)
    return vp < v < 0.35 and slope < 0.0


def _hand() -> dict[str, Expected]:
    return {"v_td": Expected(bias_voltage(), 1e-9, 1e-12, "load line, mpmath.findroot")}


CASE = HardCase(
    name="tunnel_oscillator",
    description="tunnel-diode LC oscillator biased at -40 Ohm from a 1.5 V cell",
    build=tunnel_oscillator,
    newton_from_zero=NEWTON_CONVERGES,
    why="control case: the stiff bias crosses the non-monotonic law once, so Newton converges; "
        "the bias is unstable on purpose and prefer_stable must keep it",
    intended="the single, unstable bias point on the negative-resistance branch (about 0.17 V)",
    predicate=_region,
    hand=_hand,
    reference_guess={"v_plus": V_CELL, "v_bias": 0.17, "v_td": 0.17, "i_L1": 2.5e-3},
)
