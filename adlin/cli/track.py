"""``adlin track``: follow a model's steady state along one parameter or input.

    adlin track MODEL.py --param NAME --from A --to B [--show NAME] [--points N]
                         [--step S] [--set NAME=VALUE ...] [--guess NAME=VALUE ...]
                         [--plots DIR] [--json]

Prints how the walk ended, the folds and Hopf points, the stable and unstable
ranges and a table of samples; ``--plots DIR`` writes ``branch.png``.  A
progress bar runs on standard error when it is a terminal.
"""

from __future__ import annotations

import argparse
import sys
from contextlib import contextmanager

from .options import (
    CommandError,
    emit_report,
    parse_assignments,
    parse_option_number,
    prepare_figure_directory,
    split_settings,
)


@contextmanager
def _progress(start: float, stop: float, param: str, enabled: bool):
    """A rich progress bar on standard error, or a no-op callback."""
    if not enabled:
        yield None
        return
    from rich.console import Console
    from rich.progress import BarColumn, Progress, TextColumn

    with Progress(TextColumn(f"following {param}"), BarColumn(),
                  TextColumn("{task.completed:.0%} · {task.fields[points]} points"),
                  console=Console(stderr=True), transient=True) as bar:
        task = bar.add_task("walk", total=1.0, points=0)

        def update(fraction: float, points: int) -> None:
            bar.update(task, completed=max(0.0, min(1.0, float(fraction))), points=points)

        yield update


def cmd_track(args, out=None) -> int:
    from .. import track
    from ..report.branch import branch_to_dict, check_column, summarize_branch
    from .model_file import load_model

    out = out or sys.stdout
    loaded = load_model(args.model_file, args.model)
    system = loaded.system
    inputs, params = split_settings(system, parse_assignments(args.set, "--set"))
    guess = parse_assignments(args.guess, "--guess")
    start = parse_option_number("--from", args.start)
    stop = parse_option_number("--to", args.stop)
    step = None if args.step is None else parse_option_number("--step", args.step)
    if args.show is not None:
        check_column(system, args.show)
    if args.points < 2:
        raise CommandError(f"--points {args.points}: a branch needs at least 2 points.")
    prepare_figure_directory(args.plots)
    with _progress(start, stop, args.param, sys.stderr.isatty() and not args.json) as update:
        branch = track(system, args.param, start, stop, inputs=inputs, params=params,
                       guess=guess or None, step=step, max_points=args.points,
                       progress=update)
    summary = summarize_branch(system, branch, args.show, inputs=inputs, params=params,
                               start=start, stop=stop)
    return emit_report(args, out, summary, to_dict=branch_to_dict,
                       text="branch_text:render_branch",
                       figures="branch_figure:write_branch_figure" if len(summary.values)
                       else None)


def add_track_command(sub, base: argparse.ArgumentParser) -> None:
    """Register ``track`` on the subcommand parser `sub` (with the shared options `base`)."""
    track = sub.add_parser(
        "track", parents=[base],
        help="follow the steady state along a parameter: folds, Hopf points, stability",
        description="Follow the steady state of MODEL.py as one parameter or input moves "
        "from --from to --to (pseudo-arclength continuation, through folds), and report "
        "folds, Hopf points, stable and unstable ranges; --plots DIR writes branch.png.")
    track.add_argument("model_file", metavar="MODEL.py", help="the Python model file")
    track.add_argument("--model", metavar="NAME",
                       help="which System, Circuit or function of the file to use")
    track.add_argument("--param", required=True, metavar="NAME",
                       help="the parameter or input to move")
    track.add_argument("--from", dest="start", required=True, metavar="A",
                       help="start value (SI prefixes allowed)")
    track.add_argument("--to", dest="stop", required=True, metavar="B",
                       help="stop value (SI prefixes allowed)")
    track.add_argument("--show", metavar="NAME",
                       help="unknown or output to tabulate and plot (default: first output)")
    track.add_argument("--points", type=int, default=400, metavar="N",
                       help="most samples to keep (default 400)")
    track.add_argument("--step", metavar="S",
                       help="first step in parameter units (default 1/50 of the range)")
    track.add_argument("--guess", action="append", metavar="NAME=VALUE",
                       help="starting value of an unknown for the first steady state")
    track.set_defaults(func=cmd_track)
