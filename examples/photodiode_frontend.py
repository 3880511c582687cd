"""Photodiode front-end: a one-transistor transimpedance amplifier.

A photodiode (modelled by its photocurrent, input ``i_photo``, and its 4 pF
junction capacitance) feeds the base of an npn common-emitter stage whose
collector returns to the base through R_F = 100 kOhm in parallel with
C_F = 0.5 pF (shunt-shunt feedback).  The collector sits at about 0.8 V with
roughly 0.25 mA of collector current; the transimpedance is close to
-R_F A / (1 + A) with the stage gain A = g_m R_C, and C_F sets the
bandwidth and keeps the feedback pair of poles damped.

The model is a function returning an `adlin.Circuit`, so the report also
lists the transistor's small-signal parameters (g_m, g_pi, g_o, beta,
c_be, c_bc).

    adlin analyze examples/photodiode_frontend.py
    adlin analyze examples/photodiode_frontend.py --set C_F=0.2p --plots /tmp/tia
"""

import adlin


def frontend() -> adlin.Circuit:
    c = adlin.Circuit("photodiode_frontend")
    c.input("i_photo", 1e-6, unit="A")
    c.input("v_cc", 3.3, unit="V")
    c.param("R_F", 100e3, unit="ohm")
    c.param("C_F", 0.5e-12, unit="F")
    c.voltage_source("VCC", "vcc", "gnd", "v_cc")
    # Photocurrent flows out of ground into the base node (the diode's anode side).
    c.current_source("IPD", "gnd", "base", "i_photo")
    c.capacitor("CPD", "base", "gnd", 4e-12)
    c.resistor("RC", "vcc", "col", 10e3)
    c.resistor("RF", "col", "base", "R_F")
    c.capacitor("CF", "col", "base", "C_F")
    c.bjt(
        "Q1",
        c="col",
        b="base",
        e="gnd",
        polarity="npn",
        saturation_current=2e-16,
        forward_beta=120.0,
        early_voltage=60.0,
        base_emitter_capacitance=3e-12,
        base_collector_capacitance=0.6e-12,
        forward_transit_time=0.2e-9,
    )
    c.output("v_out", "col")
    return c
