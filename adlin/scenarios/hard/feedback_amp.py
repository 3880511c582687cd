"""A two-stage bipolar amplifier with an open-loop gain near 10^4, in feedback.

A sensor-interface gain stage on +-12 V: an NPN differential pair ``Q1``/``Q2``
(tail resistor 56 kOhm) with a PNP mirror load ``Q3``/``Q4``, a PNP
common-emitter second stage ``Q5`` with a 6.8 kOhm load and a 30 pF
Miller capacitor, closed into a non-inverting gain of 1 + 200k/10k = 21.  The
input ``v_sense`` is 0.25 V.

Intended state: the linear one, v_out near 21 x 0.25 V = 5.25 V.  Swapping the
two inputs by mistake makes the feedback positive and the only steady states
are the two saturated ones; the corpus keeps the correct polarity.

Why Newton from zero is hard: every device starts off with both supplies
switched in at once, and the open-loop gain near 10^4 makes the Jacobian of
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
    c.resistor("RL2", "out", "vn", 6.8e3)
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
    # Non-inverting amplifier: v_out = v_in (1 + RF/RG) for a large loop gain (Sedra &
    # Smith, Microelectronic Circuits, 7th ed., 2015, sec. 2.3).  3 %: the loop gain of
    # about 500 (0.2 %) and the systematic input offset of the simple two-stage design
    # (Q5's base current unbalances the mirror, a few mV at the input, times 21).
    return {"v_out": Expected(V_SENSE * (1.0 + RF / RG), 0.03, 0.0,
                              "non-inverting gain 1 + RF/RG (Sedra & Smith 2.3)")}


CASE = HardCase(
    name="feedback_amp",
    description="two-stage BJT amplifier, open-loop gain ~10^4, non-inverting gain 21, +-12 V",
    build=feedback_amp,
    newton_from_zero=NEWTON_CONVERGES,
    why="all devices off at the start, both supplies at once, a badly conditioned closed-loop "
        "Jacobian; damped Newton copes, auto must not escalate",
    intended="the linear state, v_out near 5.25 V",
    predicate=_region,
    hand=_hand,
    reference_guess={"v_vp": 12.0, "v_vn": -12.0, "v_inp": V_SENSE, "v_m": 11.35,
                     "v_fb": V_SENSE, "v_tail": V_SENSE - 0.65, "v_o1": 11.2, "v_out": 5.25},
    slow=True,
)
