"""The ``adlin`` command: bias point, small-signal model and report of a circuit.

    adlin demo [--plots DIR] [--json] [--set NAME=VALUE ...] [--states search|skip]
    adlin analyze MODEL.py [--model NAME] [--set NAME=VALUE ...] [--guess NAME=VALUE ...]
                           [--input NAME --output NAME] [--states search|skip]
                           [--plots DIR] [--json]
    adlin track MODEL.py --param NAME --from A --to B [--show NAME] [--plots DIR] [--json]
    adlin check MODEL.py --input NAME --output NAME [--tol 1%] [--kind step|sine|both]
                         [--plots DIR] [--json]
    adlin size MODEL.py --free NAME=LOW..HIGH ... --target SPEC ... [--round E24]
                        [--plots DIR] [--json]
    adlin spread MODEL.py --tol NAME=1% ... [-n N] [--of NAME] [--target SPEC]
                          [--plots DIR] [--json]

Errors caused by the model or the command line (every `adlin.AdlinError`, a
missing model file, a malformed ``NAME=VALUE``) print one sentence to
standard error and exit with status 2; anything else prints one line and
exits with status 1.  ``--debug`` shows the traceback instead.

Compiled programs are kept in a persistent JAX compilation cache, so a second
run skips most of the compile time: ``$ADLIN_CACHE_DIR`` if set (an empty
value turns the cache off), else ``$XDG_CACHE_HOME/adlin/jax`` or
``~/.cache/adlin/jax``.
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Sequence
from pathlib import Path

from .options import (
    CommandError,
    _check_choice,
    emit_report,
    parse_assignments,
    parse_number,
    prepare_figure_directory,
    split_settings,
)

# parse_* and CommandError are re-exported: tests and subcommands import them from here
__all__ = ["CommandError", "build_parser", "main", "parse_assignments", "parse_number"]

PROG = "adlin"
EXIT_USER = 2
EXIT_INTERNAL = 1


# -- persistent compilation cache ---------------------------------------------------
def cache_dir() -> Path | None:
    """Where compiled programs are kept, or None when the cache is turned off."""
    given = os.environ.get("ADLIN_CACHE_DIR")
    if given is not None:
        return Path(given).expanduser() if given.strip() else None
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "adlin" / "jax"


def configure_cache() -> Path | None:
    """Point JAX's persistent compilation cache at `cache_dir()`.

    Must run before the first compilation.  Every program is cached, however
    small or quick to compile: the CLI compiles the same few programs on
    every run.  A directory that cannot be created leaves the cache off.
    """
    import jax

    path = cache_dir()
    if path is None:
        return None
    try:
        path.mkdir(parents=True, exist_ok=True)
    except OSError:
        return None
    jax.config.update("jax_compilation_cache_dir", str(path))
    jax.config.update("jax_persistent_cache_min_compile_time_secs", 0.0)
    jax.config.update("jax_persistent_cache_min_entry_size_bytes", -1)
    return path


# -- the commands -------------------------------------------------------------------
def _demo_notes(op, model, devices) -> list:
    from ..report import Quantity
    from ..scenarios import ideal_output, predicted_error, sensor_ldo_loop

    loop = sensor_ldo_loop(op=op, model=model)
    ideal = ideal_output(
        {k: float(v) for k, v in op.params.items()}, {k: float(v) for k, v in op.inputs.items()}
    )
    return [
        Quantity("ideal output v_ref (1 + R1/R2)", ideal, "V"),
        Quantity("output error v_out - ideal", float(op["v_out"]) - ideal, "V"),
        Quantity(
            "predicted error g_m,P R_out (v_gate - v_mir) / (1 + T)",
            predicted_error(op, devices, loop),
            "V",
        ),
        Quantity("loop gain T(0)", loop.dc, ""),
        Quantity("loop gain T(0) in dB", loop.dc_db, "dB"),
        Quantity("loop crossover frequency", loop.crossover_hz, "Hz"),
        Quantity("phase margin", loop.phase_margin_deg, "deg"),
    ]


def analyze_and_report(system, circuit, args, *, guess=None, notes_for=None, out=None) -> int:
    """Solve, linearize, and print the report (text or JSON); write figures if asked."""
    from .. import report
    from .._linear.linearize import linearize
    from .._steady.solve import steady_state

    out = out or sys.stdout
    # Every check of the command line before the (slow) first solve.
    inputs, params = split_settings(system, parse_assignments(args.set, "--set"))
    guess = dict(guess or {})
    guess.update(parse_assignments(getattr(args, "guess", None), "--guess"))
    _check_choice("--input", args.input, system.inputs, system.name)
    _check_choice("--output", args.output, system.outputs, system.name)
    prepare_figure_directory(args.plots)
    op = steady_state(system, inputs=inputs, params=params, guess=guess or None)
    model = linearize(system, op)
    devices = circuit.small_signal(op) if circuit is not None else None
    notes = notes_for(op, model, devices) if notes_for is not None else []
    summary = report.summarize(
        system, op, model, devices=devices, input=args.input, output=args.output, notes=notes
    )
    if args.states == "search":
        summary.states = search_states(system, inputs, params, op)
    from ..report.json import to_dict

    return emit_report(args, out, summary, to_dict=to_dict, text="text:render",
                       figures="figures:write_figures")


def search_states(system, inputs, params, op):
    """The other steady states at these values (source ramp + deflation from `op`)."""
    from .._equilibria.find import steady_states
    from ..report.states import summarize_states

    states = steady_states(system, inputs, params, guesses=(op,),
                           ramp=bool(system.inputs))
    return summarize_states(system, states, op)


def cmd_demo(args, out=None) -> int:
    from ..scenarios import sensor_ldo

    circuit = sensor_ldo()
    return analyze_and_report(circuit.build(), circuit, args, notes_for=_demo_notes, out=out)


def cmd_analyze(args, out=None) -> int:
    from .model_file import load_model

    loaded = load_model(args.model_file, args.model)
    return analyze_and_report(loaded.system, loaded.circuit, args, out=out)


# -- argument parsing ---------------------------------------------------------------
class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors and our exit status."""

    def error(self, message: str):  # type: ignore[override]
        self.exit(EXIT_USER, f"{self.prog}: error: {message}; see '{self.prog} --help'.\n")


