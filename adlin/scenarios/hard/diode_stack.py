"""A series stack of eight avalanche diodes blocking a 60 V line, without grading resistors.

An overvoltage clamp on a 60 V sensor line: the line ``line`` is fed from the
supply ``VS`` (60 V) through ``RL`` (10 kOhm), and eight 9.1 V avalanche
(Zener) diodes ``D1`` ... ``D8`` in series, cathodes towards the line, run
from the line to ground, so the clamp conducts only above about
8 x 9.1 V = 73 V.  At 60 V it blocks, and nothing but the diodes' own
leakage sets how the 60 V divides among them: the stack has no grading
(equalizing) resistors.

Diode law: the Shockley diode of `adlin.devices.diode_current` with an
avalanche branch in parallel, I_BV exp(-(v + BV) / V_T) (I_BV the current at
the breakdown voltage BV, 5 mA, the test current at which a Zener voltage is
specified; the exponential form of the reverse breakdown current from memory,
Massobrio & Antognetti, Semiconductor Device Modeling, 2nd ed., 1993, ch. 1).
Reverse current saturates at I_S, the textbook ideal diode (Sze & Ng, Physics
of Semiconductor Devices, 3rd ed., 2007, sec. 2.3, from memory).  The eight
parts differ by a few percent (`SATURATION_CURRENTS`, `BREAKDOWN_VOLTAGES`:
a spread of our own, fixed in the table below; nominal 2.5 nA and 9.1 V).

Intended state (the only one): every diode carries the same reverse current,
so the parts with the least leakage must take the most voltage (the classic
warning about series diodes without grading resistors, e.g. Rashid, Power
Electronics: Circuits, Devices and Applications, 3rd ed., 2004, sec. 2.11,
"series-connected diodes", from memory).  A diode whose I_S is below the
string current can only carry it in avalanche; one whose I_S is above it
sits a few V_T into reverse.  So the string current is the saturation current
of one diode, the "limiting" one, which blocks whatever voltage is left;
the lower-leakage parts sit at their avalanche knees and the higher-leakage
parts near zero (`sharing`).

Newton from zero: at 0 V each junction conducts I_S / (n V_T), about
50 nS, so the first Newton step spreads the 60 V over all eight diodes
(7.2 to 7.9 V each, measured); there the reverse currents have saturated and
the internal nodes are tied to each other only by conductances
I_S exp(-v / (n V_T)) / (n V_T), below 1e-60 S: the Jacobian is nearly
singular, and the second step is of order 1e11 V.  The third iterate is
back with every diode in avalanche near 11 V (one at 89 V), and from there
Newton walks down the avalanche exponentials by about one thermal
voltage per iteration (9.1 V per diode after 80 iterations); when the first
diodes drop out of avalanche into the flat saturated region, the nearly
singular Jacobian throws the iterate out again (node voltages of 1e53 V and
more by iteration 100), and it stops without converging after its 200
iterations (all measured).  Over ten random draws of the same spread (seeds
0-9) it failed on six and needed 106-110 iterations on the other four
(`tests/test_hard_corpus.py`).  With a leakage conductance of 1 pS (1 TOhm,
`leakage_conductance`, zero by default) in every diode, as a generation
current or surface leakage would give, the reverse current is no longer flat
and Newton converges on every draw in 15-25 iterations: the difficulty
belongs to the ideal, saturating law and the missing grading resistors.
"""

from __future__ import annotations

import functools

import mpmath
import scipy.constants as const

from ..._circuit import Circuit
from ..._system import System
from ...devices import diode_charge, diode_current, limited_exp, thermal_voltage
from ._case import NEWTON_FAILS, Expected, HardCase

V_SUPPLY = 60.0
R_LINE = 10e3
N_DIODES = 8
#: Reverse saturation currents of D1 ... D8 (A): 2.5 nA +- 5 %, our own spread.
SATURATION_CURRENTS = (2.58e-9, 2.44e-9, 2.53e-9, 2.47e-9, 2.61e-9, 2.39e-9, 2.50e-9, 2.55e-9)
#: Breakdown voltages of D1 ... D8 (V) at the test current: 9.1 V +- 1 %, our own spread.
BREAKDOWN_VOLTAGES = (9.12, 9.05, 9.18, 9.09, 9.03, 9.15, 9.10, 9.07)
EMISSION = 1.75
BREAKDOWN_CURRENT = 5e-3
TEMPERATURE = 300.15
CAPACITANCE = dict(zero_bias_capacitance=100e-12, built_in_potential=0.75,
                   grading_coefficient=0.4)


def avalanche_diode_current(v, p):
    """Anode-to-cathode current (A) of an avalanche diode at voltage v (V).

    Shockley law plus the reverse breakdown branch I_BV exp(-(v + BV) / V_T)
    and an optional leakage conductance (`leakage_conductance`, S).
    """
    vt = thermal_voltage(TEMPERATURE)
    forward = diode_current(v, saturation_current=p["saturation_current"],
                            emission_coefficient=p["emission_coefficient"],
                            temperature=TEMPERATURE)
    avalanche = p["breakdown_current"] * limited_exp(-(v + p["breakdown_voltage"]) / vt)
    return forward - avalanche + p["leakage_conductance"] * v


def _charge(v, p):
    return diode_charge(v, saturation_current=p["saturation_current"],
                        emission_coefficient=p["emission_coefficient"],
                        temperature=TEMPERATURE, **CAPACITANCE)


def _anode(k: int) -> str:
    return "gnd" if k == N_DIODES else f"a{k}"


