"""Sizing the demo regulator's output network for a damping target (ESR-zero compensation).

The regulator is adlin's demo scenario (`adlin.scenarios.sensor_ldo`: a PMOS
low-dropout regulator, 1.8 V at 20 mA from a Li-ion cell).  Its loop is
compensated by the output capacitor, whose series resistance puts a zero at
1 / (2 pi R_esr C_out) in the loop gain.  The zero adds phase near the
crossover and damps the closed-loop pole pair that the pass-gate pole forms
with the output pole; a larger capacitor lowers the crossover, away from the
gate pole.  Both help, within limits: a larger resistor costs an output step
of I_step * R_esr at a fast load step, and the capacitor is limited by board
space and cost.

The task (demo numbers, invented for this example): at the nominal 20 mA load
every closed-loop pole should have a damping ratio of at least 0.707 (the
maximally flat second-order response, about 4 % overshoot: common practice
as a comfortable margin).  The nominal design (4.7 uF, 50 mOhm) reaches
0.68.  Free parts:

- ``C_out`` from 1 uF to 4.7 uF (the largest ceramic capacitor the invented
  board takes in its footprint);
- ``R_esr`` from 5 mOhm (the capacitor's own series resistance) to 0.3 Ohm
  (a discrete series resistor; 20 mA x 0.3 Ohm = 6 mV of extra output step,
  under the sensor's invented 10 mV budget).

`adlin.size` moves both in log space with exact gradients of the target loss,
then rounds to the E12 series (the usual choice for capacitors and for
resistors in this role) and checks the target again.  The script then checks
the result independently: the loop gain's phase margin (by voltage injection,
`adlin.scenarios.sensor_ldo_loop`) at the nominal and the rounded design, and
the damping at 1 mA, where the loop is slower.

    python examples/ldo_compensation.py
    adlin size examples/ldo_compensation.py --free C_out=1u..4.7u --free R_esr=5m..0.3 \\
        --target "damping>=0.707" --round E12

As a model file (for ``adlin size`` or ``adlin analyze``) the file defines the
regulator circuit through `regulator()`; the sizing runs only when the script
is executed.
"""

import numpy as np

import adlin
from adlin.scenarios import sensor_ldo, sensor_ldo_loop

FREE = {"C_out": (1e-6, 4.7e-6), "R_esr": (5e-3, 0.3)}
TARGETS = [adlin.targets.MinDamping(0.707)]
LIGHT_LOAD_OHM = 1800.0  # 1 mA at 1.8 V


def regulator() -> adlin.Circuit:
    """The demo regulator (nominal load 90 Ohm, 20 mA)."""
    return sensor_ldo()


def smallest_damping(system, params):
    op = adlin.steady_state(system, params=params)
    poles = np.asarray(adlin.linearize(system, op).poles())
    return float(np.min(-poles.real / np.abs(poles)))


def main(starts: int = 3, seed: int = 0) -> adlin.SizingResult:
    system = regulator().build()
    nominal = {k: system.params[k] for k in FREE}
    print(f"nominal: C_out {nominal['C_out'] * 1e6:.2f} uF, R_esr {nominal['R_esr'] * 1e3:.0f} "
          f"mOhm, smallest damping {smallest_damping(system, nominal):.3f}")

    res = adlin.size(system, FREE, TARGETS, starts=starts, seed=seed, round_to="E12")
    print(res)
    for row in res.table():
        print(f"  {row['target']}: {row['achieved_text']} ({'met' if row['met'] else 'not met'}); "
              f"after rounding {row['rounded_achieved_text']} "
              f"({'met' if row['rounded_met'] else 'not met'})")
    print(f"  {res.evaluations} loss-and-gradient evaluations over {starts} starts "
          f"(best start {res.best}: {res.message})")

    sized = dict(zip(res.free_names, np.asarray(res.values).tolist(), strict=True))
    rounded = res.as_dict()
    for label, params in (("nominal", nominal), ("sized", sized), ("rounded (E12)", rounded)):
        loop = sensor_ldo_loop(params=params)
        light = smallest_damping(system, params | {"R_load": LIGHT_LOAD_OHM})
        values = ", ".join(f"{k} {v:.4g}" for k, v in params.items())
        print(f"{label:>14}: {values}: phase margin {loop.phase_margin_deg:.1f} deg at "
              f"{loop.crossover_hz / 1e3:.1f} kHz; smallest damping at 1 mA {light:.3f}")
    return res


if __name__ == "__main__":
    main()
