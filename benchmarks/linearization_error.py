"""Linearization error of every example circuit: the project's published benchmark.

For each model file in ``examples/`` and one input/output pair (the table
`CHOICES` below, with the reason for each choice; otherwise the first input
and the first output), this script measures how far the small-signal model
stays true:

- error versus amplitude for steps and for sines on a FIXED amplitude grid
  (`GRID_DECADES` decades below the example's `a_max`, `GRID_POINTS` points
  per polarity; the error is the peak of |y_nonlinear - y_linear| over the
  run divided by the linear response's swing, the measure of `adlin.compare`);
- the linear range (`adlin.linear_range`) at 1 % and 10 % for both
  polarities;
- HD2 and HD3 predicted (Volterra kernels at the bias point) next to the
  values measured by FFT of the periodic transient (`adlin.distortion`), at
  `HD_FRACTION` times the smaller 1 % sine limit (`HD_FRACTION` times a_max
  when the sine has no limit).  The measurement integrates on a periodic
  step plan (equal steps T/(64 m), m doubled until no HDk moves by more than
  1e-9); the statistics give its final step, its error estimate and the
  steps of its last run.

Timing is fixed by the poles of the small-signal model: the sine frequency is
a decade below the slowest pole (the same rule as `adlin.linear_range`'s
default: there the circuit is nearly static, so the sine error measures the
static curvature plus what little memory is left); steps run for 10 slowest
time constants, sines for the longer of that and 3 periods, sampled 401 times
(steps) or 100 times per period (sines).  Transients use rtol 1e-8 unless
the example's choice says otherwise: the transient's error is about rtol
times the output's bias, which must stay far below the tolerance times the
swing at the smallest amplitude searched (the regulator's line step moves
its 1.8 V output by only 2e-4 V per V, so it needs rtol 1e-10).

Nothing is random, so two runs give the same table (wall times aside).  The
output is ONE table of errors, limits and distortion, then the solver's
statistics (steps, rejected steps, vector-field evaluations, wall times with
the compilation of the fixed-grid program timed apart from its run), then the
total wall time.  Figures (error versus amplitude, one per example) go to
``--out``.

Vector-field evaluations are derived, not counted: diffrax 0.7.2 reports
steps but not the iterations of its stage solves.  With the default solver
(`adlin.simulate`: Kvaerno5, seven stages, solved for increments, so there is
no first-same-as-last saving) every attempted step runs seven stage solves
(diffrax passes the explicit first stage through the solver too, with an
identity Jacobian), each of 1 to 10 chord iterations of one evaluation, plus
one Jacobian (one forward-mode pass with r tangents, r the number of ODE
states); the first step's size costs 2 more evaluations per run.  The table
gives the range 7 steps + 2 .. 70 steps + 2 and the number of Jacobians
(= steps).  An instrumented run (a host callback
counting the iterations of every stage solve; not part of this script, which
must not slow the timed programs) of one regulator lane, a 0.1 V step at
rtol 1e-10, measured 527 steps, 3689 stage solves (7 per step) and 6711
chord iterations (1.82 per solve): 7240 evaluations, 13.7 per step (before
the explicit stage took its exact step; not re-measured since).
Every evaluation also solves the algebraic unknowns by Newton.

    python benchmarks/linearization_error.py                 # every example
    python benchmarks/linearization_error.py --quick         # the fastest example only
    python benchmarks/linearization_error.py --only rc_ladder --out /tmp/lin
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

import jax
import jax.numpy as jnp
import numpy as np

import adlin
from adlin import stimuli
from adlin._compile import compile as compile_system
from adlin.cli.model_file import load_model

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = ROOT / "examples"

# Fixed amplitude grid: a_max * 10**linspace(-GRID_DECADES, 0, GRID_POINTS), both signs.
GRID_DECADES = 3
GRID_POINTS = 7
TOLS = (0.01, 0.1)
HD_FRACTION = 0.3
SETTLE_TIME_CONSTANTS = 10.0
SINE_PERIODS = 3.0
SAMPLES_PER_PERIOD = 100
STEP_POINTS = 401
RTOL = 1e-8
MAX_STEPS = 50_000
# Evaluations per attempted step of the default solver (see the module notes).
EVALS_PER_STEP = (7 * 1, 7 * 10)
EVALS_FIRST_STEP_SIZE = 2

# linear_range searches from a_max * SEARCH_SPAN up to a_max (same span for
# every call, so the batched transient program has the same lane count).
SEARCH_SPAN = 1e-4
QUICK = ("diode_clipper",)
# Lanes of linear_range's batches for that span and its default growth 4:
# 2 * (ceil(log(1 / SEARCH_SPAN) / log 4) + 1).  The fixed grid is padded to
# the same count so that both use one compiled program per stimulus kind.
LANES = 2 * (math.ceil(math.log(1 / SEARCH_SPAN) / math.log(4.0)) + 1)


@dataclass(frozen=True)
class Choice:
    """Which input drives and which output is watched, and the largest amplitude tried."""

    input: str
    output: str
    a_max: float
    reason: str
    inputs: dict = field(default_factory=dict)
    rtol: float = RTOL


CHOICES = {
    "diode_clipper": Choice("v_sensor", "v_adc", 1.0,
                            "the only input; 1 V swings the diode from off to hard on"),
    "ldo_compensation": Choice("v_bat", "v_out", 0.5,
                               "line steps on the cell (v_ref is an internal reference); "
                               "0.5 V covers most of the cell's 3.3-4.2 V range around 3.7 V; "
                               "rtol 1e-10: the output moves 2e-4 V per V of cell (line "
                               "regulation), so at rtol 1e-8 the solver's own error was 0.2-2 % "
                               "of the swing below 1 mV and hid the 1 % limit",
                               rtol=1e-10),
    "photodiode_tia_sizing": Choice("i_photo", "v_out", 1e-6,
                                    "the photocurrent is the signal; the op-amp model is "
                                    "linear, so the error measures the transient solver alone"),
    "photodiode_frontend": Choice("i_photo", "v_out", 10e-6,
                                  "the photocurrent is the signal (v_cc is the supply); "
                                  "10 uA through R_F moves the collector by about 1 V"),
    "rc_ladder": Choice("v_in", "v_ladder", 1.0,
                        "linear circuit: the error measures the transient solver alone"),
    "thermistor_ode": Choice("v_supply", "i_load", 6.0,
                             "supply steps are the inrush case; half the 12 V supply"),
    "tunnel_diode_bias": Choice("v_bias", "v_diode", 0.5,
                                "the only input; 0.5 V keeps the diode before its current "
                                "peak (past it the stage latches or oscillates)"),
}


def log(message: str) -> None:
    print(f"[{time.strftime('%H:%M:%S')}] {message}", file=sys.stderr, flush=True)


def default_choice(system) -> Choice | None:
    if not system.inputs or not system.outputs:
        return None
    inp = system.inputs[0]
    u0 = float(system.input_defaults[0])
    scale = 10 * abs(u0) if u0 else {"V": 1.0, "A": 1e-3}.get(system.unit(inp), 1.0)
    return Choice(inp, system.outputs[0], scale, "first input and first output (not in CHOICES)")


def timing(poles: np.ndarray) -> dict:
    """Sine frequency and run lengths from the poles (see the module notes)."""
    tau = 1.0 / float(np.min(-poles.real))
    f_hz = float(np.min(np.abs(poles))) / (2 * math.pi) / 10.0
    t_sine = max(SETTLE_TIME_CONSTANTS * tau, SINE_PERIODS / f_hz)
    return {
        "step": {"f_hz": None, "t_end": SETTLE_TIME_CONSTANTS * tau, "n_points": STEP_POINTS},
        "sine": {"f_hz": f_hz, "t_end": t_sine,
                 "n_points": int(SAMPLES_PER_PERIOD * t_sine * f_hz) + 1},
    }


def grid_errors(system, op, lin, choice: Choice, kind: str, setup: dict) -> dict:
    """Peak error over the swing at every amplitude of the fixed grid, one batched program.

    The batch runs twice: the first call compiles and runs, the second only
    runs, so compile time = first - second.
    """
    unit = (stimuli.Step(choice.input, 1.0) if kind == "step"
            else stimuli.Sine(choice.input, 1.0, setup["f_hz"]))
    ts = np.linspace(0.0, setup["t_end"], setup["n_points"])
    col = system.outputs.index(choice.output)
    y1 = np.asarray(adlin.linear_response(lin, unit, ts))[:, col]
    swing1 = max(float(np.max(y1)), 0.0) - min(float(np.min(y1)), 0.0)
    y0 = float(np.asarray(op.y)[col])
    mags = choice.a_max * np.logspace(-GRID_DECADES, 0, GRID_POINTS)
    amps = np.concatenate([mags, -mags])

    def run(a):
        # the same call as linear_range's, so the batched program compiled here is
        # the one its search reuses (same lane count, see LANES)
        tr = adlin.simulate(system, unit.scaled(a), setup["t_end"], op=op, t=ts, rtol=choice.rtol,
                            max_steps=MAX_STEPS, throw=False)
        return tr.y[:, col], tr.status, tr.steps, tr.rejected_steps

    batch = jnp.asarray(np.concatenate([amps, np.full(LANES - amps.size, amps[-1])]))
    t0 = time.perf_counter()
    jax.block_until_ready(jax.vmap(run)(batch))
    t1 = time.perf_counter()
    y, status, steps, rejected = (np.asarray(v)[:amps.size] for v in
                                  jax.block_until_ready(jax.vmap(run)(batch)))
    t2 = time.perf_counter()
    err = np.max(np.abs(y - y0 - amps[:, None] * y1[None, :]), axis=1) / (np.abs(amps) * swing1)
    err = np.where((status == 0) & np.isfinite(err), err, np.inf)
    return {"amplitudes": amps, "errors": err, "failed": int(np.sum(status != 0)),
            "steps": int(np.sum(steps)), "rejected": int(np.sum(rejected)),
            "max_steps_one_run": int(np.max(steps)), "compile_s": max((t1 - t0) - (t2 - t1), 0.0),
            "run_s": t2 - t1}


def ranges(system, op, choice: Choice, kind: str, setup: dict) -> dict:
    out = {}
    for tol in TOLS:
        t0 = time.perf_counter()
        r = adlin.linear_range(system, op, input=choice.input, output=choice.output, tol=tol,
                               kind=kind, f_hz=setup["f_hz"], t_end=setup["t_end"],
                               n_points=setup["n_points"], amplitude_max=choice.a_max,
                               amplitude_min=choice.a_max * SEARCH_SPAN, rtol=choice.rtol,
                               max_steps=MAX_STEPS)
        out[tol] = (r, time.perf_counter() - t0)
    return out


def hd(system, op, choice: Choice, setup: dict, sine_range) -> tuple:
    limits = [abs(v) for v, b in ((sine_range.positive, sine_range.positive_bracket),
                                  (sine_range.negative, sine_range.negative_bracket))
              if math.isfinite(b[1]) and v != 0]
    amplitude = HD_FRACTION * (min(limits) if limits else choice.a_max)
    t0 = time.perf_counter()
    d = adlin.distortion(system, op, input=choice.input, output=choice.output,
                         amplitude=amplitude, f_hz=setup["f_hz"])
    return d, time.perf_counter() - t0


def figure(name: str, system, op, choice: Choice, kinds: dict, out_dir: Path) -> Path:
    """Error versus amplitude via the `adlin check` figure (fixed grid merged with the search)."""
    import equinox as eqx

    from adlin.report.trust import CheckSummary
    from adlin.report.trust_figures import error_figure

    shown = []
    for k in kinds.values():
        r = k["ranges"][TOLS[0]][0]
        a = np.concatenate([np.asarray(r.amplitudes), k["grid"]["amplitudes"]])
        e = np.concatenate([np.asarray(r.errors), k["grid"]["errors"]])
        order = np.argsort(a)
        shown.append(eqx.tree_at(lambda m: (m.amplitudes, m.errors), r, (a[order], e[order])))
    s = CheckSummary(name=name, input=choice.input, output=choice.output,
                     input_unit=system.unit(choice.input), output_unit=system.unit(choice.output),
                     bias_input=float(op[choice.input]), bias_output=float(op[choice.output]),
                     tol=TOLS[0], ranges=shown)
    fig = error_figure(s)
    ax = fig.axes[0]
    ax.axhline(TOLS[1], color="0.45", linewidth=0.9, linestyle="--",
               label=f"tolerance {100 * TOLS[1]:g} %")
    ax.legend(frameon=False, fontsize=8.5, loc="best")
    path = out_dir / f"linearization_error_{name}.png"
    fig.savefig(path, facecolor="white")
    return path


def bench_example(path: Path, out_dir: Path) -> dict:
    name = path.stem
    t_start = time.perf_counter()
    system = load_model(path).system
    choice = CHOICES.get(name) or default_choice(system)
    if choice is None:
        return {"name": name, "skipped": "the model has no input (or no output) to drive"}
    op = adlin.steady_state(system, inputs=choice.inputs or None)
    lin = adlin.linearize(system, op)
    poles = np.asarray(lin.poles())
    if not poles.size:
        return {"name": name, "skipped": "no storage (no poles): nothing dynamic to compare"}
    if np.max(poles.real) >= 0:
        return {"name": name, "skipped": "the bias point is not stable"}
    setups = timing(poles)
    kinds = {}
    for kind, setup in setups.items():
        log(f"{name}: {kind}, fixed grid")
        grid = grid_errors(system, op, lin, choice, kind, setup)
        log(f"{name}: {kind}, linear range at {', '.join(f'{t:g}' for t in TOLS)}")
        kinds[kind] = {"setup": setup, "grid": grid, "ranges": ranges(system, op, choice, kind,
                                                                      setup)}
    log(f"{name}: distortion")
    d, d_wall = hd(system, op, choice, setups["sine"], kinds["sine"]["ranges"][TOLS[0]][0])
    fig = figure(name, system, op, choice, kinds, out_dir)
    return {"name": name, "choice": choice, "kinds": kinds, "distortion": d,
            "ode_states": compile_system(system).structure.n_dynamic,
            "distortion_s": d_wall, "figure": fig, "wall_s": time.perf_counter() - t_start,
            "unit": system.unit(choice.input)}


# --- report -------------------------------------------------------------------------------

def _si(v: float, unit: str = "") -> str:
    if v is None or not math.isfinite(v):
        return "—"
    from adlin._units import si

    return si(v, unit)


def _pct(v) -> str:
    v = float(v)
    return "—" if not math.isfinite(v) else f"{100 * v:.3g}%"


def _limits(r, unit: str) -> str:
    def one(v, b):
        if math.isinf(b[1]):
            return f">{_si(abs(v), unit)}"
        if v == 0:  # beyond tol already at the smallest amplitude searched
            return f"<{_si(abs(b[1]), unit)}"
        return _si(abs(v), unit)

    return f"+{one(r.positive, r.positive_bracket)} / -{one(r.negative, r.negative_bracket)}"


def report(results: list[dict], total_s: float, out_dir: Path) -> None:
    from rich.console import Console
    from rich.table import Table

    console = Console(width=250, record=True)
    main = Table(title="Linearization error (error = peak |y_nl - y_lin| / linear swing)",
                 title_justify="left")
    for col, just in (("example", "left"), ("input -> output", "left"), ("stimulus", "left"),
                      ("a_max", "right"), ("error at a_max +/-", "right"),
                      ("error at a_max/100 +/-", "right"), ("1% limit +/-", "right"),
                      ("10% limit +/-", "right"), ("first", "left"), ("HD amplitude", "right"),
                      ("HD2 pred / meas", "right"), ("HD3 pred / meas", "right")):
        main.add_column(col, justify=just)
    stats = Table(title="Solver statistics (fixed grid: one batched program, run twice: compile = "
                  "first - second call; searches reuse that program; distortion: wall time "
                  "including its compilation)",
                  title_justify="left")
    for col in ("example", "stimulus", "ODE states", "rtol", "grid runs", "grid steps",
                "grid rejected", "max steps/run", "grid vf evals (derived)", "grid compile s",
                "grid run s", "search runs 1%/10%", "search s 1%/10%", "HD steps",
                "HD step (err)", "HD s", "example s"):
        stats.add_column(col, justify="left" if col in ("example", "stimulus") else "right")
    for res in results:
        if "skipped" in res:
            main.add_row(res["name"], "skipped: " + res["skipped"], *[""] * 10)
            continue
        c, unit, d = res["choice"], res["unit"], res["distortion"]
        for kind, k in res["kinds"].items():
            g, setup = k["grid"], k["setup"]
            n = GRID_POINTS
            stim = "step" if kind == "step" else f"sine {_si(setup['f_hz'], 'Hz')}"
            r1, r10 = k["ranges"][TOLS[0]][0], k["ranges"][TOLS[1]][0]
            at = int(np.argmin(np.abs(g["amplitudes"][:n] - c.a_max / 100)))
            hd_cells = ["", "", ""]
            if kind == "sine":
                hd_cells = [_si(float(d.amplitude[0]), unit),
                            f"{_pct(d.predicted_hd2[0])} / {_pct(d.measured_hd2[0])}",
                            f"{_pct(d.predicted_hd3[0])} / {_pct(d.measured_hd3[0])}"]
            main.add_row(res["name"], f"{c.input} -> {c.output}", stim, _si(c.a_max, unit),
                         f"{_pct(g['errors'][n - 1])} / {_pct(g['errors'][2 * n - 1])}",
                         f"{_pct(g['errors'][at])} / {_pct(g['errors'][n + at])}",
                         _limits(r1, unit), _limits(r10, unit), r1.limiting, *hd_cells)
            s = d.settings if kind == "sine" else None
            lo, hi = (k_ * g["steps"] + EVALS_FIRST_STEP_SIZE * 2 * n for k_ in EVALS_PER_STEP)
            stats.add_row(
                res["name"], stim, str(res["ode_states"]), f"{c.rtol:g}",
                f"{2 * n}" + (f" ({g['failed']} failed)" if g["failed"] else ""),
                str(g["steps"]), str(g["rejected"]), str(g["max_steps_one_run"]),
                f"{lo}..{hi}",
                f"{g['compile_s']:.1f}", f"{g['run_s']:.2f}",
                f"{len(r1.amplitudes)}/{len(r10.amplitudes)}",
                f"{k['ranges'][TOLS[0]][1]:.1f}/{k['ranges'][TOLS[1]][1]:.1f}",
                str(int(np.sum(s.steps))) if s is not None else "",
                (f"T/{s.samples_per_period * int(np.max(np.asarray(s.steps_per_sample)))} "
                 f"({float(np.max(np.asarray(s.harmonic_error))):.1g})") if s is not None else "",
                f"{res['distortion_s']:.1f}" if s is not None else "",
                f"{res['wall_s']:.1f}" if kind == "step" else "")
    console.print(main)
    for res in results:
        if "skipped" in res:
            continue
        c = res["choice"]
        console.print(f"  {res['name']}: {c.input} -> {c.output}: {c.reason}; "
                      f"figure {res['figure']}")
        for kind, k in res["kinds"].items():
            for tol, (r, _) in k["ranges"].items():
                for note in r.notes:
                    if not note.startswith(("f_hz =", "t_end =")):  # timing is in the header
                        console.print(f"    {kind} range at {100 * tol:g} %: {note}")
        for note in res["distortion"].notes:
            console.print(f"    distortion note: {note}")
    console.print(stats)
    console.print(f"  grid vf evals: derived as {EVALS_PER_STEP[0]}..{EVALS_PER_STEP[1]} per "
                  "attempted step (seven stage solves of 1..10 chord iterations each) + "
                  f"{EVALS_FIRST_STEP_SIZE} per run for the first step size, plus one Jacobian "
                  "(r forward tangents) per attempted step; diffrax does not report stage "
                  "iterations.  Measured once with a counting callback (module notes): 1.82 "
                  "iterations per stage solve, 13.7 evaluations per step on a regulator lane.")
    load = ", load average " + " ".join(f"{v:.1f}" for v in os.getloadavg())
    console.print(f"total wall time {total_s:.1f} s ({len(results)} examples; jax "
                  f"{jax.__version__}, {jax.device_count()} CPU device(s){load})")
    console.save_text(str(out_dir / "linearization_error.txt"))


def to_json(results: list[dict], total_s: float) -> dict:
    def num(v):
        v = float(v)
        return v if math.isfinite(v) else None

    out = {"total_s": total_s, "examples": []}
    for res in results:
        if "skipped" in res:
            out["examples"].append({"name": res["name"], "skipped": res["skipped"]})
            continue
        c, d = res["choice"], res["distortion"]
        item = {"name": res["name"], "input": c.input, "output": c.output, "a_max": c.a_max,
                "reason": c.reason, "wall_s": res["wall_s"], "kinds": {}}
        for kind, k in res["kinds"].items():
            g = k["grid"]
            item["kinds"][kind] = {
                "f_hz": k["setup"]["f_hz"], "t_end_s": k["setup"]["t_end"],
                "grid": [{"amplitude": num(a), "error": num(e)}
                         for a, e in zip(g["amplitudes"], g["errors"], strict=True)],
                "grid_stats": {key: g[key] for key in ("steps", "rejected", "failed",
                                                       "max_steps_one_run", "compile_s",
                                                       "run_s")},
                "limits": {f"{tol:g}": {"positive": num(r.positive),
                                        "positive_bracket": [num(b) for b in r.positive_bracket],
                                        "negative": num(r.negative),
                                        "negative_bracket": [num(b) for b in r.negative_bracket],
                                        "limits_first": r.limiting, "wall_s": wall}
                           for tol, (r, wall) in k["ranges"].items()},
            }
        item["distortion"] = {key: num(v) for key, v in d.rows()[0].items()}
        if d.settings is not None:
            item["distortion"].update(
                steps_per_period=d.settings.samples_per_period
                * int(np.asarray(d.settings.steps_per_sample)[0]),
                harmonic_error=num(np.asarray(d.settings.harmonic_error)[0]),
                steps=int(np.asarray(d.settings.steps)[0]))
        out["examples"].append(item)
    return out


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--out", default=str(ROOT / "benchmarks" / "out"),
                    help="directory for the figures (linearization_error_NAME.png), the table "
                    "(linearization_error.txt) and linearization_error.json "
                    "(default benchmarks/out/)")
    ap.add_argument("--quick", action="store_true",
                    help=f"run only the fastest example(s): {', '.join(QUICK)}")
    ap.add_argument("--only", action="append", metavar="NAME",
                    help="run only this example (file stem; repeatable)")
    args = ap.parse_args(argv)
    files = sorted(EXAMPLES.glob("*.py"))
    wanted = set(args.only or ()) | (set(QUICK) if args.quick else set())
    if wanted:
        unknown = wanted - {f.stem for f in files}
        if unknown:
            ap.error(f"no example named {', '.join(sorted(unknown))} in {EXAMPLES}")
        files = [f for f in files if f.stem in wanted]
    out_dir = Path(args.out)
    out_dir.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()
    results = []
    for f in files:
        log(f"{f.stem}: start")
        results.append(bench_example(f, out_dir))
    total = time.perf_counter() - t0
    report(results, total, out_dir)
    (out_dir / "linearization_error.json").write_text(
        json.dumps(to_json(results, total), indent=2) + "\n")


if __name__ == "__main__":
    main()
