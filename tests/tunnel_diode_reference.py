"""The tunnel-diode example's values and diode law, restated for independent checks.

Restated here (not imported from the example) so the tests compare adlin's
results with plain-Python arithmetic and scipy root finders.
"""

import math

# the example's values
R_S, L, C = 1e3, 100e-6, 10e-12
I_PEAK, V_PEAK, I_S, V_T = 1e-3, 0.1, 1e-10, 0.0259 * 1.5


def diode_current(v):
    return I_PEAK * (v / V_PEAK) * math.exp(1 - v / V_PEAK) + I_S * math.expm1(v / V_T)


def diode_conductance(v):
    t = v / V_PEAK
    return I_PEAK / V_PEAK * (1 - t) * math.exp(1 - t) + I_S / V_T * math.exp(v / V_T)


def bias_for(v):
    return v + R_S * diode_current(v)
