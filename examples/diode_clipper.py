"""Diode clipper in front of a converter's input filter: a small nonlinear model file.

A sensor signal ``v_sensor`` (biased at 0.5 V) reaches the node ``clip``
through R_1 = 4.7 kOhm; a signal diode from ``clip`` to ground (saturation
current 4 nA, emission coefficient 1.8, invented values of the order of a
small silicon switching diode) limits how far the node can rise.  A
unity-gain buffer copies ``clip`` onto R_2 = 1 kOhm and C_2 = 10 nF, the
anti-alias filter of a converter input, whose voltage is the output
``v_adc`` (time constant 10 us).

At the 0.5 V bias the diode conducts about 20 uA, so the small-signal
gain from sensor to converter is a divider of R_1 and the diode's
incremental resistance (well below one).  A positive swing turns the diode
further on and is compressed; a negative swing turns it off and the gain
rises towards one: the two polarities leave the linear model at different
amplitudes.  Because the filter sits behind the buffer, the clip node
follows the sensor instantly and the static transfer is the Shockley law
with a series resistor, which has a closed form in the Lambert W function.

    adlin analyze examples/diode_clipper.py
    adlin check examples/diode_clipper.py --tol 1% --plots /tmp/clipper
"""

import adlin


def clipper() -> adlin.Circuit:
    c = adlin.Circuit("diode_clipper")
    c.input("v_sensor", 0.5, unit="V")
    c.param("R_1", 4.7e3, unit="ohm")
    c.voltage_source("VS", "src", "gnd", "v_sensor")
    c.resistor("R1", "src", "clip", "R_1")
    c.diode("D1", "clip", "gnd", saturation_current=4e-9, emission_coefficient=1.8)
    c.vcvs("BUF", "buf", "gnd", "clip", "gnd", 1.0)
    c.resistor("R2", "buf", "adc", 1e3)
    c.capacitor("C2", "adc", "gnd", 10e-9)
    c.output("v_adc", "adc")
    return c
