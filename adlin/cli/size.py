"""``adlin size``: move component values until the design targets are met.

    adlin size MODEL.py --free NAME=LOW..HIGH [--free ...] --target SPEC [--target ...]
                        [--starts N] [--seed N] [--iterations N] [--round E12|E24|E96]
                        [--set NAME=VALUE ...] [--plots DIR] [--json]

Each ``--free`` parameter is searched between its bounds (SI prefixes
allowed, both positive: the search runs in log space), the ``--target``
specs (see `adlin.cli.target_syntax`) give the loss.  Prints the free
parameters (start, sized value, bounds, preferred value after ``--round``),
the targets (achieved, met, after rounding) and how each start went;
``--plots DIR`` (or ``--figures DIR``) writes ``loss_history.png`` and
``pole_path.png``.  A progress bar runs on standard error when it is a
terminal.
"""

from __future__ import annotations

import argparse
import sys
from contextlib import contextmanager

from .options import (
    CommandError,
    emit_report,
    parse_assignments,
    prepare_figure_directory,
    split_settings,
)
from .target_syntax import FORMS, parse_range, parse_targets

SERIES = ("E12", "E24", "E96")


def parse_free(items, system) -> dict[str, tuple[float, float]]:
    """``["R2=1k..100k"]`` -> ``{"R2": (1e3, 1e5)}``, checked against `system`.

    **Raises:** `CommandError` for a malformed range (not LOW..HIGH, not
    0 < LOW < HIGH) or a name given twice; `ParameterError` for a name that
    is not a parameter of `system` (with the closest valid names).
    """
    from .._errors import ParameterError, did_you_mean

    if not items:
        raise CommandError("adlin size needs at least one free parameter; write e.g. "
                           "--free R2=1k..100k.")
    out: dict[str, tuple[float, float]] = {}
    for item in items:
        name, sep, text = item.partition("=")
        name = name.strip()
        if not sep or not name:
            raise CommandError(f"--free {item!r} is not NAME=LOW..HIGH; write e.g. "
                               "--free R2=1k..100k.")
        if name not in system.param_names:
            hint = did_you_mean(name, system.param_names)
            where = (" (it is an input; only parameters are sized)"
                     if name in system.inputs else "")
            raise ParameterError(f"--free {item}: {system.name!r} has no parameter {name!r}"
                                 f"{where}; {hint}{'' if hint.endswith('?') else '.'}")
        try:
            low, high = parse_range(text)
        except ValueError:
            low = high = float("nan")
        if not 0 < low < high:
            raise CommandError(f"--free {item!r}: the range must be LOW..HIGH with 0 < LOW < "
                               "HIGH (the search runs in log space); write e.g. "
                               "--free R2=1k..100k.")
        if name in out:
            raise CommandError(f"--free {item!r}: {name} is free already; give each "
                               "parameter once.")
        out[name] = (low, high)
    return out


@contextmanager
def _progress(starts: int, iterations: int, enabled: bool):
    """A rich progress bar over starts x iterations on standard error, or no-op."""
    if not enabled:
        yield None
        return
    from rich.console import Console
    from rich.progress import BarColumn, Progress, TextColumn

    total = starts * iterations
    with Progress(TextColumn("sizing"), BarColumn(),
                  TextColumn("start {task.fields[run]} of " + str(starts)
                             + " · iteration {task.fields[iteration]} · loss {task.fields[loss]}"),
                  console=Console(stderr=True), transient=True) as bar:
        task = bar.add_task("size", total=total, run=1, iteration=0, loss="—")

        def update(start: int, iteration: int, loss: float) -> None:
            # a start that stops early jumps the bar to the next start's slot
            bar.update(task, completed=min(total, start * iterations + iteration),
                       run=start + 1, iteration=iteration, loss=f"{float(loss):.3g}")

        yield update


def cmd_size(args, out=None) -> int:
    from .. import size
    from ..report.sizing import sizing_to_dict, summarize_sizing
    from .model_file import load_model

    out = out or sys.stdout
    loaded = load_model(args.model_file, args.model)
    system = loaded.system
    # every check of the command line before the (slow) first compile
    inputs, params = split_settings(system, parse_assignments(args.set, "--set"))
    free = parse_free(args.free, system)
    if not args.target:
        raise CommandError(f"adlin size needs at least one --target; write one of: {FORMS}.")
    targets = parse_targets(args.target, system)
    if args.starts < 1:
        raise CommandError(f"--starts {args.starts}: give at least 1 start.")
    if args.iterations < 1:
        raise CommandError(f"--iterations {args.iterations}: give at least 1 iteration.")
    prepare_figure_directory(args.plots)
    with _progress(args.starts, args.iterations,
                   sys.stderr.isatty() and not args.json) as update:
        result = size(system, free, targets, inputs=inputs, params=params, starts=args.starts,
                      seed=args.seed, round_to=args.round, max_iterations=args.iterations,
                      progress=update)
    summary = summarize_sizing(system, result, targets=targets)
    return emit_report(args, out, summary, to_dict=sizing_to_dict,
                       text="sizing_text:render_sizing",
                       figures="sizing_figures:write_sizing_figures")


def add_size_command(sub, base: argparse.ArgumentParser) -> None:
    """Register ``size`` on `sub` (`base` carries --set, --plots, --json, --debug)."""
    size = sub.add_parser(
        "size", parents=[base],
        help="size component values for pole, gain, bandwidth and bias targets",
        description="Move the --free parameters of MODEL.py within their bounds (gradient "
        "steps in log space from several starts) until the --target specs are met; report "
        "the sized values, the targets achieved, and with --round the preferred values and "
        "the targets re-checked; --plots DIR writes loss_history.png and pole_path.png.")
    size.add_argument("model_file", metavar="MODEL.py", help="the Python model file")
    size.add_argument("--model", metavar="NAME",
                      help="which System, Circuit or function of the file to use")
    size.add_argument("--free", action="append", metavar="NAME=LOW..HIGH",
                      help="a parameter to size and its bounds (repeatable; SI prefixes, "
                      "e.g. C_F=0.1p..10p)")
    size.add_argument("--target", action="append", metavar="SPEC",
                      help=f"a design target (repeatable): {FORMS.replace('%', '%%')}")
    size.add_argument("--starts", type=int, default=3, metavar="N",
                      help="starting points: the nominal design, then log-uniform draws "
                      "(default 3)")
    size.add_argument("--seed", type=int, default=0, metavar="N",
                      help="seed of the random starts (default 0)")
    size.add_argument("--iterations", type=int, default=100, metavar="N",
                      help="most optimizer iterations per start (default 100)")
    size.add_argument("--round", choices=SERIES, metavar="SERIES",
                      help="round the sized values to an IEC 60063 series (E12, E24 or E96) "
                      "and re-check the targets")
    size.add_argument("--figures", dest="plots", metavar="DIR", help="same as --plots DIR")
    size.set_defaults(func=cmd_size)
