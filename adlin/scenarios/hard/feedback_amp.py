"""A two-stage CMOS amplifier with an open-loop gain of several thousand, in feedback.

A sensor-interface gain stage on +-2.5 V: an n-channel differential pair
``M1``/``M2`` with a 20 uA tail current, a p-channel mirror load ``M3``/``M4``,
a p-channel common-source second stage ``M5`` biased by a 100 uA current sink,
a 2 pF Miller capacitor, closed into a non-inverting gain of
1 + 200k/10k = 21.  The input ``v_sense`` is 50 mV.  Open-loop DC gain: the
first stage g_m1 (r_o2 || r_o4), about 90, times the second stage
g_m5 (r_o5 || (RF + RG)), about 45, so about 4100 by hand (Sedra & Smith,
Microelectronic Circuits, 7th ed., 2015, sec. 13.1, the two-stage CMOS op
amp); the closed-loop gain `adlin.linearize` gives, 20.91, means about 4900
(A = A_cl / (1 - A_cl/21)), the difference being the 1 + lambda V_DS factors
the hand estimate leaves out.

Intended state: the linear one, v_out near 21 x 50 mV = 1.05 V, every device
in saturation.

Why Newton from zero fails: the devices follow the long-channel square law,
which conducts exactly nothing below threshold.  With every node at 0 V and
the supplies at +-2.5 V all five transistors are cut off, the internal
nodes have no conductance, and the Jacobian is singular at the first step
(measured).  This is the usual fate of square-law CMOS circuits started
from zero; conductance stepping or a homotopy has to carry the solver into
the region where the devices conduct.

Device values invented for the demo, typical of a 0.35 um process:
thresholds 0.5 V, k = 400 uA/V^2 (pair), 100 uA/V^2 (mirror), 1 mA/V^2
(M5, ten times M4 for the ten-times current), lambda = 0.05 /V.
"""

from __future__ import annotations

import functools

from ..._circuit import Circuit
from ..._system import System
from ._case import NEWTON_FAILS, Expected, HardCase

V_SENSE = 0.05
RF, RG = 200e3, 10e3
I_TAIL, I_SINK = 20e-6, 100e-6
LAMBDA = 0.05
NMOS_PAIR = dict(threshold_voltage=0.5, transconductance_parameter=400e-6,
                 channel_length_modulation=LAMBDA)
PMOS_LOAD = dict(threshold_voltage=0.5, transconductance_parameter=100e-6,
                 channel_length_modulation=LAMBDA)
PMOS_OUT = dict(threshold_voltage=0.5, transconductance_parameter=1e-3,
                channel_length_modulation=LAMBDA)


@functools.cache
def feedback_amp() -> System:
    """The amplifier as an `adlin.System` (input ``v_sense``, output ``v_output``)."""
    c = Circuit("feedback_amp")
    c.input("v_pos", 2.5, unit="V")
    c.input("v_neg", -2.5, unit="V")
    c.input("v_sense", V_SENSE, unit="V")
    c.voltage_source("VP", "vp", "gnd", "v_pos")
    c.voltage_source("VN", "vn", "gnd", "v_neg")
    c.voltage_source("VS", "inp", "gnd", "v_sense")
    c.current_source("ITAIL", "tail", "vn", I_TAIL)
    c.mosfet("M1", d="m", g="fb", s="tail", b="vn", law="square", **NMOS_PAIR)
    c.mosfet("M2", d="o1", g="inp", s="tail", b="vn", law="square", **NMOS_PAIR)
    c.mosfet("M3", d="m", g="m", s="vp", b="vp", polarity="pmos", law="square", **PMOS_LOAD)
    c.mosfet("M4", d="o1", g="m", s="vp", b="vp", polarity="pmos", law="square", **PMOS_LOAD)
    c.mosfet("M5", d="out", g="o1", s="vp", b="vp", polarity="pmos", law="square", **PMOS_OUT)
    c.current_source("ISINK", "out", "vn", I_SINK)
    c.capacitor("CC", "o1", "out", 2e-12)
    c.resistor("RF", "out", "fb", RF)
    c.resistor("RG", "fb", "gnd", RG)
    c.capacitor("CL", "out", "gnd", 10e-12)
    c.output("v_output", "out")
    return c.build()


def _saturated(v_gs: float, v_ds: float) -> bool:
    # n-channel convention (p-channel voltages negated): on and out of triode
    return v_gs > 0.5 and v_ds > v_gs - 0.5


def _region(op) -> bool:
    v = {k: float(op[f"v_{k}"]) for k in ("vp", "m", "o1", "out", "fb", "inp", "tail")}
    return (_saturated(v["fb"] - v["tail"], v["m"] - v["tail"])          # M1
            and _saturated(v["inp"] - v["tail"], v["o1"] - v["tail"])    # M2
            and _saturated(v["vp"] - v["m"], v["vp"] - v["m"])           # M3
            and _saturated(v["vp"] - v["m"], v["vp"] - v["o1"])          # M4
            and _saturated(v["vp"] - v["o1"], v["vp"] - v["out"]))       # M5


def _hand() -> dict[str, Expected]:
    # Non-inverting amplifier: v_out = v_in (1 + RF/RG) / (1 + (1 + RF/RG)/A)
    # (Sedra & Smith, 7th ed., sec. 2.3).  3 %: the finite loop gain (21/4900,
    # 0.5 %) and the systematic input offset of the simple two-stage design
    # (M3 and M4 see different drain voltages, lambda = 0.05 /V: a few mV at
    # the input, times 21).
    return {"v_out": Expected(V_SENSE * (1.0 + RF / RG), 0.03, 0.0,
                              "v_in (1 + RF/RG) (Sedra & Smith sec. 2.3)")}


def _guess() -> dict[str, float]:
    # square law: V_GS = V_T + sqrt(2 I / k) at each device's current
    v_ov_pair = (2 * I_TAIL / 2 / NMOS_PAIR["transconductance_parameter"]) ** 0.5
    v_ov_load = (2 * I_TAIL / 2 / PMOS_LOAD["transconductance_parameter"]) ** 0.5
    v_ov_out = (2 * I_SINK / PMOS_OUT["transconductance_parameter"]) ** 0.5
    return {"v_vp": 2.5, "v_vn": -2.5, "v_inp": V_SENSE, "v_fb": V_SENSE,
            "v_tail": V_SENSE - 0.5 - v_ov_pair, "v_m": 2.5 - 0.5 - v_ov_load,
            "v_o1": 2.5 - 0.5 - v_ov_out, "v_out": 21 * V_SENSE}


CASE = HardCase(
    name="feedback_amp",
    description="two-stage square-law CMOS amplifier, open-loop gain ~5000, gain 21, +-2.5 V",
    build=feedback_amp,
    newton_from_zero=NEWTON_FAILS,
    why="all five square-law devices are cut off at the all-zero guess, so the internal "
        "nodes have no conductance and the Jacobian is singular",
    intended="the linear state, v_out near 1.05 V, every device in saturation",
    predicate=_region,
    hand=_hand,
    reference_guess=_guess(),
)
