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
its time per sample is scaled up (the script says so).  The warm adlin call is
repeated and reported as min / median / max, and the load average is printed:
the machine may be shared, and the per-sample loop (thousands of small
dispatches) suffers more from a busy machine than one batched program does.

The warm calls reuse the nominal operating point and solver plans that the
first call solved (`adlin._design.nominal_point`), as the loop reuses the
nominal point it is given; the script measures that cost and also prints the
ratio had every warm call paid it (`nominal_cost.py`).
"""

from __future__ import annotations

import argparse
import os
import statistics
import time

import numpy as np
from nominal_cost import describe, nominal_seconds
from scipy_loop import pole_agreement, run_baseline

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


def run_adlin(system, P, repeat: int):
    """adlin.sweep over the sample rows (zipped, not a product), host arrays back."""
    names = [k for k in VARIED if k in system.param_names]
    cols = [system.param_names.index(k) for k in names]
    grid = {k: P[:, c] for k, c in zip(names, cols, strict=True)}

    def batch():
        res = adlin.sweep(system, grid, product=False)
        return res.poles, res.converged

    t0 = time.perf_counter()
    poles, ok = batch()
    t_first = time.perf_counter() - t0
    t_warm = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        poles, ok = batch()
        t_warm.append(time.perf_counter() - t0)
    return np.asarray(poles), np.asarray(ok), t_first, t_warm


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--samples", type=int, default=10_000)
    ap.add_argument("--baseline-samples", type=int, default=None,
                    help="run the scipy loop on only this many samples and scale its time")
    ap.add_argument("--repeat", type=int, default=5, help="warm adlin calls to time")
    args = ap.parse_args()
    circuit = sensor_ldo()
    system = circuit.build()
    P = samples(system, args.samples)
    varied = ", ".join(k for k in VARIED if k in system.param_names)
    print(f"model: {system.name} ({system.n} unknowns, {len(system.param_names)} params); "
          f"{args.samples} samples varying {varied}; both start each sample from the nominal "
          "operating point")
    print(f"load average before: {' '.join(f'{v:.1f}' for v in os.getloadavg())} "
          f"on {os.cpu_count()} cores")

    poles, ok, t_first, warm = run_adlin(system, P, args.repeat)
    t_warm = statistics.median(warm)
    n = args.samples
    print(f"adlin  jit+vmap : first call {t_first:8.3f} s (includes compilation), "
          f"warm min/median/max {min(warm):.3f}/{t_warm:.3f}/{max(warm):.3f} s "
          f"({t_warm / n * 1e6:.1f} us per sample, median), {ok.sum()}/{len(ok)} converged")

    nb = args.baseline_samples or args.samples
    ref, ref_ok, t_base = run_baseline(system, P[:nb])
    scale = args.samples / nb
    t_base_full = t_base * scale
    note = f" (measured on {nb} samples, scaled x{scale:.1f})" if nb != args.samples else ""
    print(f"scipy loop      : {t_base_full:8.3f} s{note} ({t_base / nb * 1e3:.2f} ms per sample), "
          f"{ref_ok.sum()}/{len(ref_ok)} converged")
    # agreement on the poles where both converged (each pole matched to its nearest)
    err, slow_err, compared = pole_agreement(poles, ok, ref, ref_ok)
    print(f"poles, adlin vs loop, {compared} samples: max relative difference {err:.1e} overall, "
          f"{slow_err:.1e} below 1e8 rad/s (the loop's finite differences and the QZ solve of the "
          "badly scaled pencil limit its accuracy)")
    print(f"speed-up, warm adlin vs scipy loop : {t_base_full / t_warm:8.1f}x median "
          f"({t_base_full / max(warm):.1f}x to {t_base_full / min(warm):.1f}x over the repeats)"
          "   (target >= 300x)")
    print(describe(nominal_seconds(system), t_warm, t_base_full, n))
    print(f"speed-up, adlin incl. compilation  : {t_base_full / t_first:8.1f}x")
    print(f"load average after: {' '.join(f'{v:.1f}' for v in os.getloadavg())}")


if __name__ == "__main__":
    main()
