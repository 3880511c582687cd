"""Steady-state strategies on the hard-to-start corpus, side by side.

For every circuit of `adlin.scenarios.hard.CORPUS`, each strategy alone
("newton", "conductance", "source", "pseudo-transient", "homotopy") and the
case's automatic mode ("auto", with the options the case asks for) start from
the all-zero guess.  One table shows, per circuit and strategy, whether the
intended state was found (`ok`), a different steady state (`other`), or
nothing (`fail`, with the reason), and the residual evaluations (a Jacobian
counts as n); a second table shows wall times with compilation excluded
(every solve runs once to compile, then is timed over `--repeat` runs).
Totals close both tables.  Deterministic: no randomness, fixed order.

    python benchmarks/steady_state_strategies.py [--repeat 3] [--cases latch,ptat_cell]
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time

import adlin
from adlin.scenarios.hard import CORPUS
from adlin.strategies import STRATEGY_NAMES

COLUMNS = (*STRATEGY_NAMES, "auto")

# short reason tags for the table (full sentences come from op.attempts_message)
_SHORT = {
    "no convergence": "no conv.",
    "singular": "singular",
    "non-finite": "non-finite",
    "underflow": "underflow",
    "no solution at the start": "no start",
    "turned back": "turned back",
    "did not converge": "polish failed",
    "only an unstable": "unstable only",
}


def short_reason(op) -> str:
    message = op.message
    for key, tag in _SHORT.items():
        if key in message:
            return tag
    return message.split(" ")[0]


def run(case, strategy):
    system = case.build()
    return adlin.steady_state(system, case.inputs, case.params, strategy=strategy, throw=False)


def measure(case, column: str, repeat: int):
    """Outcome, evaluations and warm wall time of one strategy on one case."""
    strategy = case.strategy if column == "auto" else column
    op = run(case, strategy)  # compiles; also the result reported
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        again = run(case, strategy)
        again.x.block_until_ready()
        times.append(time.perf_counter() - t0)
    if not bool(op.converged):
        outcome = f"fail ({short_reason(op)})"
    elif case.is_intended(op):
        outcome = "ok"
    else:
        outcome = "other"
    if column == "auto":
        outcome += f" [{op.method}]" if bool(op.converged) else ""
    return outcome, int(op.evaluations), statistics.median(times)


def table(rows, header, fmt) -> str:
    cells = [[str(c) for c in header]] + [[str(r[0])] + [fmt(v) for v in r[1:]] for r in rows]
    widths = [max(len(row[k]) for row in cells) for k in range(len(header))]
    lines = []
    for i, row in enumerate(cells):
        lines.append("  ".join(c.ljust(w) for c, w in zip(row, widths, strict=True)))
        if i == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeat", type=int, default=3, help="timed runs per cell (median shown)")
    ap.add_argument("--cases", default="", help="comma-separated case names (default: all)")
    args = ap.parse_args()
    chosen = [c for c in CORPUS if not args.cases or c.name in args.cases.split(",")]

    results = {}
    for case in chosen:
        for column in COLUMNS:
            results[case.name, column] = measure(case, column, args.repeat)
            print(f"  {case.name} / {column}: {results[case.name, column][0]}", file=sys.stderr,
                  flush=True)  # progress; compiling every strategy takes minutes

    outcome_rows = []
    for case in chosen:
        row = [case.name]
        for column in COLUMNS:
            outcome, evals, _ = results[case.name, column]
            row.append(f"{outcome} {evals}")
        outcome_rows.append(row)
    totals = ["found / evaluations"]
    for column in COLUMNS:
        found = sum(results[c.name, column][0].startswith("ok") for c in chosen)
        evals = sum(results[c.name, column][1] for c in chosen)
        totals.append(f"{found}/{len(chosen)} {evals}")
    outcome_rows.append(totals)

    time_rows = []
    for case in chosen:
        time_rows.append([case.name] + [results[case.name, c][2] * 1e3 for c in COLUMNS])
    time_rows.append(["total"] + [sum(results[c.name, col][2] for c in chosen) * 1e3
                                  for col in COLUMNS])

    print("Steady state from the zero guess: outcome and residual evaluations")
    print("(ok = intended state, other = another steady state, fail = no convergence;")
    print(" auto shows the strategy that won in brackets)\n")
    print(table(outcome_rows, ["circuit", *COLUMNS], str))
    print(f"\nWall time per solve in ms (compile excluded, median of {args.repeat})\n")
    print(table(time_rows, ["circuit", *COLUMNS], lambda v: f"{v:.1f}"))
    print("\nNewton from zero as documented by each case:")
    for case in chosen:
        print(f"  {case.name:20s} {case.newton_from_zero:12s} {case.why}")


if __name__ == "__main__":
    main()
