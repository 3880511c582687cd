"""What a batched run spends on its nominal point, for the throughput benchmarks.

A sweep or Monte Carlo run solves the nominal operating point and factors the
nominal matrices once (`adlin._design.nominal_point`); repeated runs about the
same nominal values reuse them, so the benchmarks' warm calls do not pay for
them.  The scipy loop gets its nominal point outside its timing too.  This
measures that cost directly, so each benchmark can also print the ratio a run
that solves its nominal point afresh would have had.
"""

from __future__ import annotations

import statistics
import time

import numpy as np

import adlin
from adlin._compile import compile
from adlin._design.fast_path import plan_at


def nominal_seconds(system, repeat: int = 7) -> float:
    """Median seconds of `adlin.steady_state` plus the fast path's plans (warm)."""
    compiled = compile(system)

    def once():
        op = adlin.steady_state(system)
        plan_at(compiled, *(np.asarray(a) for a in (op.x, op.u, op.p)))

    once()
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        once()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def describe(t_nominal: float, warm, loop, n: int) -> str:
    """The printed line: the nominal cost and the median ratio over the rounds
    of `scipy_loop.in_turns` had each warm call paid it."""
    ratios = [lp * n / (a + t_nominal) for a, lp in zip(warm, loop, strict=True)]
    return (f"nominal point + plans: {t_nominal * 1e3:.1f} ms per run "
            f"({t_nominal / n * 1e6:.2f} us per sample here), solved by the first call and "
            f"remembered for the warm calls; had each warm call solved it again: "
            f"{statistics.median(ratios):.1f}x median")
