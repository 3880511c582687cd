"""An emitter-coupled bipolar Schmitt trigger with its input inside the hysteresis band.

``Q1`` and ``Q2`` share the emitter resistor ``RE``; the collector of ``Q1``
drives the base of ``Q2`` through the divider ``RA``/``RB`` -- the positive
feedback that gives hysteresis.  Supply 5 V; the input ``v_sig`` (1.85 V, through
1 kOhm) lies between the two switching thresholds.

There are three steady states at this input: ``Q2`` on and ``Q1`` off (output
``c2`` low), ``Q1`` on and ``Q2`` off (output high), and an unstable one
between them.  Which stable state the circuit holds depends on where the input
came from; the intended one is the state reached by an input rising from
0 V: ``Q2`` conducting, ``Q1`` off.

Why Newton from zero is ambiguous: it converges (both stable states are
solutions of f(x) = 0); from the all-zero guess it happens to reach the
intended one, but nothing in the equations prefers it -- a start near the
other state converges there.  The corpus test checks that the other state
exists at the same input.

Device values from memory (small-signal NPN): I_S = 1e-15 A, beta 120, Early
voltage 60 V; 5 pF of wiring and device capacitance on each node.
"""

from __future__ import annotations

import functools
import math

import scipy.constants as const

from ..._circuit import Circuit
from ..._system import System
from ._case import NEWTON_CONVERGES, Expected, HardCase

V_CC = 5.0
V_SIG = 1.85
NPN = dict(saturation_current=1e-15, forward_beta=120.0, early_voltage=60.0)
RC1, RC2, RA, RB, RE, RSIG = 2.2e3, 1e3, 10e3, 10e3, 1e3, 1e3


@functools.cache
def schmitt() -> System:
    """The trigger as an `adlin.System` (inputs ``v_supply``, ``v_sig``)."""
    c = Circuit("schmitt")
    c.input("v_supply", V_CC, unit="V")
    c.input("v_sig", V_SIG, unit="V")
    c.voltage_source("VCC", "vcc", "gnd", "v_supply")
    c.voltage_source("VSIG", "gen", "gnd", "v_sig")
    c.resistor("RSIG", "gen", "b1", RSIG)
    c.bjt("Q1", c="c1", b="b1", e="e", **NPN)
    c.bjt("Q2", c="c2", b="b2", e="e", **NPN)
    c.resistor("RC1", "vcc", "c1", RC1)
    c.resistor("RC2", "vcc", "c2", RC2)
    c.resistor("RA", "c1", "b2", RA)
    c.resistor("RB", "b2", "gnd", RB)
    c.resistor("RE", "e", "gnd", RE)
    for node in ("b1", "c1", "b2", "c2", "e"):
        c.capacitor(f"C_{node}", node, "gnd", 5e-12)
    c.output("v_out", "c2")
    return c.build()


def q2_on_state() -> tuple[float, float, float]:
    """Hand calculation of the state with Q2 on and Q1 off.

    Q2 is an emitter-degenerated stage fed by the Thevenin equivalent of
    RC1 + RA and RB: I_E = (V_th - V_BE) / (RE + R_th / (beta + 1)), with
    V_BE = V_T ln(I_C / I_S) iterated to a fixed point (Sedra & Smith,
    Microelectronic Circuits, 7th ed., 2015, ch. 6, DC analysis of BJT
    circuits; from memory).  Q1's base current is zero (it is off) and the
    Early effect is left out (about 3 % of I_C at V_CE = 2 V).

    **Returns:** (v_e, v_c2, v_b2) in volts.
    """
    vt = const.k * 300.15 / const.e
    beta, i_s = NPN["forward_beta"], NPN["saturation_current"]
    v_th = V_CC * RB / (RC1 + RA + RB)
    r_th = (RC1 + RA) * RB / (RC1 + RA + RB)
    v_be = 0.7
    for _ in range(20):
        i_e = (v_th - v_be) / (RE + r_th / (beta + 1.0))
        v_be = vt * math.log(beta / (beta + 1.0) * i_e / i_s)
    v_e = i_e * RE
    return v_e, V_CC - beta / (beta + 1.0) * i_e * RC2, v_e + v_be


def _region(op) -> bool:
    # Q1 off (base-emitter below 0.45 V), Q2 forward active (not saturated)
    v_e = float(op["v_e"])
    return float(op["v_b1"]) - v_e < 0.45 and float(op["v_c2"]) - v_e > 0.3


def _hand() -> dict[str, Expected]:
    v_e, v_c2, _ = q2_on_state()
    src = "Q2-on state by hand (Sedra & Smith, 7th ed., ch. 6)"
    return {"v_e": Expected(v_e, 0.02, 0.0, src), "v_c2": Expected(v_c2, 0.02, 0.0, src)}


def _guess() -> dict[str, float]:
    v_e, v_c2, v_b2 = q2_on_state()
    return {"v_vcc": V_CC, "v_gen": V_SIG, "v_b1": V_SIG, "v_c1": V_CC - RC1 * v_b2 / RB,
            "v_b2": v_b2, "v_c2": v_c2, "v_e": v_e}


def other_state_guess() -> dict[str, float]:
    """A hand-derived point near the other stable state (Q1 on, Q2 off)."""
    v_e = V_SIG - 0.7
    i = v_e / RE
    v_c1 = V_CC - i * RC1
    return {"v_vcc": V_CC, "v_gen": V_SIG, "v_b1": V_SIG, "v_c1": v_c1,
            "v_b2": v_c1 * RB / (RA + RB), "v_c2": V_CC, "v_e": v_e}


CASE = HardCase(
    name="schmitt",
    description="emitter-coupled BJT Schmitt trigger, input inside the hysteresis band, 5 V",
    build=schmitt,
    newton_from_zero=NEWTON_CONVERGES,
    why="two stable states (and an unstable one) at this input: the equations do not say "
        "which one is meant; Newton from zero happens to reach the intended one",
    intended="Q2 on, Q1 off, output low (the state of an input rising from 0 V)",
    predicate=_region,
    hand=_hand,
    reference_guess=_guess(),
    slow=True,
)
