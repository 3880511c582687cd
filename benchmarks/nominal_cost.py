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


def report(n: int, nb: int, t_first: float, warm, loop, adlin_note: str, loop_note: str) -> None:
    """Print adlin's and the loop's times from `scipy_loop.in_turns` and their
    ratio per round (loop seconds per sample x n / adlin seconds per call)."""
    t_warm, t_loop = statistics.median(warm), statistics.median(loop)
    ratios = [lp * n / a for a, lp in zip(warm, loop, strict=True)]
    print(f"adlin, warm       : min/median/max {min(warm):.3f}/{t_warm:.3f}/{max(warm):.3f} s "
          f"= {n / t_warm:,.0f} samples/s median ({t_warm / n * 1e6:.1f} us per sample), "
          f"{adlin_note}; first call {t_first:.2f} s (includes compilation)")
    print(f"scipy loop        : {t_loop * 1e3:.2f} ms per sample median "
          f"({min(loop) * 1e3:.2f}-{max(loop) * 1e3:.2f} over the rounds) = "
          f"{1 / t_loop:,.0f} samples/s, on {nb} of the samples, {loop_note}")
    print(f"speed-up, warm adlin vs scipy loop : {statistics.median(ratios):8.1f}x median of "
          f"{len(ratios)} rounds ({min(ratios):.1f}x to {max(ratios):.1f}x), each round one adlin "
          "call and then its share of the loop   (target >= 300x)")
    print(f"speed-up, adlin first call         : {t_loop * n / t_first:8.1f}x")
