"""Sizing benchmark: evaluations and wall time to meet the demo regulator's targets.

The problem is that of `examples/ldo_compensation.py`: the demo regulator
(15 unknowns, 71 parameters), free ``C_out`` in [1 uF, 4.7 uF] and ``R_esr``
in [5 mOhm, 0.3 Ohm], every pole damped at least 0.707 at the nominal load.

Measured in one process:

- cold: the first `adlin.size` call (tracing and XLA compilation of the
  steady-state solve, the linearization, the loss-and-gradient program and
  the target check, then the search);
- warm: the same call again (`--repeat` times), compiled programs reused;
  compile time is cold minus the median warm time;
- per start: iterations and wall time until the loss first reached zero
  (targets met), from the progress callback;
- per evaluation: the compiled Newton solve and the loss-and-gradient program
  timed on their own;
- baseline, same run, same starts and stopping rules: L-BFGS-B with
  two-point finite-difference gradients of the same loss (value-only
  program), counting its loss evaluations.

The load average is printed before and after: the machine is shared, so
compare figures from one run only.

    python benchmarks/sizing.py [--repeat 3] [--starts 3]
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time
from pathlib import Path

import jax
import jax.numpy as jnp
import numpy as np
import scipy.optimize

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "examples"))

from ldo_compensation import FREE, TARGETS, regulator  # noqa: E402

import adlin  # noqa: E402
from adlin._design import sizing as sizing_module  # noqa: E402
from adlin._design.targets import total_loss  # noqa: E402


def load() -> str:
    return " ".join(f"{v:.1f}" for v in os.getloadavg())


def timed_size(system, starts: int):
    marks = []
    t0 = time.perf_counter()

    def progress(start, iteration, loss):
        marks.append((start, iteration, loss, time.perf_counter() - t0))

    res = adlin.size(system, FREE, TARGETS, starts=starts, progress=progress)
    return time.perf_counter() - t0, res, marks


def first_met(marks):
    """Per start: (iteration, seconds since the call began) where the loss first hit 0."""
    out = {}
    for start, it, loss, t in marks:
        if loss == 0.0 and start not in out:
            out[start] = (it, t)
    return out


def finite_difference_baseline(system, starts_values, low, high):
    """L-BFGS-B with 2-point finite differences of the same loss: (evaluations, seconds, losses)."""
    compiled = adlin.compile(system)
    names = tuple(FREE)
    idx = np.array([system.param_names.index(n) for n in names])
    p_base = np.asarray(system.param_vector(None), dtype=float)
    u = system.input_vector(None)
    targets = tuple(TARGETS)

    @jax.jit
    def value(op):
        return total_loss(targets, op, compiled.linearize(op.x, op.u, op.p))

    x_nominal = adlin.steady_state(system).x
    state = {"x": x_nominal, "n": 0}

    def loss(lv):
        state["n"] += 1
        p = p_base.copy()
        p[idx] = np.exp(lv)
        op = compiled.solve(u, jnp.asarray(p), state["x"])
        if not bool(op.converged):
            return sizing_module.FAILED_LOSS_FLOOR
        state["x"] = op.x
        return float(value(op))

    loss(np.log(np.asarray(starts_values[0])))  # compile outside the timing
    state["n"] = 0
    t0 = time.perf_counter()
    finals = []
    for v in starts_values:
        state["x"] = x_nominal
        r = scipy.optimize.minimize(
            loss, np.log(np.asarray(v)), method="L-BFGS-B",
            bounds=list(zip(np.log(low), np.log(high), strict=True)),
            options={"maxiter": 100, "ftol": sizing_module.F_TOL, "gtol": sizing_module.PG_TOL})
        finals.append(float(r.fun))
    return state["n"], time.perf_counter() - t0, finals


def per_evaluation(system, res, repeat: int = 50):
    compiled = adlin.compile(system)
    idx = tuple(system.param_names.index(n) for n in res.free_names)
    program = sizing_module._program(compiled, idx, tuple(TARGETS))
    p_base = system.param_vector(None)
    u = system.input_vector(None)
    lv = jnp.log(res.values)
    p = p_base.at[np.asarray(idx)].set(res.values)
    x0 = adlin.steady_state(system, params=res.as_dict()).x
    op = compiled.solve(u, p, x0)
    jax.block_until_ready(program(lv, p_base, op))
    t0 = time.perf_counter()
    for _ in range(repeat):
        op = compiled.solve(u, p, x0)
        jax.block_until_ready(op.x)
    t_solve = (time.perf_counter() - t0) / repeat
    t0 = time.perf_counter()
    for _ in range(repeat):
        jax.block_until_ready(program(lv, p_base, op))
    t_prog = (time.perf_counter() - t0) / repeat
    return t_solve, t_prog


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--starts", type=int, default=3)
    args = ap.parse_args()
    print(f"load average before: {load()} (1, 5, 15 min; {os.cpu_count()} CPUs)")
    system = regulator().build()

    cold, res, marks = timed_size(system, args.starts)
    warm_runs = [timed_size(system, args.starts) for _ in range(args.repeat)]
    warm = [w[0] for w in warm_runs]
    w_med = statistics.median(warm)
    print(f"problem: free {', '.join(f'{k} {lo:g}..{hi:g}' for k, (lo, hi) in FREE.items())}; "
          f"targets: {'; '.join(t.describe() for t in TARGETS)}")
    print(f"result: {res}")
    print(f"cold first call : {cold:7.2f} s  (compile ~ {cold - w_med:.2f} s = cold - warm median)")
    print(f"warm calls      : median {w_med:7.3f} s  runs {[round(t, 3) for t in warm]}")
    print(f"evaluations     : {res.evaluations} loss-and-gradient evaluations over {args.starts} "
          f"starts ({res.failed_evaluations} without a steady state); "
          f"{w_med / res.evaluations * 1e3:.2f} ms each, warm")
    met = first_met(warm_runs[0][2])
    for s in range(args.starts):
        if s in met:
            it, t = met[s]
            print(f"  start {s}: targets met (loss 0) after {it} iterations, {t:.3f} s into the "
                  "warm call")
        else:
            print(f"  start {s}: loss never reached 0 (final {float(res.final_losses[s]):.3g})")
    t_solve, t_prog = per_evaluation(system, res)
    print(f"one evaluation  : Newton solve {t_solve * 1e3:.2f} ms + loss and gradient "
          f"{t_prog * 1e3:.2f} ms")
    n_fd, t_fd, fd_finals = finite_difference_baseline(
        system, np.asarray(res.start_values), np.asarray(res.low), np.asarray(res.high))
    print(f"baseline (finite-difference L-BFGS-B, same starts, same run): {n_fd} loss evaluations, "
          f"{t_fd:.3f} s, final losses {[f'{v:.3g}' for v in fd_finals]}")
    print(f"ratio           : {n_fd / res.evaluations:.2f}x evaluations, "
          f"{t_fd / w_med:.2f}x wall time (baseline / adlin warm)")
    print(f"load average after: {load()}")


if __name__ == "__main__":
    main()
