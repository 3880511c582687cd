"""A CMOS current mirror with a 1:50 ratio, fed by a reference current.

A bias generator delivers ``i_ref`` = 20 uA into the diode-connected n-channel
device ``M1`` (W/L giving k = 200 uA/V^2); ``M2``, fifty times wider, copies
it: 1 mA through the 2 kOhm load ``RL`` from the 5 V rail, as in the output
branch of a sensor excitation source.

Intended state: the only one -- M1 and M2 in saturation, I_out near 50 I_ref.

Newton from zero: the devices follow the long-channel square law, which
conducts exactly nothing below threshold.  At the all-zero guess both
transistors are cut off, so the gate node has no conductance at all: the
Jacobian is singular and plain Newton stops at its first step (measured).
Conductance stepping (a conductance from every node to ground, stepped down)
is the classic remedy, and it is what `auto` has to reach for.

Device values invented for the demo, typical of a 0.35 um process: threshold
0.5 V, k = mu C_ox W / L = 200 uA/V^2 for the unit device, lambda = 0.05 /V.
"""

from __future__ import annotations

import functools
import math

from ..._circuit import Circuit
from ..._system import System
from ._case import NEWTON_FAILS, Expected, HardCase

V_RAIL = 5.0
RATIO = 50.0
I_REF = 20e-6
R_LOAD = 2e3
NMOS = dict(threshold_voltage=0.5, transconductance_parameter=200e-6,
            channel_length_modulation=0.05)


@functools.cache
def mirror() -> System:
    """The mirror as an `adlin.System` (inputs ``v_supply``, ``i_ref``; output ``i_out``)."""
    c = Circuit("mirror_1to50")
    c.input("v_supply", V_RAIL, unit="V")
    c.input("i_ref", I_REF, unit="A")
    c.voltage_source("VS", "rail", "gnd", "v_supply")
    c.current_source("IREF", "rail", "gate", "i_ref")
    c.mosfet("M1", d="gate", g="gate", s="gnd", b="gnd", law="square", **NMOS)
    c.mosfet("M2", d="out", g="gate", s="gnd", b="gnd", law="square",
             **(NMOS | dict(transconductance_parameter=RATIO * NMOS["transconductance_parameter"])))
    c.resistor("RL", "rail", "out", R_LOAD)
    c.capacitor("CG", "gate", "gnd", 1e-12)
    c.capacitor("CO", "out", "gnd", 1e-12)
    c.output("i_out", lambda v: (v["v_rail"] - v["v_out"]) / R_LOAD, unit="A")
    return c.build()


def hand_values() -> tuple[float, float]:
    """Gate voltage and output current by hand.

    In saturation I = k/2 (V_GS - V_T)^2 (1 + lambda V_DS); the diode-connected
    M1 has V_DS = V_GS, and M2 copies with the ratio of the two (1 + lambda
    V_DS) factors: I_out = N I_ref (1 + lambda V_DS2) / (1 + lambda V_GS)
    (Sedra & Smith, Microelectronic Circuits, 7th ed., 2015, sec. 8.2, the
    basic MOSFET current source with channel-length modulation).  Both are
    solved by fixed-point iteration (V_DS2 = V_rail - I_out R_L).

    **Returns:** (V_GS, I_out) in volts and amperes.
    """
    k, vt, lam = (NMOS[key] for key in ("transconductance_parameter", "threshold_voltage",
                                         "channel_length_modulation"))
    v_gs = vt + math.sqrt(2.0 * I_REF / k)
    for _ in range(50):
        v_gs = vt + math.sqrt(2.0 * I_REF / (k * (1.0 + lam * v_gs)))
    i_out = RATIO * I_REF
    for _ in range(50):
        i_out = RATIO * I_REF * (1.0 + lam * (V_RAIL - i_out * R_LOAD)) / (1.0 + lam * v_gs)
    return v_gs, i_out


def _region(op) -> bool:
    # both devices conduct, M2 saturated: drain above gate minus threshold
    v_g, v_o = float(op["v_gate"]), float(op["v_out"])
    return v_g > NMOS["threshold_voltage"] and v_o > v_g - NMOS["threshold_voltage"]


def _hand() -> dict[str, Expected]:
    v_gs, i_out = hand_values()
    source = "square-law mirror with channel-length modulation (Sedra & Smith 8.2)"
    return {"v_gate": Expected(v_gs, 1e-9, 0.0, source),
            "i_out": Expected(i_out, 1e-9, 0.0, source)}


def _guess() -> dict[str, float]:
    v_gs, i_out = hand_values()
    return {"v_rail": V_RAIL, "v_gate": v_gs, "v_out": V_RAIL - i_out * R_LOAD}


CASE = HardCase(
    name="mirror_1to50",
    description="square-law CMOS current mirror, ratio 1:50, 20 uA reference, 5 V",
    build=mirror,
    newton_from_zero=NEWTON_FAILS,
    why="square-law devices conduct nothing below threshold, so at the all-zero guess the "
        "gate node has no conductance and the Jacobian is singular",
    intended="I_out near 50 x 20 uA = 1 mA, both devices in saturation",
    predicate=_region,
    hand=_hand,
    reference_guess=_guess(),
)
