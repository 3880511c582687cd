"""A bipolar current mirror with a 1:50 ratio and a beta-helper transistor.

A 100 uA reference set by ``RREF`` from a 12 V rail feeds the diode side
``Q1`` (unit area); ``Q2`` (area 50) copies it, 5 mA into a 1 kOhm load.  With
a ratio this large the base current of the big device would starve the
reference (error (N + 1) / beta, a third of the current at beta = 150), so an
emitter follower ``Q3`` supplies the bases, as is usual for large ratios.

Intended state: the only one -- I_out near 50 I_ref, every device forward
active.

Newton from zero: the base node is shared by a unit device and one 50 times
larger, so every error of the base voltage is magnified fifty-fold in the
output current (a 60 mV error is a factor of ten); the damped Newton with
junction limiting converges anyway (measured), so the case checks that auto
does not escalate where it need not.

Device values from memory (small-signal NPN): I_S = 1e-16 A per unit area,
beta 150, Early voltage 75 V.
"""

from __future__ import annotations

import functools

import scipy.constants as const

from ..._circuit import Circuit
from ..._system import System
from ._case import NEWTON_CONVERGES, Expected, HardCase

V_RAIL = 12.0
RATIO = 50.0
R_REF = 106e3  # Ohm: (12 V - 2 V_BE) / 100 uA
R_LOAD = 1e3
NPN = dict(saturation_current=1e-16, forward_beta=150.0, early_voltage=75.0)


@functools.cache
def mirror() -> System:
    """The mirror as an `adlin.System` (input ``v_rail``, output ``i_out``)."""
    c = Circuit("mirror_1to50")
    c.input("v_supply", V_RAIL, unit="V")
    c.voltage_source("VS", "rail", "gnd", "v_supply")
    c.resistor("RREF", "rail", "ref", R_REF)
    c.bjt("Q1", c="ref", b="base", e="gnd", **NPN)
    c.bjt("Q2", c="out", b="base", e="gnd",
          **(NPN | dict(saturation_current=RATIO * NPN["saturation_current"])))
    c.bjt("Q3", c="rail", b="ref", e="base", **NPN)
    c.resistor("RBB", "base", "gnd", 50e3)  # bleeds the follower so it stays biased
    c.resistor("RL", "rail", "out", R_LOAD)
    c.capacitor("CB", "base", "gnd", 10e-12)
    c.capacitor("CO", "out", "gnd", 10e-12)
    c.output("i_out", lambda v: (v["v_rail"] - v["v_out"]) / R_LOAD, unit="A")
    return c.build()


def hand_currents() -> tuple[float, float]:
    """Reference and output current by hand.

    I_ref = (V - V_BE1 - V_BE3) / R_REF with V_BE from the Shockley law at the
    current; the beta-helper mirror gives I_out = N I_ref / (1 + (N + 1) /
    (beta (beta + 1))) times the Early factor (1 + (V_CE2 - V_CE1) / V_A)
    (Gray, Hurst, Lewis & Meyer, Analysis and Design of Analog Integrated
    Circuits, 5th ed., 2009, sec. 4.2, simple mirror with beta helper; from
    memory).  The bleeder's current (V_BE / 50 kOhm, 14 uA through Q3) adds to
    Q3's base current, a 0.1 % effect left out.

    **Returns:** (I_ref, I_out) in amperes.
    """
    import math

    vt = const.k * 300.15 / const.e
    beta, i_s, va = NPN["forward_beta"], NPN["saturation_current"], NPN["early_voltage"]
    i_ref = 100e-6
    for _ in range(30):
        v_be = vt * math.log(i_ref / i_s)
        i_ref = (V_RAIL - 2.0 * v_be) / R_REF
        i_out = RATIO * i_ref / (1.0 + (RATIO + 1.0) / (beta * (beta + 1.0)))
        v_ce2 = V_RAIL - i_out * R_LOAD
        i_out *= 1.0 + (v_ce2 - v_be) / va
    return i_ref, i_out


def _region(op) -> bool:
    # Q2 forward active: collector above its base; follower on
    return float(op["v_out"]) > float(op["v_base"]) + 0.2 and float(op["v_base"]) > 0.5


def _hand() -> dict[str, Expected]:
    _, i_out = hand_currents()
    # 2 %: the Early normalisation of the device law (1 - v_bc / V_A against
    # 1 + v_ce / V_A, 0.9 % at V_A = 75 V) and beta's own Early dependence
    return {"i_out": Expected(i_out, 0.02, 0.0, "beta-helper mirror (Gray et al. 4.2)")}


def _guess() -> dict[str, float]:
    i_ref, i_out = hand_currents()
    return {"v_rail": V_RAIL, "v_ref": 1.4, "v_base": 0.7, "v_out": V_RAIL - i_out * R_LOAD}


CASE = HardCase(
    name="mirror_1to50",
    description="NPN current mirror, ratio 1:50, beta helper, 12 V",
    build=mirror,
    newton_from_zero=NEWTON_CONVERGES,
    why="a unit device and a 50x device share one base node, so base-voltage errors are "
        "magnified fifty-fold; damped Newton copes, auto must not escalate",
    intended="I_out near 50 x 100 uA = 5 mA, Q2 forward active",
    predicate=_region,
    hand=_hand,
    reference_guess=_guess(),
    slow=True,
)
