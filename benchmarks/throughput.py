"""Throughput: steady state + linearization + poles for many parameter samples.

adlin (`adlin.sweep` over the sample rows: one jit + vmap program run over
chunks, with the planned sparse solves of `adlin._design.fast_path` at this
size) against the per-sample loop an engineer
would otherwise write (`scipy_loop.py`): scipy.optimize.root on the residual, a
central finite-difference Jacobian, and the finite generalized eigenvalues of
(A, E) from scipy.linalg.eigvals.  Both run in this process on the same samples of
the built-in demo circuit; the script prints both times and their ratio, and
checks that the two agree on the poles.  Both start every sample from the
nominal operating point, as in a tolerance study.

    python benchmarks/throughput.py [--samples 10000] [--baseline-samples N] [--repeat 5]

With --baseline-samples N < samples, the loop runs on the first N samples and
its time per sample is scaled up.  The two are timed in turns (`--repeat`
rounds, `scipy_loop.in_turns`): each round one warm adlin call, then the
loop on its share of the N samples, and the ratio is taken per round and
reported as median, min and max.  The machine may be shared and its speed
drifts (the loop alone moved from 3.7 to 5.4 ms per sample between two runs
of the old script, where it ran after all of adlin's calls), so only
measurements taken back to back are compared.  The load average is printed.

The warm calls reuse the nominal operating point and solver plans that the
first call solved (`adlin._design.nominal_point`), as the loop reuses the
nominal point it is given; the script measures that cost and also prints the
ratio had every warm call paid it (`nominal_cost.py`).
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np
from nominal_cost import describe, nominal_seconds
from scipy_loop import in_turns, pole_agreement, report

import adlin
from adlin.scenarios import sensor_ldo

VARIED = {  # parameter -> relative spread (uniform, +-)
    "R_load": 0.2,
    "C_out": 0.2,
    "R_esr": 0.3,
}


def samples(system, n: int, seed: int = 1) -> np.ndarray:
    rng = np.random.default_rng(seed)
    base = system.param_vector()
    P = np.tile(np.asarray(base), (n, 1))
    for name, spread in VARIED.items():
        if name in system.param_names:
            k = system.param_names.index(name)
            P[:, k] *= 1.0 + spread * rng.uniform(-1, 1, n)
    return P


def sweep_call(system, P):
    """adlin.sweep over the sample rows (zipped, not a product), host arrays back."""
    names = [k for k in VARIED if k in system.param_names]
    cols = [system.param_names.index(k) for k in names]
    grid = {k: P[:, c] for k, c in zip(names, cols, strict=True)}

    def batch():
        res = adlin.sweep(system, grid, product=False)
        return np.asarray(res.poles), np.asarray(res.converged)

    return batch


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--samples", type=int, default=10_000)
    ap.add_argument("--baseline-samples", type=int, default=None,
                    help="run the scipy loop on only this many samples and scale its time")
    ap.add_argument("--repeat", type=int, default=5,
                    help="rounds: warm adlin calls, each followed by a share of the loop")
    args = ap.parse_args()
    circuit = sensor_ldo()
    system = circuit.build()
    P = samples(system, args.samples)
    n = args.samples
    varied = ", ".join(k for k in VARIED if k in system.param_names)
    print(f"model: {system.name} ({system.n} unknowns, {len(system.param_names)} params); "
          f"{n} samples varying {varied}; both start each sample from the nominal "
          "operating point")
    print(f"load average before: {' '.join(f'{v:.1f}' for v in os.getloadavg())} "
          f"on {os.cpu_count()} cores")

    batch = sweep_call(system, P)
    t0 = time.perf_counter()
    batch()
    t_first = time.perf_counter() - t0
    nb = min(args.baseline_samples or n, n)
    warm, loop, ref, ref_ok, (poles, ok) = in_turns(batch, system, P[:nb], args.repeat)
    report(n, nb, t_first, warm, loop, f"{ok.sum()}/{len(ok)} converged",
           f"{ref_ok.sum()}/{len(ref_ok)} converged")
    err, slow_err, compared = pole_agreement(poles, ok, ref, ref_ok)
    print(f"poles, adlin vs loop, {compared} samples: max relative difference {err:.1e} overall, "
          f"{slow_err:.1e} below 1e8 rad/s (the loop's finite differences and the QZ solve of the "
          "badly scaled pencil limit its accuracy)")
    print(describe(nominal_seconds(system), warm, loop, n))
    print(f"load average after: {' '.join(f'{v:.1f}' for v in os.getloadavg())}")


if __name__ == "__main__":
    main()