def build_parser() -> argparse.ArgumentParser:
    from .check import add_check_command
    from .size import add_size_command
    from .spread import add_spread_command
    from .track import add_track_command

    base = argparse.ArgumentParser(add_help=False)
    base.add_argument(
        "--debug",
        action="store_true",
        default=argparse.SUPPRESS,
        help="show full tracebacks on errors",
    )
    base.add_argument(
        "--set",
        action="append",
        metavar="NAME=VALUE",
        help="override an input or parameter (repeatable; SI prefixes allowed, e.g. R1=4.7k)",
    )
    base.add_argument(
        "--json", action="store_true", help="print the report as JSON instead of tables"
    )
    base.add_argument(
        "--plots", metavar="DIR",
        help="write the command's PNG figures into DIR (created if missing; the report lists them)"
    )
    common = argparse.ArgumentParser(add_help=False, parents=[base])
    common.add_argument(
        "--input", metavar="NAME", help="input for the zero table and the Bode plot (default: all)"
    )
    common.add_argument(
        "--output",
        metavar="NAME",
        help="output for the zero table and the Bode plot (default: all)",
    )

    parser = _Parser(
        prog=PROG,
        description="Bias point and exact small-signal model of a nonlinear circuit: poles, "
        "zeros, gains, device parameters and a normalized model.",
        epilog="Compiled programs are kept in $ADLIN_CACHE_DIR (default ~/.cache/adlin/jax; "
        "empty turns the cache off), so repeated runs start faster. Results are models: "
        "measure prototypes; mains or high-energy designs follow local electrical codes and "
        "licensed practice.",
    )
    parser.add_argument(
        "--debug", action="store_true", default=False, help="show full tracebacks on errors"
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    demo = sub.add_parser(
        "demo",
        parents=[common],
        help="run the built-in sensor-node LDO regulator end to end",
        description="Bias point, device small-signal parameters, poles, "
        "zeros, DC gains, normalized model and loop gain of "
        "the built-in sensor-node LDO (Li-ion cell to 1.8 V).",
    )
    demo.add_argument(
        "--states", choices=("search", "skip"), default="skip",
        help="search for other steady states (source ramp and deflation); default skip: the "
        "regulator has one by design",
    )
    demo.set_defaults(func=cmd_demo, guess=None)
    analyze = sub.add_parser(
        "analyze",
        parents=[common],
        help="analyze a Python model file that defines a System or Circuit",
        description="Load MODEL.py (a module-level adlin.System or "
        "adlin.Circuit, or a function returning one), find "
        "its bias point and report its small-signal model.",
    )
    analyze.add_argument("model_file", metavar="MODEL.py", help="the Python model file")
    analyze.add_argument(
        "--model", metavar="NAME", help="which System, Circuit or function of the file to use"
    )
    analyze.add_argument(
        "--guess",
        action="append",
        metavar="NAME=VALUE",
        help="starting value of an unknown for the bias-point solve (repeatable)",
    )
    analyze.add_argument(
        "--states", choices=("search", "skip"), default="search",
        help="search for other steady states and report which one is used (default search; "
        "skip saves the extra compile time)",
    )
    analyze.set_defaults(func=cmd_analyze)
    add_track_command(sub, base)
    add_check_command(sub, common)
    add_size_command(sub, base)
    add_spread_command(sub, base)
    return parser


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help(sys.stderr)
        return EXIT_USER
    debug = bool(getattr(args, "debug", False))
    from .._errors import AdlinError

    try:
        configure_cache()
        return int(args.func(args))
    except KeyboardInterrupt:
        if debug:
            raise
        print(f"{PROG}: interrupted.", file=sys.stderr)
        return 130
    except (AdlinError, CommandError) as err:
        if debug:
            raise
        print(f"{PROG}: error: {_one_line(err)}", file=sys.stderr)
        return EXIT_USER
    except Exception as err:  # a bug in adlin or a library: say so, without a traceback
        if debug:
            raise
        text = _one_line(err)
        text = text if len(text) <= 300 else text[:297] + "..."
        print(
            f"{PROG}: internal error ({type(err).__name__}: {text}); run again with "
            "--debug for the traceback and report it.",
            file=sys.stderr,
        )
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
