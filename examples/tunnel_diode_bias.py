"""Tunnel-diode bias: a negative-resistance stage that can latch or oscillate.

A bias source ``v_bias`` drives a tunnel diode through R_S = 1 kOhm and a
100 uH choke; the diode is shunted by 10 pF.  The diode's current is a
tunnelling hump (peak 1 mA at 0.1 V, a law of the form
I_p (v/V_p) exp(1 - v/V_p)) plus an ordinary junction current, so between
the peak and the valley its incremental resistance is negative.

Following the bias voltage shows both faces of that region:

- where the diode's negative conductance g exceeds 1/R_S, the load line
  cuts the N-shaped curve three times: the branch folds twice (an
  S-curve, hysteresis) and its middle part is a saddle;
- where g exceeds R_S C / L (0.1 mS here) but not 1/R_S, a complex pole pair
  sits in the right half-plane: the bias is a Hopf-unstable point and the
  stage oscillates near 1/(2 pi sqrt(LC)), about 5 MHz.  (The
  characteristic polynomial L C s^2 + (R_S C - L g) s + (1 - R_S g) gives
  both conditions.)

The diode values are invented for the demo (of the order of a small
germanium tunnel diode).

    adlin track examples/tunnel_diode_bias.py --param v_bias --from 0 --to 2.5 --plots /tmp/td
    adlin analyze examples/tunnel_diode_bias.py --set v_bias=0.5
"""

import adlin
from adlin.devices import limited_exp, limited_expm1


def tunnel_current(v, p):
    """Tunnelling hump plus junction diffusion current (A), v in volts."""
    hump = p["I_peak"] * (v / p["V_peak"]) * limited_exp(1.0 - v / p["V_peak"])
    return hump + p["I_s"] * limited_expm1(v / p["V_t"])


def bias() -> adlin.Circuit:
    c = adlin.Circuit("tunnel_diode_bias")
    c.input("v_bias", 0.5, unit="V")
    c.voltage_source("VB", "src", "gnd", "v_bias")
    c.resistor("RS", "src", "mid", 1e3)
    c.inductor("LS", "mid", "td", 100e-6)
    c.capacitor("CT", "td", "gnd", 10e-12)
    c.two_terminal("TD", "td", "gnd", current=tunnel_current,
                   params={"I_peak": 1e-3, "V_peak": 0.1, "I_s": 1e-10, "V_t": 0.0259 * 1.5},
                   units={"I_peak": "A", "V_peak": "V", "I_s": "A", "V_t": "V"})
    c.output("v_diode", "td")
    return c