def _cathode(k: int) -> str:
    return "line" if k == 1 else f"a{k - 1}"


@functools.cache
def diode_stack() -> System:
    """The clamp as an `adlin.System` (input ``v_supply``, output ``v_stack``).

    Parameters ``D<k>.saturation_current``, ``D<k>.breakdown_voltage``,
    ``D<k>.leakage_conductance`` (and the rest of each diode's law) can be
    overridden per solve without rebuilding.
    """
    c = Circuit("diode_stack")
    c.input("v_supply", V_SUPPLY, unit="V")
    c.voltage_source("VS", "sup", "gnd", "v_supply")
    c.resistor("RL", "sup", "line", R_LINE)
    for k in range(1, N_DIODES + 1):
        params = dict(saturation_current=SATURATION_CURRENTS[k - 1],
                      emission_coefficient=EMISSION,
                      breakdown_voltage=BREAKDOWN_VOLTAGES[k - 1],
                      breakdown_current=BREAKDOWN_CURRENT,
                      leakage_conductance=0.0)
        c.two_terminal(f"D{k}", _anode(k), _cathode(k), current=avalanche_diode_current,
                       charge=_charge, params=params, junction=True)
    c.output("v_stack", "line")
    return c.build()


def sharing() -> tuple[list[float], int, float]:
    """Reverse voltage of each diode (V), which one limits the current, and the current (A).

    The hand calculation of the module docstring, at 30 digits (mpmath).  With
    the diodes sorted by I_S, try each as the limiting one, r: the current is
    I = I_S,r (its reverse current has saturated; what is left out is
    exp(-v_r / (n V_T)), below 1e-40 here); a diode with I_S,k < I is in
    avalanche at v_k = BV_k + V_T ln((I - I_S,k) / I_BV), one with I_S,k > I
    sits at v_k = -n V_T ln(1 - I / I_S,k) (its avalanche branch, below
    exp(-300) of I, left out); the limiting diode takes
    v_r = V - R I - sum of the others.  The limiting diode is the one for which
    v_r lies between 2 V and the knee of its own avalanche branch (BV_r - 1 V),
    so that both neglected terms are negligible.

    **Returns:** (reverse voltages of D1 ... D8, index of the limiting diode
    (0-based), string current).
    """
    mpmath.mp.dps = 30
    vt = mpmath.mpf(const.k) * mpmath.mpf(TEMPERATURE) / mpmath.mpf(const.e)
    i_s = [mpmath.mpf(x) for x in SATURATION_CURRENTS]
    bv = [mpmath.mpf(x) for x in BREAKDOWN_VOLTAGES]
    for r in sorted(range(N_DIODES), key=lambda k: SATURATION_CURRENTS[k]):
        current = i_s[r]
        volts = []
        for k in range(N_DIODES):
            if k == r:
                volts.append(mpmath.mpf(0))
            elif i_s[k] < current:
                volts.append(bv[k] + vt * mpmath.log((current - i_s[k]) / BREAKDOWN_CURRENT))
            else:
                volts.append(-EMISSION * vt * mpmath.log(1 - current / i_s[k]))
        volts[r] = V_SUPPLY - R_LINE * current - sum(volts)
        if 2 < volts[r] < bv[r] - 1:
            return [float(v) for v in volts], r, float(current)
    raise AssertionError("no diode limits the current: the hand rule does not apply")


def node_voltages() -> dict[str, float]:
    """Node voltages of the intended state from `sharing` (anodes summed up from ground)."""
    volts, _, current = sharing()
    out = {"v_sup": V_SUPPLY, "v_line": V_SUPPLY - R_LINE * current}
    below = 0.0
    for k in range(N_DIODES, 1, -1):  # D8 sits on ground; its cathode is a7
        below += volts[k - 1]
        out[f"v_a{k - 1}"] = below
    return out


def _region(op) -> bool:
    # every diode reverse biased; the ones in avalanche (above 8 V) are exactly
    # those with less leakage than the limiting diode
    volts, r, _ = sharing()
    rev = [float(op[f"v_{_cathode(k)}"]) - (0.0 if k == N_DIODES else float(op[f"v_{_anode(k)}"]))
           for k in range(1, N_DIODES + 1)]
    low = {k for k in range(N_DIODES) if SATURATION_CURRENTS[k] < SATURATION_CURRENTS[r]}
    return all(v > 0 for v in rev) and {k for k, v in enumerate(rev) if v > 8.0} == low


def _hand() -> dict[str, Expected]:
    source = "series diodes share one leakage current (hand rule, `sharing`; Rashid sec. 2.11)"
    return {name: Expected(value, 1e-8, 1e-9, source)
            for name, value in node_voltages().items() if name != "v_sup"}


def _guess() -> dict[str, float]:
    guess = node_voltages()
    guess["i_VS"] = -sharing()[2]
    return guess


CASE = HardCase(
    name="diode_stack",
    description="eight 9.1 V avalanche diodes in series blocking a 60 V line, no grading "
                "resistors",
    build=diode_stack,
    newton_from_zero=NEWTON_FAILS,
    why="the reverse currents saturate, so the internal nodes are tied only by conductances "
        "below 1e-60 S or by steep avalanche branches: a nearly singular Jacobian",
    intended="one leakage current; the low-leakage diodes at their avalanche knees, one "
             "limiting diode blocking the rest",
    predicate=_region,
    hand=_hand,
    reference_guess=_guess(),
    slow=True,
)
