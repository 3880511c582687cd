"""A self-biased PTAT current cell (the core of a bandgap reference) with start-up.

Two NPN transistors with an emitter-area ratio N = 8 share a base node:
``Q1`` (unit area, diode-connected) and ``Q2`` (area N, with ``R1`` = 5.4 kOhm
in its emitter).  A PMOS mirror ``MP1``/``MP2`` forces equal currents in the
two branches, so the emitter resistor carries the difference of the two
base-emitter voltages and the current is proportional to absolute temperature.
A 1 MOhm bleeder ``RB`` on the base node (it discharges the base node quickly
at power-down) makes the no-current state a genuine, stable steady state, so
the cell needs a start-up: ``RSU`` (2 MOhm) and ``MSU1`` sense the base node;
while the cell is off, ``su`` rises and ``MSU2`` pulls the mirror gate down.
Once the cell runs, ``MSU1`` pulls ``su`` below threshold and the start-up
carries only leakage.

Intended state: about 10 uA in each branch, I = V_T ln(N) / R1.

Why Newton from zero fails to find it: from all-zero voltages Newton converges
to a third steady state in which the start-up device and the half-started
cell balance (measured: about 0.5 uA, base node 0.52 V).  It is an exact
solution of the DC equations but it is unstable (a complex pole pair in the
right half-plane: the start-up loop oscillates around it), so a real cell
never rests there.  A solver must not return it, nor the no-current state the
start-up exists to remove.

Device values, from memory, ordinary for a 3.3 V BiCMOS process: NPN
I_S = 1e-16 A per unit area, beta 100, Early voltage 50 V; PMOS k' W/L =
200 uA/V^2, threshold 0.6 V; start-up NMOS threshold 0.45 V.  Device
capacitances of some hundred fF give the poles.
"""

from __future__ import annotations

import functools
import math

import scipy.constants as const

from ..._circuit import Circuit
from ..._system import System
from ...strategies import Auto
from ._case import NEWTON_OTHER_STATE, Expected, HardCase

V_DD = 3.3  # V
AREA_RATIO = 8.0
R_PTAT = 5.4e3  # Ohm
NPN = dict(saturation_current=1e-16, forward_beta=100.0, early_voltage=50.0,
           base_emitter_capacitance=0.1e-12, base_collector_capacitance=0.05e-12)
PMOS = dict(transconductance_parameter=2e-4, threshold_voltage=0.6, slope_factor=1.3,
            channel_length_modulation=0.02, gate_source_capacitance=0.2e-12,
            gate_drain_capacitance=0.05e-12)
NMOS = dict(transconductance_parameter=4e-4, threshold_voltage=0.45, slope_factor=1.3,
            channel_length_modulation=0.05, gate_source_capacitance=0.1e-12)


@functools.cache
def ptat_cell() -> System:
    """The cell as an `adlin.System` (input ``v_dd``; output ``i_ptat``)."""
    c = Circuit("ptat_cell")
    c.input("v_dd", V_DD, unit="V")
    c.param("R_ptat", R_PTAT, unit="ohm")
    c.voltage_source("VDD", "battery", "gnd", "v_dd")
    c.resistor("RDD", "battery", "vdd", 10.0)
    c.mosfet("MP1", d="a", g="pg", s="vdd", b="vdd", polarity="pmos", **PMOS)
    c.mosfet("MP2", d="pg", g="pg", s="vdd", b="vdd", polarity="pmos", **PMOS)
    c.bjt("Q1", c="a", b="a", e="gnd", **NPN)
    c.bjt("Q2", c="pg", b="a", e="e2", **(NPN | dict(saturation_current=AREA_RATIO * 1e-16)))
    c.resistor("R1", "e2", "gnd", "R_ptat")
    c.resistor("RB", "a", "gnd", 1e6)
    c.resistor("RSU", "vdd", "su", 2e6)
    c.mosfet("MSU1", d="su", g="a", s="gnd", b="gnd", **NMOS)
    c.mosfet("MSU2", d="pg", g="su", s="gnd", b="gnd",
             **(NMOS | dict(transconductance_parameter=2e-5)))
    c.output("i_ptat", lambda v: v["v_e2"] / v["R_ptat"], unit="A")
    return c.build()


def _region(op) -> bool:
    # both NPNs forward active near 0.65 V; start-up switched off (su below threshold)
    return 0.55 < float(op["v_a"]) < 0.75 and float(op["v_su"]) < 0.2


def _hand() -> dict[str, Expected]:
    vt = const.k * 300.15 / const.e
    # Delta-V_BE cell: I R1 = V_T ln(N) (Gray, Hurst, Lewis & Meyer, Analysis and Design
    # of Analog Integrated Circuits, 5th ed., 2009, ch. 4, self-biased references; from
    # memory).  Left out: base currents (1/beta = 1 %), the bleeder's 0.65 uA (7 % of
    # Q1's current, about V_T * 0.07 = 1.8 mV of Delta-V_BE, 3 %), Early effect.
    return {"i_ptat": Expected(vt * math.log(AREA_RATIO) / R_PTAT, 0.04, 0.0,
                               "I = V_T ln(N) / R (Gray et al., 5th ed., ch. 4)")}


CASE = HardCase(
    name="ptat_cell",
    description="self-biased Delta-V_BE current cell (bandgap core) with start-up, 3.3 V",
    build=ptat_cell,
    newton_from_zero=NEWTON_OTHER_STATE,
    why="Newton from zero lands on an unstable state where the start-up and the "
        "half-started cell balance (about 0.5 uA)",
    intended="about 10 uA in each branch, I = V_T ln(8) / 5.4 kOhm, start-up off",
    predicate=_region,
    hand=_hand,
    strategy=Auto(prefer_stable=True),
    reference_guess={"v_battery": V_DD, "v_vdd": V_DD, "v_a": 0.65, "v_pg": 2.35, "v_e2": 0.054,
                     "v_su": 0.02},
    slow=True,
)
