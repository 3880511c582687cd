"""A series stack of sixteen signal diodes across a 40 V supply.

A clamp of the kind used to hold a sense line about 11 V above ground:
``VS`` (40 V) feeds ``R1`` (2.2 kOhm) into a string of sixteen small-signal
silicon diodes ``D0`` ... ``D15`` in series to ground, about 13 mA.

Intended state: the only one -- each diode at about 0.7 V.

Newton from zero: the diodes conduct almost nothing at zero bias, so an
undamped first Newton step spreads nearly the whole 40 V over the string,
about 2.5 V per junction and a computed current near 10^15 A, from which it
must walk back.  The damped Newton here converges from zero (junction-voltage
limiting and the line search take about a dozen iterations), so the case is
kept as a check that the escalation of `auto` costs nothing when it is not
needed.

Diode values from memory, typical of a small-signal switching diode:
I_S = 2.5 nA, emission coefficient 1.75.
"""

from __future__ import annotations

import functools

import mpmath
import scipy.constants as const

from ..._circuit import Circuit
from ..._system import System
from ._case import NEWTON_CONVERGES, Expected, HardCase

V_SUPPLY = 40.0
R_SERIES = 2.2e3
N_DIODES = 16
DIODE = dict(saturation_current=2.5e-9, emission_coefficient=1.75)


@functools.cache
def diode_stack() -> System:
    """The clamp as an `adlin.System` (input ``v_supply``, output ``v_top``)."""
    c = Circuit("diode_stack")
    c.input("v_supply", V_SUPPLY, unit="V")
    c.voltage_source("VS", "sup", "gnd", "v_supply")
    c.resistor("R1", "sup", "d0", R_SERIES)
    for k in range(N_DIODES):
        below = "gnd" if k == N_DIODES - 1 else f"d{k + 1}"
        c.diode(f"D{k}", f"d{k}", below, **DIODE)
    c.capacitor("CTOP", "d0", "gnd", 100e-12)
    c.output("v_top", "d0")
    return c.build()


def stack_voltage() -> float:
    """Voltage across the string, from the Lambert W closed form.

    N identical diodes in series carry one current, so they act as one diode
    with emission coefficient N n; for a diode of saturation current I_S behind
    a resistor R from a source V, I = (n' V_T / R) W((I_S R / (n' V_T))
    exp((V + I_S R) / (n' V_T))) - I_S (Banwell & Jayakumar, "Exact analytical
    solution for current flow through diode with series resistance",
    Electronics Letters 36(4), 2000), evaluated with mpmath at 50 digits.
    """
    mpmath.mp.dps = 50
    vt = mpmath.mpf(const.k) * mpmath.mpf("300.15") / mpmath.mpf(const.e)
    nvt = N_DIODES * mpmath.mpf(DIODE["emission_coefficient"]) * vt
    i_s = mpmath.mpf(DIODE["saturation_current"])
    arg = i_s * R_SERIES / nvt * mpmath.exp((V_SUPPLY + i_s * R_SERIES) / nvt)
    i = nvt / R_SERIES * mpmath.lambertw(arg).real - i_s
    return float(V_SUPPLY - i * R_SERIES)


def _region(op) -> bool:
    # every junction forward biased between 0.5 V and 0.9 V
    v = [float(op[f"v_d{k}"]) for k in range(N_DIODES)] + [0.0]
    return all(0.5 < v[k] - v[k + 1] < 0.9 for k in range(N_DIODES))


def _hand() -> dict[str, Expected]:
    return {"v_top": Expected(stack_voltage(), 1e-9, 0.0,
                              "Lambert W closed form (Banwell & Jayakumar 2000)")}


def _guess() -> dict[str, float]:
    guess = {"v_sup": V_SUPPLY}
    guess.update({f"v_d{k}": 0.7 * (N_DIODES - k) for k in range(N_DIODES)})
    return guess


CASE = HardCase(
    name="diode_stack",
    description="sixteen signal diodes in series across 40 V through 2.2 kOhm",
    build=diode_stack,
    newton_from_zero=NEWTON_CONVERGES,
    why="an undamped first step puts about 2.5 V on every junction; the damped Newton with "
        "junction limiting converges, so auto must not escalate",
    intended="about 13 mA, each diode near 0.7 V (the only state)",
    predicate=_region,
    hand=_hand,
    reference_guess=_guess(),
    slow=True,
)
