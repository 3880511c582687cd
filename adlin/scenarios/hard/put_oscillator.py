"""A relaxation oscillator around a two-transistor negative-resistance switch.

A pulse generator of the kind that fires a triac or flashes an indicator:
the timing capacitor ``CT`` (100 nF) charges from the 12 V rail through
``RT`` (100 kOhm).  A complementary pair -- PNP ``Q1`` (emitter at the
capacitor, the anode ``a``) and NPN ``Q2``, each driving the other's base,
the two-transistor equivalent of a four-layer switch, used as a programmable
unijunction -- has its gate ``g`` held at 3.75 V by ``R1`` (22 kOhm) and
``R2`` (10 kOhm); ``RBE`` (10 kOhm) keeps Q2 off on leakage, and ``RK``
(47 Ohm) is the output (pulse) resistor.  When the anode climbs one
base-emitter drop above the gate the pair regenerates, dumps the capacitor
into ``RK`` and switches off again below its valley current.

Seen from the anode the pair is a current-controlled (S-shaped) negative
resistance.  Measured with this model (the anode driven by a current source
stepped by 0.5 uA, each point solved by Newton from the last): a peak of
4.33 V at 44.5 uA and a valley of 0.705 V at 137 uA.  The design rule of a
unijunction relaxation oscillator, I_P < (V - V_P) / R_T and
(V - V_V) / R_T < I_V (e.g. Millman & Halkias, Integrated Electronics, 1972,
section on the unijunction transistor, from memory), asks for RT between
82 and 172 kOhm; with 100 kOhm the load line passes above the peak (77 uA at
4.33 V) and below the valley (113 uA at 0.705 V) and crosses the
characteristic once, on its falling part, where the differential resistance
is about -100 Ohm.  That single steady state is unstable -- the capacitor's
pole is real and in the right half-plane -- so the circuit relaxes between
the peak and the valley instead of resting.

Intended state: that unstable bias point (the oscillator's operating point,
the centre of its relaxation cycle): both transistors conducting and
saturated, the anode about one junction drop above ground, about 113 uA
through RT.

Newton from zero: junction limiting lets the anode rise about 0.1 V per
iteration; the iterates climb past the peak to about 6 V at the anode, with
the gate pulled up to 5.5 V and Q2 at the edge of conduction, and creep there
without converging (measured: v_a 6.1 V after 40 iterations, 6.4 V after
160, no convergence in 200).  Measured at RT = 60, 75, 90, ..., 135 kOhm,
plain Newton from zero failed every time; at 150 kOhm, where the load line
meets the characteristic three times near the peak, it converged to the
crossing near 4.3 V.  Conductance stepping and source stepping fail too
(step size underflow); the Newton homotopy finds the state (measured,
`benchmarks/steady_state_strategies.py`).

Device values from memory, typical small-signal transistors: I_S = 1e-14 A,
beta 150 (NPN) and 100 (PNP), reverse beta 2.
"""

from __future__ import annotations

import functools

import numpy as np

from ..._circuit import Circuit
from ..._system import System
from ._case import NEWTON_FAILS, Expected, HardCase

V_RAIL = 12.0
R_T, C_T = 100e3, 100e-9
R1, R2, R_BE, R_K = 22e3, 10e3, 10e3, 47.0
NPN = dict(saturation_current=1e-14, forward_beta=150.0, reverse_beta=2.0)
PNP = dict(saturation_current=1e-14, forward_beta=100.0, reverse_beta=2.0)
#: Hand assumptions (common practice): a conducting junction drops about 0.7 V,
#: a saturated transistor about 0.1 V collector to emitter.
V_JUNCTION, V_SATURATION = 0.7, 0.1


def _switch(c: Circuit) -> None:
    """The complementary pair with its gate divider and resistors (anode node ``a``)."""
    c.resistor("R1", "vcc", "g", R1)
    c.resistor("R2", "g", "gnd", R2)
    c.bjt("Q1", c="n", b="g", e="a", polarity="pnp", **PNP)
    c.bjt("Q2", c="g", b="n", e="k", polarity="npn", **NPN)
    c.resistor("RBE", "n", "k", R_BE)
    c.resistor("RK", "k", "gnd", R_K)


