"""``adlin check``: how far the small-signal model of one input/output pair holds.

    adlin check MODEL.py [--input NAME] [--output NAME] [--tol 1%] [--kind step|sine|both]
                         [--f-hz F] [--amplitudes A,B,...] [--set NAME=VALUE ...]
                         [--guess NAME=VALUE ...] [--plots DIR] [--json]

Prints the linear range of each polarity (steps and sines), a distortion
table (predicted next to measured) at a few amplitudes, and with ``--plots``
writes ``error_vs_amplitude.png`` and ``waveforms.png``.  Progress messages
run on standard error when it is a terminal.
"""

from __future__ import annotations

import argparse
import sys
from contextlib import contextmanager

import numpy as np

from .options import (
    CommandError,
    emit_report,
    parse_assignments,
    parse_number,
    parse_option_number,
    prepare_figure_directory,
    split_settings,
)

# Distortion is shown at these fractions of the smallest linear-range limit.
DISTORTION_FRACTIONS = (0.1, 0.3, 1.0)


def parse_tolerance(text: str) -> float:
    """'1%' -> 0.01, '0.5 %' -> 0.005, '0.02' -> 0.02; must lie in (0, 1)."""
    body = text.strip()
    percent = body.endswith("%")
    try:
        value = parse_number(body[:-1] if percent else body)
    except ValueError:
        value = float("nan")
    value = value / 100 if percent else value
    if not 0 < value < 1:
        raise CommandError(f"--tol {text!r} is not a tolerance between 0 and 100 %; write e.g. "
                           "--tol 1% or --tol 0.01.")
    return value


def parse_amplitudes(text: str | None) -> list[float] | None:
    if text is None:
        return None
    out = []
    for item in text.split(","):
        try:
            value = parse_number(item)
        except ValueError:
            value = float("nan")
        if not value > 0:
            raise CommandError(f"--amplitudes {text!r}: {item.strip()!r} is not a positive "
                               "number; write e.g. --amplitudes 1m,5m,20m.")
        out.append(value)
    return out


def _one_of(option: str, name: str | None, names: tuple[str, ...], model: str) -> str:
    from .._errors import ParameterError, did_you_mean

    if name is None:
        if len(names) == 1:
            return names[0]
        what = option[2:]
        if not names:
            raise ParameterError(f"{model!r} has no {what}s; adlin check needs one.")
        raise ParameterError(f"{model!r} has several {what}s ({', '.join(names)}); choose one "
                             f"with {option} NAME.")
    if name not in names:
        raise ParameterError(f"{option} {name}: {model!r} has no such {option[2:]}; "
                             f"{did_you_mean(name, names)}.")
    return name


@contextmanager
def _status(enabled: bool):
    if not enabled:
        yield None
        return
    from rich.console import Console

    with Console(stderr=True).status("checking the linear range") as status:
        yield lambda message: status.update(str(message))


def _distortion_amplitudes(ranges, given):
    if given is not None:
        return given
    limits = [abs(v) for r in ranges
              for v, b in ((r.positive, r.positive_bracket), (r.negative, r.negative_bracket))
              if np.isfinite(b[1]) and v != 0]
    if limits:
        base = min(limits)
    else:  # no limit anywhere: show the largest amplitude the search tried
        base = float(np.max(np.abs(np.concatenate([np.asarray(r.amplitudes) for r in ranges]))))
    return [f * base for f in DISTORTION_FRACTIONS]


def _waveforms(system, op, r, inp, out_name):
    from .. import stimuli
    from .._trust.compare import compare
    from ..report.trust import Waveforms, edge_amplitude, waveform_position

    a = edge_amplitude(r)
    if a is None:
        return []
    shown = []
    for sign, polarity in ((1.0, "positive"), (-1.0, "negative")):
        stim = (stimuli.Step(inp, sign * a) if r.kind == "step"
                else stimuli.Sine(inp, sign * a, r.f_hz))
        c = compare(system, op, stim, r.t_end, output=out_name, throw=False)
        y_nl, y_lin = c[out_name]
        label = (f"{'step' if r.kind == 'step' else 'sine'} of {sign * a:+.4g} on {inp}"
                 f" ({polarity}: {waveform_position(r, sign, a)})")
        shown.append(Waveforms(label, np.asarray(c.t), np.asarray(y_nl), np.asarray(y_lin),
                               float(c.peak_error[0])))
    return shown


