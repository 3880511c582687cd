"""A two-stage bipolar amplifier with an open-loop gain near 9000, in feedback.

A sensor-interface gain stage on +-12 V: an NPN differential pair ``Q1``/``Q2``
(tail resistor 56 kOhm) with a PNP mirror load ``Q3``/``Q4``, a PNP
common-emitter second stage ``Q5`` with a 47 kOhm load and a 30 pF
Miller capacitor, closed into a non-inverting gain of 1 + 200k/10k = 21.  The
input ``v_sense`` is 0.25 V.  Open-loop DC gain about 8900 (from the
closed-loop gain 20.95 that `adlin.linearize` gives: A = A_cl / (1 - A_cl/21)),
loop gain about 420.

Intended state: the linear one, v_out near 21 x 0.25 V = 5.25 V, plus the
input bias current of ``Q1`` times RF (0.14 V).  Swapping the
two inputs by mistake makes the feedback positive and the only steady states
are the two saturated ones; the corpus keeps the correct polarity.

Why Newton from zero is hard: every device starts off with both supplies
switched in at once, and the high open-loop gain makes the Jacobian of
the closed loop badly conditioned; the damped Newton converges anyway
(measured), so the case checks that auto returns the linear state without
escalating.

Device values from memory (small-signal NPN and lateral PNP): I_S = 1e-16 A
and 5e-17 A, beta 150 and 60, Early voltage 60 V and 40 V.
"""

from __future__ import annotations

import functools

from ..._circuit import Circuit
from ..._system import System
from ._case import NEWTON_CONVERGES, Expected, HardCase

V_SENSE = 0.25
RF, RG = 200e3, 10e3
NPN = dict(saturation_current=1e-16, forward_beta=150.0, early_voltage=60.0)
PNP = dict(saturation_current=5e-17, forward_beta=60.0, early_voltage=40.0)


@functools.cache
def feedback_amp() -> System:
    """The amplifier as an `adlin.System` (inputs ``v_pos``, ``v_neg``, ``v_sense``)."""
    c = Circuit("feedback_amp")
    c.input("v_pos", 12.0, unit="V")
    c.input("v_neg", -12.0, unit="V")
    c.input("v_sense", V_SENSE, unit="V")
    c.voltage_source("VP", "vp", "gnd", "v_pos")
    c.voltage_source("VN", "vn", "gnd", "v_neg")
    c.voltage_source("VS", "inp", "gnd", "v_sense")
    c.bjt("Q1", c="m", b="fb", e="tail", **NPN)
    c.bjt("Q2", c="o1", b="inp", e="tail", **NPN)
    c.bjt("Q3", c="m", b="m", e="vp", polarity="pnp", **PNP)
    c.bjt("Q4", c="o1", b="m", e="vp", polarity="pnp", **PNP)
    c.resistor("RT", "tail", "vn", 56e3)
    c.bjt("Q5", c="out", b="o1", e="vp", polarity="pnp", **PNP)
    c.resistor("RL2", "out", "vn", 47e3)
    c.capacitor("CC", "o1", "out", 30e-12)
    c.resistor("RF", "out", "fb", RF)
    c.resistor("RG", "fb", "gnd", RG)
    c.capacitor("CL", "out", "gnd", 100e-12)
    c.output("v_output", "out")
    return c.build()


def _region(op) -> bool:
    # linear: output away from both rails, the pair balanced within 50 mV
    return (-10.0 < float(op["v_out"]) < 10.0
            and abs(float(op["v_fb"]) - float(op["v_inp"])) < 0.05)


def _hand() -> dict[str, Expected]:
    # Non-inverting amplifier with input bias current: v_out = v_in (1 + RF/RG) + I_B RF
    # (Sedra & Smith, Microelectronic Circuits, 7th ed., 2015, sec. 2.3 and the section on
    # input bias currents in ch. 2; from memory), I_B = I_tail / (2 beta), I_tail =
    # (v_in - V_BE + 12 V) / RT.  1.5 %: the finite loop gain (1/420 = 0.24 %) and the
    # systematic input offset of the simple two-stage design (Q5's base current unbalances
    # the mirror, under 1 mV at the input, times 21).
    i_tail = (V_SENSE - 0.7 + 12.0) / 56e3
    i_bias = i_tail / (2.0 * NPN["forward_beta"])
    return {"v_out": Expected(V_SENSE * (1.0 + RF / RG) + i_bias * RF, 0.015, 0.0,
                              "v_in (1 + RF/RG) + I_B RF (Sedra & Smith ch. 2)")}


CASE = HardCase(
    name="feedback_amp",
    description="two-stage BJT amplifier, open-loop gain ~9000, non-inverting gain 21, +-12 V",
    build=feedback_amp,
    newton_from_zero=NEWTON_CONVERGES,
    why="all devices off at the start, both supplies at once, a badly conditioned closed-loop "
        "Jacobian; damped Newton copes, auto must not escalate",
    intended="the linear state, v_out near 5.39 V",
    predicate=_region,
    hand=_hand,
    # PNP base-emitter voltages from the Shockley law at 0.1 mA (Q3) and 0.37 mA (Q5)
    reference_guess={"v_vp": 12.0, "v_vn": -12.0, "v_inp": V_SENSE, "v_m": 11.27,
                     "v_fb": V_SENSE, "v_tail": V_SENSE - 0.65, "v_o1": 11.23, "v_out": 5.39},
    slow=True,
)
