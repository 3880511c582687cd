"""Self-heating of an NTC thermistor in series with a load: an ODE model.

A 12 V supply drives a 10 Ohm load through an NTC inrush-current limiter
(10 Ohm at 25 degC, B = 3500 K).  The thermistor body (0.5 J/K) heats from
the power i^2 R_ntc it dissipates and loses heat to its case (20 K/W), which
loses heat to ambient (30 K/W, 2 J/K).  The states are the temperature rises
above ambient, so the default start (zero rise) is physical:

    d(dT_body)/dt = (P - (dT_body - dT_case) / R_bc) / C_body
    d(dT_case)/dt = ((dT_body - dT_case) / R_bc - dT_case / R_ca) / C_case

Heating lowers the resistance, which raises the current: an electrothermal
feedback loop.  It is stable while the thermistor's resistance at the bias
is small enough next to the load; the report's slow pole shows how much the
feedback lengthens the thermal time constant.

    adlin analyze examples/thermistor_ode.py
    adlin analyze examples/thermistor_ode.py --set v_supply=24 --output i_load
"""

import jax.numpy as jnp

import adlin


def _ntc_resistance(t_body, p):
    return p["R25"] * jnp.exp(p["B"] * (1.0 / t_body - 1.0 / 298.15))


def _current(x, u, p):
    t_body = u[1] + x[0]
    return u[0] / (p["R_load"] + _ntc_resistance(t_body, p))


def heating(x, u, p):
    """dx/dt for x = (dT_body, dT_case), u = (v_supply, T_ambient)."""
    t_body = u[1] + x[0]
    i = _current(x, u, p)
    power = i**2 * _ntc_resistance(t_body, p)
    flow_bc = (x[0] - x[1]) / p["R_bc"]
    flow_ca = x[1] / p["R_ca"]
    return jnp.stack([(power - flow_bc) / p["C_body"], (flow_bc - flow_ca) / p["C_case"]])


def readout(x, u, p):
    return jnp.stack([_current(x, u, p), u[1] + x[0]])


thermistor = adlin.System.from_ode(
    heating,
    states=("dT_body", "dT_case"),
    inputs={"v_supply": 12.0, "T_ambient": 298.15},
    outputs=("i_load", "T_body"),
    output=readout,
    params={
        "R_load": 10.0,
        "R25": 10.0,
        "B": 3500.0,
        "C_body": 0.5,
        "R_bc": 20.0,
        "C_case": 2.0,
        "R_ca": 30.0,
    },
    units={
        "dT_body": "K",
        "dT_case": "K",
        "v_supply": "V",
        "T_ambient": "K",
        "i_load": "A",
        "T_body": "K",
        "R_load": "ohm",
        "R25": "ohm",
        "B": "K",
        "C_body": "J/K",
        "R_bc": "K/W",
        "C_case": "J/K",
        "R_ca": "K/W",
    },
    name="thermistor_self_heating",
)
