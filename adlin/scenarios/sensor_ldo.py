"""A MOSFET low-dropout regulator for a battery-powered sensor node.

The demo scenario of adlin, an invented but ordinary design: a single Li-ion
cell (input ``v_bat``, 3.7 V nominal) feeds a 1.8 V rail for a sensor node
that draws about 20 mA.

Nodes: ``cell`` (the ideal cell voltage), ``supply`` (the regulator input,
behind the cell's 0.1 Ohm internal resistance, with a 1 uF input capacitor),
``bandgap`` and ``reference`` (the reference voltage before and after a
10 kOhm / 100 nF noise filter), ``out`` (the rail), ``cap`` (inside the output
capacitor, behind its series resistance), ``fb`` (divider tap), ``gate`` (pass
gate = error-amplifier output), ``mir`` (mirror node), ``tail`` and ``nbias``.
The source resistances are physical, and they also keep the model index 1: an
ideal source driving device capacitances directly would close a loop of
capacitors and voltage sources.

- Pass device MP: a wide PMOS (EKV law) from ``supply`` to ``out``; its gate
  capacitances (5 pF gate-source, 1.5 pF gate-drain) and drain-bulk
  capacitance (10 pF) are included because they set the gate-node pole.
- Error amplifier: an NMOS differential pair M1/M2 with a PMOS current-mirror
  load M3/M4 and an NMOS tail M5, mirrored from M6 and a 30 uA bias current.
  The divider tap ``fb`` drives M1 (the mirror side) and the reference drives
  M2, so a rising output lifts the pass gate: negative feedback.
- Output network: 4.7 uF ceramic capacitor with 50 mOhm series resistance,
  the load ``R_load`` (90 Ohm, 20 mA at 1.8 V) and the divider R1 = 100 kOhm,
  R2 = 200 kOhm, so ``v_out = v_ref (1 + R1/R2) = 1.8 V`` for an ideal loop.

Compensation: the output capacitor sets the dominant pole
(``1/(2 pi R_out C_out)`` with ``R_out ~ R_load || r_ds``, near 400 Hz) and
the error amplifier's output resistance is kept low (short-channel devices,
``lambda = 0.2 /V``) so that the gate pole stays above the loop's crossover.
That trades DC loop gain (about 44 dB) for a phase margin of 65 degrees at
20 mA, and 61 to 84 degrees from 30 mA down to 1 mA over the cell's 3.3 V to
4.2 V range (computed with `sensor_ldo_loop`), without a compensation
capacitor (Rincon-Mora, Analog IC Design with Low-Dropout Regulators,
McGraw-Hill 2009, ch. on frequency compensation; from memory).

Accuracy: the amplifier is balanced (``v_gate`` equal to the mirror voltage
``v_mir``) near 25 mA.  At other loads the pass gate must sit elsewhere, an
error in the forward path of ``g_m,P R_out (v_gate - v_mir)`` at the output,
and the loop divides it by ``1 + T`` (Sedra & Smith, Microelectronic
Circuits, 7th ed., 2015, ch. 11, on how feedback reduces errors arising in
the forward path; from memory).  `predicted_error` evaluates that estimate;
it matches the solved output within about 2 % from 1 mA to 30 mA.

The loop is closed through a 0 V source ``VINJ`` from ``fb`` to ``sense``
(the gate of M1): it changes nothing at DC, and `sensor_ldo_loop` uses it as
the series voltage-injection point of the loop-gain measurement
(Middlebrook, "Measurement of loop gain in feedback systems", Int. J.
Electronics 38(4), 1975): with a small-signal source v_z in series,
``T = -v_fb / v_sense``.  The injection point is exact here up to the
gate capacitance of M1 (25 fF against the divider's 67 kOhm, a pole near
100 MHz, far above the crossover).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._circuit import Circuit
from .._system import System

NAME = "sensor_ldo"
V_REF = 1.2  # V, reference (input v_ref)
V_BAT = 3.7  # V, nominal Li-ion cell voltage (input v_bat)
R1 = 100e3  # Ohm, divider top (out to fb)
R2 = 200e3  # Ohm, divider bottom (fb to ground)

# Device parameters (EKV law, adlin.devices.ekv_currents / mosfet_charges).
PASS_DEVICE = dict(
    transconductance_parameter=0.2,  # A/V^2: W/L in the thousands, ~20 mA at 1.1 V of drive
    threshold_voltage=0.6,
    slope_factor=1.3,
    channel_length_modulation=0.05,
    gate_source_capacitance=5e-12,
    gate_drain_capacitance=1.5e-12,
    drain_bulk_capacitance=10e-12,
)
AMP_NMOS = dict(  # the input pair: wide, so that the tail keeps its headroom
    transconductance_parameter=1e-3,
    threshold_voltage=0.5,
    slope_factor=1.3,
    channel_length_modulation=0.2,
    gate_source_capacitance=100e-15,
    gate_drain_capacitance=20e-15,
)
AMP_PMOS = dict(
    transconductance_parameter=1e-4,
    threshold_voltage=0.6,
    slope_factor=1.3,
    channel_length_modulation=0.2,
    gate_source_capacitance=50e-15,
    gate_drain_capacitance=10e-15,
)
TAIL_NMOS = dict(
    transconductance_parameter=1e-3,
    threshold_voltage=0.5,
    slope_factor=1.3,
    channel_length_modulation=0.2,
)


def sensor_ldo() -> Circuit:
    """The sensor-node LDO as an `adlin.Circuit` (build it with ``.build()``).

    **Returns:** a `Circuit` with inputs ``v_bat`` (3.7 V) and ``v_ref``
    (1.2 V), parameters ``R_load``, ``C_out``, ``R_esr``, ``I_bias``,
    ``R_cell``, the element values (``R1``, ``R2``, ``CIN``, ...) and the
    device parameters ``"<device>.<keyword>"``, and output ``v_out``.
    """
    c = Circuit(NAME)
    c.input("v_bat", V_BAT, unit="V")
    c.input("v_ref", V_REF, unit="V")
    c.param("R_load", 90.0, unit="ohm")
    c.param("C_out", 4.7e-6, unit="F")
    c.param("R_esr", 0.05, unit="ohm")
    c.param("I_bias", 30e-6, unit="A")
    c.param("R_cell", 0.1, unit="ohm")

    # The cell with its internal resistance and the regulator's input capacitor.
    c.voltage_source("VBAT", "cell", "gnd", "v_bat")
    c.resistor("RCELL", "cell", "supply", "R_cell")
    c.capacitor("CIN", "supply", "gnd", 1e-6)
    # The reference through its noise filter.
    c.voltage_source("VREF", "bandgap", "gnd", "v_ref")
    c.resistor("RREF", "bandgap", "reference", 10e3)
    c.capacitor("CREF", "reference", "gnd", 100e-9)

    # Pass device and output network.
    c.mosfet("MP", d="out", g="gate", s="supply", b="supply", polarity="pmos", **PASS_DEVICE)
    c.resistor("RESR", "out", "cap", "R_esr")
    c.capacitor("COUT", "cap", "gnd", "C_out")
    c.resistor("RLOAD", "out", "gnd", "R_load")
    c.resistor("R1", "out", "fb", R1)
    c.resistor("R2", "fb", "gnd", R2)

    # Error amplifier: tail current mirror, NMOS pair, PMOS mirror load.
    c.current_source("IBIAS", "supply", "nbias", "I_bias")
    c.mosfet("M6", d="nbias", g="nbias", s="gnd", b="gnd", **TAIL_NMOS)
    c.mosfet("M5", d="tail", g="nbias", s="gnd", b="gnd", **TAIL_NMOS)
    # 0 V loop-injection source between the divider tap and the amplifier input.
    c.voltage_source("VINJ", "sense", "fb", 0.0)
    c.mosfet("M1", d="mir", g="sense", s="tail", b="gnd", **AMP_NMOS)
    c.mosfet("M2", d="gate", g="reference", s="tail", b="gnd", **AMP_NMOS)
    c.mosfet("M3", d="mir", g="mir", s="supply", b="supply", polarity="pmos", **AMP_PMOS)
    c.mosfet("M4", d="gate", g="mir", s="supply", b="supply", polarity="pmos", **AMP_PMOS)

    c.output("v_out", "out")
    return c


def sensor_ldo_system() -> System:
    """The closed-loop regulator as an `adlin.System`."""
    return sensor_ldo().build()


def ideal_output(
    params: dict[str, float] | None = None, inputs: dict[str, float] | None = None
) -> float:
    """``v_ref (1 + R1/R2)``: the output of the regulator with infinite loop gain.

    **Arguments:** `params`, `inputs`: values of ``R1``, ``R2`` and ``v_ref``
    (others are ignored); the defaults of `sensor_ldo` otherwise.
    """
    p = {"R1": R1, "R2": R2} | dict(params or {})
    u = {"v_ref": V_REF} | dict(inputs or {})
    return float(u["v_ref"]) * (1.0 + float(p["R1"]) / float(p["R2"]))


@dataclass(frozen=True)
class LoopGain:
    """The regulator's loop gain T(j 2 pi f), by injection at the gate of M1.

    - `dc`: T(0), positive for negative feedback (dimensionless).
    - `crossover_hz`: frequency where |T| = 1 (nan if |T| never reaches 1).
    - `phase_margin_deg`: 180 degrees plus the phase of T at the crossover.
    - `f_hz`, `response`: the frequency grid and T on it.
    """

    dc: float
    crossover_hz: float
    phase_margin_deg: float
    f_hz: np.ndarray
    response: np.ndarray

    @property
    def dc_db(self) -> float:
        return 20.0 * math.log10(abs(self.dc))


def sensor_ldo_loop(
    inputs: dict[str, Any] | None = None,
    params: dict[str, Any] | None = None,
    f_hz: np.ndarray | None = None,
    *,
    op: Any = None,
    model: Any = None,
) -> LoopGain:
    """Loop gain, crossover and phase margin of the regulator at its bias point.

    Series voltage injection at ``VINJ``: a small-signal voltage v_z in the
    source gives ``v_sense = v_fb + v_z`` and the loop gain
    ``T = -v_fb / v_sense``, both read from the exact descriptor model
    ``(s E - A) x = b_z``.  The source's branch equation is
    ``v_sense - v_fb - V = 0`` (modified nodal analysis), so b_z = -df/dV
    is the unit vector of the row of ``i_VINJ``.

    **Arguments:**

    - `inputs`, `params`: overrides (ignored when `op` is given).
    - `f_hz`: frequency grid in Hz (default 1 Hz to 1 GHz, 50 points a decade).
    - `op`: the `OperatingPoint` of `sensor_ldo_system()`, if already solved.
    - `model`: the `LinearModel` at `op`, if already computed.

    **Returns:** a `LoopGain`.
    """
    from .._linear.linearize import linearize
    from .._steady.solve import steady_state

    system = None
    if op is None or model is None:
        system = sensor_ldo_system()
    if op is None:
        op = steady_state(system, inputs=inputs, params=params)
    if model is None:
        model = linearize(system, op)
    names = model.state_names
    E, A = np.asarray(model.E), np.asarray(model.A)
    b = np.zeros(len(names))
    b[names.index("i_VINJ")] = 1.0
    k_fb, k_sense = names.index("v_fb"), names.index("v_sense")

    def loop(s_values):
        out = []
        for s in s_values:
            x = np.linalg.solve(s * E - A, b.astype(complex))
            out.append(-x[k_fb] / x[k_sense])
        return np.asarray(out)

    if f_hz is None:
        f_hz = np.logspace(0, 9, 451)
    f_hz = np.asarray(f_hz, dtype=float)
    t = loop(2j * np.pi * f_hz)
    dc = float(loop([0.0])[0].real)
    mag = np.abs(t)
    below = np.nonzero(mag < 1.0)[0]
    if below.size == 0 or below[0] == 0:
        return LoopGain(dc, math.nan, math.nan, f_hz, t)
    k = int(below[0])
    # interpolate the crossover on log |T| versus log f, then evaluate T there exactly
    lf = np.log10(f_hz[k - 1 : k + 1])
    lm = np.log10(mag[k - 1 : k + 1])
    fc = float(10 ** (lf[0] - lm[0] * (lf[1] - lf[0]) / (lm[1] - lm[0])))
    tc = complex(loop([2j * np.pi * fc])[0])
    phase = np.unwrap(np.angle(t))
    angle = math.atan2(tc.imag, tc.real)
    angle += 2 * math.pi * round((phase[k - 1] - angle) / (2 * math.pi))  # same branch as the grid
    pm = 180.0 + math.degrees(angle)
    return LoopGain(dc, fc, pm, f_hz, t)


def predicted_error(op: Any, devices: Any, loop: LoopGain) -> float:
    """First-order DC output error ``v_out - v_ref (1 + R1/R2)`` of the regulator.

    The amplifier's output must sit ``v_gate - v_mir`` away from its balanced
    value to drive the pass device; through the pass stage (gain
    ``-g_m,P R_out``, ``R_out = R_load || 1/g_ds,P || (R1 + R2)``) that is an
    output error, which the loop divides by ``1 + T``.

    **Arguments:**

    - `op`: the `OperatingPoint` of `sensor_ldo_system()`.
    - `devices`: ``sensor_ldo().small_signal(op)`` (for ``MP``'s g_m and g_ds).
    - `loop`: `sensor_ldo_loop` at the same bias.

    **Returns:** the predicted error in volts.
    """
    p = {k: float(v) for k, v in op.params.items()}
    g_out = 1.0 / p["R_load"] + float(devices["MP"]["g_ds"]) + 1.0 / (p["R1"] + p["R2"])
    pass_gain = float(devices["MP"]["g_m"]) / g_out
    offset = float(op["v_gate"]) - float(op["v_mir"])
    return pass_gain * offset / (1.0 + loop.dc)
