"""Photodiode transimpedance front-end sized for a flat response at 100 kHz.

An invented optical receiver: a large-area photodiode (junction capacitance
C_D = 100 pF, reverse bias zero) drives the inverting input of an op-amp
whose non-inverting input is grounded; R_F || C_F feeds back from the
output.  The op-amp is a single-pole model: open-loop gain A0 = 100 dB and
gain-bandwidth product GBW = 10 MHz, so A(s) = A0 / (1 + s A0 / (2 pi GBW)).

Unknowns: the inverting-input node v_n and the op-amp output v_out.

    node n:  d/dt [C_D v_n + C_F (v_n - v_out)] + (v_n - v_out)/R_F - i_photo = 0
    op-amp:  d/dt [tau v_out] + v_out + A0 v_n = 0,   tau = A0 / (2 pi GBW)

(the second row is in volts: it is the op-amp's own first-order law, not a
node equation).  The closed-loop transimpedance is then a pure two-pole
low-pass, -R_F w_n^2 / (s^2 + 2 zeta w_n s + w_n^2), with

    w_n^2 = (1 + A0) / (tau R_F (C_D + C_F))
    2 zeta w_n = (tau + R_F (C_D + C_F) + A0 R_F C_F) / (tau R_F (C_D + C_F)).

For A0 -> infinity and C_F << C_D this gives the classic design rules of
photodiode amplifiers (quoted from memory; see Graeme, Photodiode
Amplifiers: Op Amp Solutions, McGraw-Hill 1996, ch. 2):

    f_n = sqrt(GBW / (2 pi R_F C_D))                 (the -3 dB bandwidth when flat)
    C_F = sqrt(C_D / (2 pi R_F GBW))  -> zeta = 1/2  (feedback zero at the loop-gain
                                                      intercept: 45 degrees margin)
    C_F = sqrt(C_D / (pi R_F GBW))    -> zeta = 1/sqrt(2)  (Butterworth, no peaking)

The last line follows from the one before it: to first order zeta grows in
proportion to C_F, so a maximally flat response needs sqrt(2) times the
45-degree value.  The values below keep C_F / C_D near 1.4 %, where the
approximations hold to about 1 %.

Sizing both R_F and C_F for a pole pair at 100 kHz with damping 0.707 puts
the -3 dB bandwidth at 100 kHz with no peaking:

    python examples/photodiode_tia_sizing.py
    adlin size examples/photodiode_tia_sizing.py --free R_F=100k..10M --free C_F=0.1p..20p \\
        --target pair=100k,0.707 --round E24 --plots /tmp/tia
    adlin spread examples/photodiode_tia_sizing.py --set R_F=1.6M --set C_F=1.4p \\
        --tol C_D=10% --tol GBW=20%:normal --target 'damping>=0.7' -n 2000
"""

import math

import jax.numpy as jnp

import adlin

# Our own design point (an invented receiver), SI units.
C_D = 100e-12      # photodiode junction capacitance
GBW = 10e6         # op-amp gain-bandwidth product, Hz
A0 = 1e5           # op-amp open-loop DC gain (100 dB)
TARGET_HZ = 100e3  # wanted -3 dB bandwidth, flat (zeta = 1/sqrt(2))


def _current(x, u, p):
    v_n, v_out = x[0], x[1]
    return jnp.stack([(v_n - v_out) / p["R_F"] - u[0], v_out + p["A0"] * v_n])


def _charge(x, p):
    v_n, v_out = x[0], x[1]
    tau = p["A0"] / (2 * jnp.pi * p["GBW"])
    return jnp.stack([p["C_D"] * v_n + p["C_F"] * (v_n - v_out), tau * v_out])


def transimpedance_amplifier() -> adlin.System:
    """The front-end as a System: input i_photo (A), output v_out (V)."""
    return adlin.System(
        _current, _charge,
        unknowns=("v_n", "v_out"), inputs={"i_photo": 1e-6}, outputs=("v_out",),
        output=lambda x, u, p: x[1:2],
        params={"R_F": 1e6, "C_F": 2e-12, "C_D": C_D, "GBW": GBW, "A0": A0},
        units={"R_F": "ohm", "C_F": "F", "C_D": "F", "GBW": "Hz", "A0": "V/V",
               "i_photo": "A"},
        name="photodiode_tia")


def classic_bandwidth_hz(r_f: float, c_d: float = C_D, gbw: float = GBW) -> float:
    """f_n = sqrt(GBW / (2 pi R_F C_D)): the flat response's -3 dB frequency."""
    return math.sqrt(gbw / (2 * math.pi * r_f * c_d))


def classic_feedback_capacitance(r_f: float, zeta: float = 1 / math.sqrt(2),
                                 c_d: float = C_D, gbw: float = GBW) -> float:
    """C_F = 2 zeta sqrt(C_D / (2 pi R_F GBW)): zeta = 1/2 gives the 45-degree rule,
    zeta = 1/sqrt(2) the Butterworth (flat) response.  Valid for C_F << C_D."""
    return 2 * zeta * math.sqrt(c_d / (2 * math.pi * r_f * gbw))


def classic_feedback_resistance(f_hz: float, c_d: float = C_D, gbw: float = GBW) -> float:
    """R_F = GBW / (2 pi C_D f^2): the R_F whose flat response ends at f_hz."""
    return gbw / (2 * math.pi * c_d * f_hz ** 2)


def size_for_flat_response(system: adlin.System, f_hz: float = TARGET_HZ, **options):
    """Size R_F and C_F for a pole pair at `f_hz` with damping 1/sqrt(2)."""
    return adlin.size(system, free={"R_F": (100e3, 10e6), "C_F": (0.1e-12, 20e-12)},
                      targets=[adlin.targets.PolePair(f_hz, 1 / math.sqrt(2))], **options)


tia = transimpedance_amplifier()

if __name__ == "__main__":
    result = size_for_flat_response(tia, round_to="E24")
    print(result)
    r_f, c_f = (float(v) for v in result.values)
    print(f"sized:   R_F = {r_f:.4g} ohm, C_F = {c_f:.4g} F")
    print(f"classic: R_F = {classic_feedback_resistance(TARGET_HZ):.4g} ohm, "
          f"C_F = {classic_feedback_capacitance(r_f):.4g} F at the sized R_F")
    for row in result.table():
        print(f"  {row['target']}: {row['achieved_text']} (met: {row['met']}); "
              f"E24: {row['rounded_achieved_text']} (met: {row['rounded_met']})")
