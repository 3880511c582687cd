"""``adlin spread``: tolerance (Monte Carlo) study of a model file.

    adlin spread MODEL.py --tol NAME=1% [--tol NAME=0.5%:normal ...] [-n 10000]
                          [--seed N] [--of NAME ...] [--target SPEC ...]
                          [--set NAME=VALUE ...] [--chunk N] [--plots DIR] [--json]

Draws every ``--tol`` name from its tolerance (uniform by default, ``:normal``
for a normal law; ``%`` relative, else absolute with SI prefixes), solves the
steady state, small-signal model and poles of every sample in batches, and
prints the spread of the poles and of each ``--of`` quantity (a name,
``gain:OUT/IN`` or ``damping:K``), the yield against the ``--target`` specs
(see `adlin.cli.target_syntax`) and the first failed samples.  ``--plots
DIR`` (or ``--figures DIR``) writes ``pole_scatter.png`` and
``histograms.png``.  A progress bar runs on standard error when it is a
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
from .target_syntax import FORMS, parse_targets

TOL_FORMS = "--tol R1=1% (uniform), --tol C1=5%:normal (one standard deviation), --tol v_in=2m"


def parse_tolerances(items, system) -> dict:
    """``["R1=1%", "C1=5%:normal"]`` -> ``{"R1": Uniform(rel=0.01), "C1": Normal(rel=0.05)}``.

    **Raises:** `CommandError` for a malformed item, a name given twice or an
    unreadable tolerance; `ParameterError` for a name that is neither a
    parameter nor an input of `system` (with the closest valid names).
    """
    from .._errors import ParameterError, did_you_mean
    from ..tolerances import parse

    if not items:
        raise CommandError(f"adlin spread needs at least one tolerance; write e.g. {TOL_FORMS}.")
    valid = system.param_names + system.inputs
    out = {}
    for item in items:
        name, sep, spec = item.partition("=")
        name = name.strip()
        if not sep or not name or not spec.strip():
            raise CommandError(f"--tol {item!r} is not NAME=TOLERANCE; write e.g. {TOL_FORMS}.")
        if name not in valid:
            hint = did_you_mean(name, valid)
            raise ParameterError(f"--tol {item}: {system.name!r} has no parameter or input "
                                 f"{name!r}; {hint}{'' if hint.endswith('?') else '.'}")
        if name in out:
            raise CommandError(f"--tol {item!r}: {name} has a tolerance already; give each "
                               "name once.")
        try:
            out[name] = parse(spec.strip())
        except ParameterError as err:
            reason = " ".join(str(err).split()).rstrip(".")
            raise CommandError(f"--tol {item!r}: {reason}.") from None
    return out


def parse_quantity(text: str):
    """One ``--of`` item: ``NAME`` (a bias-point value), ``gain:OUT/IN`` (DC gain) or
    ``damping:K`` (damping of pole K, counted from the slowest at the nominal point).

    **Raises:** `CommandError` naming the item when it is malformed.
    """
    from .. import quantities as Q

    body = "".join(str(text).split())
    kind, sep, rest = body.partition(":")
    if not sep:
        if not body:
            raise CommandError("--of needs a name; write e.g. --of v_out, --of gain:v_out/v_in "
                               "or --of damping:0.")
        return body
    if kind == "gain":
        out, slash, inp = rest.partition("/")
        if slash and out and inp:
            return Q.DCGain(out, inp)
    elif kind == "damping" and rest.isdigit():
        return Q.PoleDamping(int(rest))
    raise CommandError(f"--of {text!r} is not a quantity; write a name (--of v_out), a DC gain "
                       "(--of gain:v_out/v_in) or a pole's damping (--of damping:0, poles "
                       "counted from the slowest).")


@contextmanager
def _progress(n: int, enabled: bool):
    """A rich progress bar of samples done on standard error, or a no-op callback."""
    if not enabled:
        yield None
        return
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn

    with Progress(TextColumn("sampling"), BarColumn(), MofNCompleteColumn(),
                  TextColumn("samples"), console=Console(stderr=True), transient=True) as bar:
        task = bar.add_task("spread", total=n)

        def update(done: int, total: int) -> None:
            bar.update(task, completed=int(done), total=int(total))

        yield update


def cmd_spread(args, out=None) -> int:
    from .. import monte_carlo
    from ..report.spread import spread_to_dict, summarize_spread
    from .model_file import load_model

    out = out or sys.stdout
    loaded = load_model(args.model_file, args.model)
    system = loaded.system
    # every check of the command line before the (slow) first compile
    inputs, params = split_settings(system, parse_assignments(args.set, "--set"))
    tolerances = parse_tolerances(args.tol, system)
    if args.n < 1:
        raise CommandError(f"-n {args.n}: a tolerance study needs at least 1 sample.")
    if args.chunk is not None and args.chunk < 1:
        raise CommandError(f"--chunk {args.chunk}: give a whole number of samples >= 1.")
    of = tuple(parse_quantity(q) for q in args.of or ())
    targets = parse_targets(args.target, system)
    prepare_figure_directory(args.plots)
    with _progress(args.n, sys.stderr.isatty() and not args.json) as update:
        result = monte_carlo(system, tolerances, n=args.n, seed=args.seed, inputs=inputs,
                             params=params, of=of, targets=targets,
                             chunk=args.chunk, progress=update)
    summary = summarize_spread(system, result)
    return emit_report(args, out, summary, to_dict=spread_to_dict,
                       text="spread_text:render_spread",
                       figures="spread_figures:write_spread_figures")


def add_spread_command(sub, base: argparse.ArgumentParser) -> None:
    """Register ``spread`` on `sub` (`base` carries --set, --plots, --json, --debug)."""
    spread = sub.add_parser(
        "spread", parents=[base],
        help="tolerance study: spread of poles and quantities, yield, failed samples",
        description="Draw the --tol parameters and inputs of MODEL.py from their tolerances "
        "(Monte Carlo), solve every sample's steady state and poles in batches, and report "
        "the spread of the poles and --of quantities, the yield against --target specs and "
        "the failed samples; --plots DIR writes pole_scatter.png and histograms.png.")
    spread.add_argument("model_file", metavar="MODEL.py", help="the Python model file")
    spread.add_argument("--model", metavar="NAME",
                        help="which System, Circuit or function of the file to use")
    spread.add_argument("--tol", action="append", metavar="NAME=TOL",
                        help="tolerance of a parameter or input (repeatable): 1%% uniform, "
                        "0.5%%:normal (one standard deviation), 2m absolute")
    spread.add_argument("-n", type=int, default=1000, metavar="N",
                        help="number of samples (default 1000)")
    spread.add_argument("--seed", type=int, default=0, metavar="N",
                        help="seed of the random draws (default 0); same seed, same samples")
    spread.add_argument("--of", action="append", metavar="NAME",
                        help="quantity whose spread to report (repeatable): an unknown or output "
                        "name, gain:OUT/IN (DC gain) or damping:K (pole K, slowest first)")
    spread.add_argument("--target", action="append", metavar="SPEC",
                        help=f"target for the yield (repeatable): {FORMS.replace('%', '%%')}")
    spread.add_argument("--chunk", type=int, metavar="N",
                        help="samples per batch (default: chosen from n and the devices)")
    spread.add_argument("--figures", dest="plots", metavar="DIR", help="same as --plots DIR")
    spread.set_defaults(func=cmd_spread)
