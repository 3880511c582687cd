"""A CMOS latch with a weak power-up preset device.

Two cross-coupled inverters hold one bit in nodes ``q`` and ``qb`` on a 1.8 V
supply.  A weak NMOS ``MPRE`` (one twentieth of the latch NMOS) from ``qb`` to
ground, its gate held at the supply by input ``v_preset``, biases the cell so
that it powers up holding ``q`` high; it is too weak to overwrite a stored
zero, so the cell keeps its three steady states: the two stored values and the
metastable point between them (a saddle).

Intended state: ``q`` at the supply, ``qb`` at ground -- the state the cell
reaches when the supply ramps up slowly (the preset tips the symmetric cell
while its gain is still below one), and the stable state on the side the
preset pushes.  The other stored value (``q`` low) is stable too but is not
reached from power-up; the metastable point is unstable.

Why Newton from zero is ambiguous: from q = qb = 0 the iteration treats both
inverters alike and converges to the metastable saddle (measured: about
0.75 V and 0.83 V), a legitimate solution of f(x) = 0 that no real latch rests
in.  Only a check of its poles (a positive real pole) shows it is the wrong
answer.

Device values are ordinary for a 0.18 um-class process, from memory:
k' W/L of 400 uA/V^2 (NMOS) and 200 uA/V^2 (PMOS), thresholds 0.45 V, slope
factor 1.3; 5 fF of wiring and gate load on each storage node; 10 Ohm of
supply resistance.
"""

from __future__ import annotations

import functools

from ..._circuit import Circuit
from ..._system import System
from ...strategies import Auto
from ._case import NEWTON_OTHER_STATE, Expected, HardCase

V_DD = 1.8  # V
NMOS = dict(transconductance_parameter=4e-4, threshold_voltage=0.45, slope_factor=1.3,
            channel_length_modulation=0.1)
PMOS = dict(transconductance_parameter=2e-4, threshold_voltage=0.45, slope_factor=1.3,
            channel_length_modulation=0.1)
PRESET_K = 2e-5  # A/V^2: 1/20 of the latch NMOS


@functools.cache
def preset_latch() -> System:
    """The latch as an `adlin.System` (inputs ``v_dd``, ``v_preset``)."""
    c = Circuit("preset_latch")
    c.input("v_dd", V_DD, unit="V")
    c.input("v_preset", V_DD, unit="V")
    c.voltage_source("VDD", "battery", "gnd", "v_dd")
    c.resistor("RDD", "battery", "vdd", 10.0)
    c.voltage_source("VPRE", "pre", "gnd", "v_preset")
    c.mosfet("MN1", d="q", g="qb", s="gnd", b="gnd", **NMOS)
    c.mosfet("MP1", d="q", g="qb", s="vdd", b="vdd", polarity="pmos", **PMOS)
    c.mosfet("MN2", d="qb", g="q", s="gnd", b="gnd", **NMOS)
    c.mosfet("MP2", d="qb", g="q", s="vdd", b="vdd", polarity="pmos", **PMOS)
    c.mosfet("MPRE", d="qb", g="pre", s="gnd", b="gnd",
             **(NMOS | dict(transconductance_parameter=PRESET_K)))
    c.capacitor("CQ", "q", "gnd", 5e-15)
    c.capacitor("CQB", "qb", "gnd", 5e-15)
    return c.build()


def _region(op) -> bool:
    # q within 10 % of the supply of the rail, qb within 10 % of ground
    return float(op["v_q"]) > 0.9 * V_DD and float(op["v_qb"]) < 0.1 * V_DD


def _hand() -> dict[str, Expected]:
    # A static CMOS inverter with its input at a rail and no DC load drives its
    # output to the other rail; only subthreshold leakage flows, so each storage
    # node sits within a few mV of its rail (Weste & Harris, CMOS VLSI Design,
    # 4th ed., 2011, sec. 2.5, DC transfer characteristics; from memory).
    return {
        "v_q": Expected(V_DD, 0.0, 5e-3, "inverter output at the rail (Weste & Harris 2.5)"),
        "v_qb": Expected(0.0, 0.0, 5e-3, "inverter output at the rail (Weste & Harris 2.5)"),
    }


CASE = HardCase(
    name="preset_latch",
    description="CMOS cross-coupled latch with a weak power-up preset, 1.8 V",
    build=preset_latch,
    newton_from_zero=NEWTON_OTHER_STATE,
    why="symmetric zero start: Newton lands on the metastable saddle between the two "
        "stored values",
    intended="q at the supply, qb at ground (the power-up state the preset selects)",
    predicate=_region,
    hand=_hand,
    strategy=Auto(prefer_stable=True),
    reference_guess={"v_battery": V_DD, "v_vdd": V_DD, "v_pre": V_DD, "v_q": 1.7, "v_qb": 0.1},
)