def cmd_check(args, out=None) -> int:
    from .._steady.solve import steady_state
    from .._trust.distortion import distortion
    from .._trust.linear_range import linear_range
    from ..report.trust import CheckSummary, check_to_dict
    from .model_file import load_model

    out = out or sys.stdout
    loaded = load_model(args.model_file, args.model)
    system = loaded.system
    inputs, params = split_settings(system, parse_assignments(args.set, "--set"))
    guess = parse_assignments(args.guess, "--guess")
    inp = _one_of("--input", args.input, system.inputs, system.name)
    out_name = _one_of("--output", args.output, system.outputs, system.name)
    tol = parse_tolerance(args.tol)
    amplitudes = parse_amplitudes(args.amplitudes)
    f_hz = None if args.f_hz is None else parse_option_number("--f-hz", args.f_hz)
    prepare_figure_directory(args.plots)
    op = steady_state(system, inputs=inputs, params=params, guess=guess or None)
    kinds = ("step", "sine") if args.kind == "both" else (args.kind,)
    notes: list[str] = []
    with _status(sys.stderr.isatty() and not args.json) as progress:
        ranges = [linear_range(system, op, input=inp, output=out_name, tol=tol, kind=k,
                               f_hz=f_hz if k == "sine" else None, progress=progress)
                  for k in kinds]
        sine_f = f_hz or next((r.f_hz for r in ranges if r.kind == "sine"), None)
        result = None
        if sine_f is None:
            notes.append("no distortion table: give --f-hz (or --kind sine/both) for the tone.")
        else:
            if progress:
                progress("measuring distortion")
            result = distortion(system, op, input=inp, output=out_name,
                                amplitude=_distortion_amplitudes(ranges, amplitudes), f_hz=sine_f)
        waves = []
        if args.plots:
            if progress:
                progress("drawing waveforms at the edge of the range")
            for r in ranges:
                waves += _waveforms(system, op, r, inp, out_name)
    summary = CheckSummary(
        name=system.name, input=inp, output=out_name, input_unit=system.unit(inp),
        output_unit=system.unit(out_name), bias_input=float(op[inp]),
        bias_output=float(op[out_name]), tol=tol, ranges=ranges, distortion=result,
        waveforms=waves, notes=notes)
    return emit_report(args, out, summary, to_dict=check_to_dict,
                       text="trust_text:render_check",
                       figures="trust_figures:write_check_figures")


def add_check_command(sub, common: argparse.ArgumentParser) -> None:
    """Register ``check`` on `sub` (`common` carries --set, --input, --output, --plots...)."""
    check = sub.add_parser(
        "check", parents=[common],
        help="how far the small-signal model holds: linear range per polarity, distortion",
        description="Find, for each polarity, the largest step and sine amplitudes on --input "
        "for which --output stays within --tol of the small-signal model, and tabulate "
        "harmonic distortion (predicted next to measured) at a few amplitudes; --plots DIR "
        "writes error_vs_amplitude.png and waveforms.png.")
    check.add_argument("model_file", metavar="MODEL.py", help="the Python model file")
    check.add_argument("--model", metavar="NAME",
                       help="which System, Circuit or function of the file to use")
    check.add_argument("--tol", default="1%", metavar="TOL",
                       help="allowed error relative to the linear swing (default 1%%)")
    check.add_argument("--kind", choices=("step", "sine", "both"), default="both",
                       help="stimuli to check (default both)")
    check.add_argument("--f-hz", dest="f_hz", metavar="F",
                       help="sine frequency in Hz (default a decade below the slowest pole)")
    check.add_argument("--amplitudes", metavar="A,B,...",
                       help="distortion amplitudes (default 0.1, 0.3 and 1 times the smallest "
                       "limit found)")
    check.add_argument("--guess", action="append", metavar="NAME=VALUE",
                       help="starting value of an unknown for the bias-point solve")
    check.set_defaults(func=cmd_check)
