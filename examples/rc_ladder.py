"""Three-section RC ladder: the smallest useful model file.

A 1.2 V signal source drives three equal RC sections (1 kOhm, 10 nF).  The
model is linear, so the bias point is trivial and the small-signal model is
the circuit itself: three real poles, and no finite zeros.  A classic check:
the poles of an n-section uniform ladder are not n times the single-section
pole 1/(RC); for three sections they sit near 0.198, 1.555 and 3.247 / (RC).

    adlin analyze examples/rc_ladder.py
    adlin analyze examples/rc_ladder.py --set R=4.7k --plots /tmp/ladder
"""

import adlin

ladder = adlin.Circuit("rc_ladder")
ladder.input("v_in", 1.2, unit="V")
ladder.param("R", 1e3, unit="ohm")
ladder.param("C", 10e-9, unit="F")
ladder.voltage_source("VIN", "src", "gnd", "v_in")
ladder.resistor("R1", "src", "n1", "R")
ladder.capacitor("C1", "n1", "gnd", "C")
ladder.resistor("R2", "n1", "n2", "R")
ladder.capacitor("C2", "n2", "gnd", "C")
ladder.resistor("R3", "n2", "out", "R")
ladder.capacitor("C3", "out", "gnd", "C")
ladder.output("v_ladder", "out")