@functools.cache
def put_oscillator() -> System:
    """The oscillator as an `adlin.System` (input ``v_supply``, output ``v_pulse``)."""
    c = Circuit("put_oscillator")
    c.input("v_supply", V_RAIL, unit="V")
    c.voltage_source("VS", "vcc", "gnd", "v_supply")
    c.resistor("RT", "vcc", "a", R_T)
    c.capacitor("CT", "a", "gnd", C_T)
    _switch(c)
    c.output("v_pulse", "k")
    return c.build()


@functools.cache
def anode_drive() -> System:
    """The switch alone with its anode fed by a current source (input ``i_anode``).

    A current-controlled characteristic is single-valued in the current, so
    stepping ``i_anode`` and solving each point from the last traces the whole
    S-curve, peak and valley included (how the values in the module docstring
    were measured).
    """
    c = Circuit("put_anode_drive")
    c.input("v_supply", V_RAIL, unit="V")
    c.input("i_anode", 1e-6, unit="A")
    c.voltage_source("VS", "vcc", "gnd", "v_supply")
    c.current_source("IA", "gnd", "a", "i_anode")
    _switch(c)
    return c.build()


def hand_state() -> dict[str, float]:
    """The bias point by hand, from the two assumptions above.

    The discharge path from the anode to ground runs through one conducting
    junction (Q2's base-emitter, Q1 saturated), so v_a ~ 0.7 V and the anode
    current is I_A = (V - v_a) / R_T.  Q2 is saturated, so the gate sits at
    v_g ~ v_k + 0.1 V; by KCL the emitter resistor carries the anode current
    and the divider current that Q2 sinks, v_k = R_K (I_A + (V - v_g) / R1
    - v_g / R2), solved together with v_g (linear).  Nodal analysis with the
    usual large-signal junction drops (Sedra & Smith, Microelectronic
    Circuits, 7th ed., 2015, ch. 6, from memory).

    **Returns:** {"v_a", "v_g", "v_k", "i_anode"} in volts and amperes.
    """
    i_a = (V_RAIL - V_JUNCTION) / R_T
    # v_k = R_K (i_a + (V - v_k - Vs) / R1 - (v_k + Vs) / R2)
    v_k = R_K * (i_a + (V_RAIL - V_SATURATION) / R1 - V_SATURATION / R2) / (
        1.0 + R_K / R1 + R_K / R2)
    return {"v_a": V_JUNCTION, "v_g": v_k + V_SATURATION, "v_k": v_k, "i_anode": i_a}


def _region(op) -> bool:
    # both transistors conducting (forward junctions above 0.5 V) and the capacitor's
    # pole in the right half-plane: the falling part of the characteristic
    from ..._linear.linearize import linearize

    v = {k: float(op[f"v_{k}"]) for k in ("a", "g", "n", "k")}
    if not (v["a"] - v["g"] > 0.5 and v["n"] - v["k"] > 0.5):
        return False
    poles = np.asarray(linearize(put_oscillator(), op).poles())
    return bool(poles.size) and float(np.max(poles.real)) > 0.0


def _hand() -> dict[str, Expected]:
    h = hand_state()
    src = "hand nodal analysis with 0.7 V junction and 0.1 V saturation drops"
    # the drops are good to a few tens of millivolts, the currents to a few percent
    return {"v_a": Expected(h["v_a"], 0.0, 0.05, src),
            "v_k": Expected(h["v_k"], 0.03, 0.0, src)}


def _guess() -> dict[str, float]:
    h = hand_state()
    return {"v_vcc": V_RAIL, "v_a": h["v_a"], "v_g": h["v_g"], "v_k": h["v_k"],
            "v_n": h["v_k"] + V_JUNCTION - 0.05}


CASE = HardCase(
    name="put_oscillator",
    description="relaxation oscillator: complementary-pair switch, 100 nF charged through "
                "100 kOhm from 12 V",
    build=put_oscillator,
    newton_from_zero=NEWTON_FAILS,
    why="S-shaped (current-controlled) negative resistance: from zero the junction-limited "
        "iterates climb past the peak (anode near 6 V) and stall there without converging",
    intended="the single, unstable bias on the falling part (both transistors on, anode "
             "about 0.7 V, about 113 uA)",
    predicate=_region,
    hand=_hand,
    reference_guess=_guess(),
    slow=True,
)
