"""Monte Carlo throughput: `adlin.monte_carlo` against the per-sample scipy loop.

The demo regulator (`adlin.scenarios.sensor_ldo`, 15 unknowns) with
tolerances on several parts; adlin draws the samples, and the scipy loop of
`scipy_loop.py` (root finding from the nominal operating point,
finite-difference Jacobians, generalized eigenvalues) runs on the very same
parameter vectors in the same process.  Printed: samples per second for both,
adlin's first call (compilation included) and warm calls (min/median/max),
their ratio against the 300x target per round (`--repeat` rounds, each one
warm adlin call and then the loop on its share of the samples: the machine is
shared and its speed drifts, so only measurements taken back to back are
compared; `scipy_loop.in_turns`), the load average before and after, and the
agreement of the poles.

The warm calls reuse the nominal operating point and solver plans that the
first call solved (`adlin._design.nominal_point`), as the loop reuses the
nominal point it is given; the script measures that cost and also prints the
ratio had every warm call paid it (`nominal_cost.py`).

    python benchmarks/monte_carlo_throughput.py [-n 10000] [--baseline-samples 1000] [--repeat 5]

With --baseline-samples N < n the loop runs on the first N samples and its
time per sample is scaled to n (the script says so); --baseline-samples 0
runs it on all of them.
"""

from __future__ import annotations

import argparse
import os
import time

import jax
import numpy as np
from nominal_cost import describe, nominal_seconds
from scipy_loop import in_turns, pole_agreement, report

import adlin
from adlin.scenarios import sensor_ldo
from adlin.tolerances import Normal, Uniform

TOLERANCES = {  # our own choice of part tolerances for the demo
    "R_load": Uniform(rel=0.2),  # the load current spread
    "C_out": Normal(rel=0.1),  # ceramic capacitor, one standard deviation
    "R_esr": Uniform(rel=0.3),
    "R1": Uniform(rel=0.01),  # feedback divider, 1 % parts
    "R2": Uniform(rel=0.01),
    "I_bias": Normal(rel=0.05),
}


def _load() -> str:
    return " ".join(f"{v:.1f}" for v in os.getloadavg())


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("-n", "--samples", type=int, default=10_000)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--repeat", type=int, default=5,
                    help="rounds: warm adlin calls, each followed by a share of the loop")
    ap.add_argument("--baseline-samples", type=int, default=1000,
                    help="run the scipy loop on this many samples and scale (0: all)")
    args = ap.parse_args()
    system = sensor_ldo().build()
    n = args.samples
    print(f"model: {system.name} ({system.n} unknowns); {n} samples, tolerances: "
          + ", ".join(f"{k} {t.describe()}" for k, t in TOLERANCES.items()))
    print(f"devices: {len(jax.devices())} ({jax.devices()[0].platform}); load average before: "
          f"{_load()} on {os.cpu_count()} cores")

    def run():
        return adlin.monte_carlo(system, TOLERANCES, n=n, seed=args.seed)

    t0 = time.perf_counter()
    r = run()
    t_first = time.perf_counter() - t0
    # the loop on the same parameter vectors adlin sampled (same seed every call)
    P = np.tile(np.asarray(system.param_vector()), (n, 1))
    for j, name in enumerate(r.varied_names):
        P[:, system.param_names.index(name)] = np.asarray(r.varied)[:, j]
    nb = n if args.baseline_samples <= 0 else min(args.baseline_samples, n)
    warm, loop, ref, ref_ok, r = in_turns(run, system, P[:nb], args.repeat)
    ok = np.asarray(r.converged)
    report(n, nb, t_first, warm, loop, f"chunk {r.chunk}, {ok.sum()}/{n} converged",
           f"{ref_ok.sum()}/{nb} converged")
    err, slow_err, compared = pole_agreement(np.asarray(r.poles), ok, ref, ref_ok)
    print(f"poles, adlin vs loop, {compared} samples: max relative difference {err:.1e} overall, "
          f"{slow_err:.1e} below 1e8 rad/s (the loop's finite differences and the QZ solve of "
          "the badly scaled pencil limit its accuracy)")
    print(describe(nominal_seconds(system), warm, loop, n))
    print(f"load average after: {_load()}")


if __name__ == "__main__":
    main()
