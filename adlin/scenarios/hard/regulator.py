"""A discrete series regulator whose reference and drive are powered from its own output.

A 9 V input (0.5 Ohm source) and a 5.4 V, 54 mA output: the NPN pass
transistor ``Q1`` is an emitter follower driven from node ``b``; the
reference is a 3.3 V zener ``DZ`` fed from the OUTPUT through ``RZ`` (which
keeps input ripple off the reference); the error amplifier ``Q2`` compares
the divider tap ``fb`` with the zener and steals drive from ``b``; the drive
itself is a PNP mirror ``Q3``/``Q4`` whose reference current is set by ``Q5``
from the zener voltage.  With the output at zero the zener, ``Q5``, the mirror
and the pass device all carry nothing: a regulator built this way does not
start by itself.  The start-up resistor ``RSU`` (47 kOhm from the input to
``b``) gives the pass device enough base current to lift the output past the
point where the zener and ``Q5`` take over.

Intended state: output in regulation,
v_out = (V_Z + V_BE2) (1 + R1/R2), about 5.4 V.

Why Newton from zero fails: with RSU = 47 kOhm the no-start state has gone,
but its ghost has not -- from all-zero voltages Newton creeps along the
half-started output (about 0.4 V) and stops at its iteration limit
(measured).  The start-up margin is thin: with RSU = 150 kOhm a second,
stable state exists with the output stuck near 0.5 V (the stuck regulator a
bench test would show; the corpus test checks it).  Auto must return the
regulating state.

Device values from memory: small-signal NPN/PNP I_S = 1e-15 A, beta 150,
Early voltage 80 V; pass device I_S = 1e-13 A, beta 80, Early voltage 100 V;
zener breakdown 3.3 V with 5 mA at the knee; 10 uF output capacitor with
0.1 Ohm series resistance.
"""

from __future__ import annotations

import functools
import math

import scipy.constants as const

from ..._circuit import Circuit
from ..._system import System
from ...devices import limited_exp, limited_expm1, thermal_voltage
from ._case import NEWTON_FAILS, Expected, HardCase

V_UNREG = 9.0
R1, R2 = 5.1e3, 15e3
R_LOAD = 100.0
ZENER = dict(saturation_current=1e-14, breakdown_current=5e-3, breakdown_voltage=3.3,
             breakdown_emission=1.0)
SMALL = dict(saturation_current=1e-15, forward_beta=150.0, early_voltage=80.0)
PASS = dict(saturation_current=1e-13, forward_beta=80.0, early_voltage=100.0)


def zener_current(v, p):
    """Zener diode current from anode to cathode (A) at voltage v (V).

    Forward: the Shockley law.  Reverse breakdown: I_bv exp(-(v + BV) / (n V_T)),
    an exponential knee at -BV (a common behavioural form, from memory).
    """
    vt = thermal_voltage(300.15)
    forward = p["saturation_current"] * limited_expm1(v / vt)
    breakdown = p["breakdown_current"] * limited_exp(
        -(v + p["breakdown_voltage"]) / (p["breakdown_emission"] * vt))
    return forward - breakdown


@functools.cache
def regulator() -> System:
    """The regulator as an `adlin.System` (input ``v_unreg``, output ``v_reg``;
    parameter ``RSU``, the start-up resistor)."""
    c = Circuit("bootstrapped_regulator")
    c.input("v_unreg", V_UNREG, unit="V")
    c.voltage_source("VIN", "src", "gnd", "v_unreg")
    c.resistor("RSRC", "src", "in", 0.5)
    c.capacitor("CIN", "in", "gnd", 10e-6)
    c.bjt("Q1", c="in", b="b", e="out", **PASS)
    c.resistor("RL", "out", "gnd", R_LOAD)
    c.resistor("RESR", "out", "co", 0.1)
    c.capacitor("COUT", "co", "gnd", 10e-6)
    c.resistor("R1", "out", "fb", R1)
    c.resistor("R2", "fb", "gnd", R2)
    c.resistor("RZ", "out", "ref", 1.5e3)
    c.two_terminal("DZ", "gnd", "ref", current=zener_current, params=ZENER, junction=True)
    c.bjt("Q2", c="b", b="fb", e="ref", **SMALL)
    c.bjt("Q3", c="pm", b="pm", e="in", polarity="pnp", **SMALL)
    c.bjt("Q4", c="b", b="pm", e="in", polarity="pnp", **SMALL)
    c.bjt("Q5", c="pm", b="ref", e="e5", **SMALL)
    c.resistor("RE5", "e5", "gnd", 1.5e3)
    c.capacitor("CB", "b", "gnd", 100e-12)
    c.capacitor("CPM", "pm", "in", 20e-12)
    c.capacitor("CREF", "ref", "gnd", 10e-9)
    c.resistor("RSU", "in", "b", 47e3)
    c.output("v_reg", "out")
    return c.build()


def regulated_output() -> float:
    """v_out = (V_Z + V_BE2) (1 + R1/R2) by hand.

    The loop holds the error amplifier's base at V_Z + V_BE2 (a series
    regulator with a transistor error amplifier: Horowitz & Hill, The Art of
    Electronics, 3rd ed., 2015, ch. 9, linear regulators; from memory).  V_Z is
    the zener at its current (RZ's current plus Q2's emitter current, minus
    Q5's base current), V_BE2 the Shockley voltage of Q2 at its collector
    current; both are iterated to a fixed point, base currents of Q2 in the
    divider are left out (0.3 %).
    """
    vt = const.k * 300.15 / const.e
    v_out = 5.4
    for _ in range(30):
        v_z = 3.3
        i_q2 = 1e-3
        for _ in range(30):
            i_z = (v_out - v_z) / 1.5e3 + i_q2
            v_z = ZENER["breakdown_voltage"] + vt * math.log(i_z / ZENER["breakdown_current"])
            # the pass base needs I_load / (beta + 1); Q4 mirrors Q5's current, Q2 takes the rest
            i_drive = (v_z - 0.7) / 1.5e3
            i_q2 = max(i_drive - (v_out / R_LOAD) / (PASS["forward_beta"] + 1.0), 1e-6)
        v_be2 = vt * math.log(i_q2 / SMALL["saturation_current"])
        v_out = (v_z + v_be2) * (1.0 + R1 / R2)
    return v_out


def _region(op) -> bool:
    # in regulation: the zener conducts at its knee and the error amplifier is active
    return float(op["v_ref"]) > 3.0 and float(op["v_out"]) > 4.5


def _hand() -> dict[str, Expected]:
    # 1 %: V_BE2 depends on I_Q2 through a logarithm, and the mirror and Early effect
    # shift I_Q2 by tens of percent, i.e. a few mV of 4 V
    return {"v_out": Expected(regulated_output(), 0.01, 0.0,
                              "(V_Z + V_BE) (1 + R1/R2) (Horowitz & Hill, ch. 9)")}


CASE = HardCase(
    name="regulator_startup",
    description="series regulator with reference and drive bootstrapped from its output, 9 V in",
    build=regulator,
    newton_from_zero=NEWTON_FAILS,
    why="the all-off state is a solution without the start-up resistor; with 47 kOhm it has "
        "gone, but Newton stalls in its ghost near 0.4 V of output",
    intended="output in regulation, about 5.4 V",
    predicate=_region,
    hand=_hand,
    reference_guess={"v_src": V_UNREG, "v_in": V_UNREG, "v_b": 6.1, "v_out": 5.4, "v_co": 5.4,
                     "v_fb": 4.0, "v_ref": 3.3, "v_pm": 8.3, "v_e5": 2.6},
    slow=True,
)
