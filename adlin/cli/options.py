"""Command-line values: numbers with SI prefixes, NAME=VALUE lists, name checks.

Shared by every subcommand.  Malformed values raise `CommandError`, which
the entry point prints as one sentence with exit status 2.
"""

from __future__ import annotations

from collections.abc import Sequence

from .._units import parse_number as parse_number  # re-exported for the commands


class CommandError(Exception):
    """A malformed command line that argparse itself does not catch."""


# -- NAME=VALUE ---------------------------------------------------------------------
def parse_assignments(items: Sequence[str] | None, option: str) -> dict[str, float]:
    """``["R1=10k", "v_in=0.6"]`` -> ``{"R1": 1e4, "v_in": 0.6}``.

    **Raises:** `CommandError` naming the malformed item.
    """
    out: dict[str, float] = {}
    for item in items or ():
        name, sep, value = item.partition("=")
        name = name.strip()
        if not sep or not name:
            raise CommandError(
                f"{option} {item!r} is not NAME=VALUE; write it like "
                f"{option} R1=4.7k (SI prefixes T G M k m u n p f allowed)."
            )
        try:
            out[name] = parse_number(value)
        except ValueError:
            raise CommandError(
                f"{option} {item!r}: {value.strip()!r} is not a finite number; "
                "write e.g. 4.7e3, 4.7k or 0.6."
            ) from None
    return out


def split_settings(system, settings: dict[str, float]) -> tuple[dict[str, float], dict[str, float]]:
    """Route ``--set`` values to the System's inputs and parameters by name.

    **Raises:** `ParameterError` for a name that is neither.
    """
    from .._errors import ParameterError, did_you_mean

    inputs, params = {}, {}
    valid = list(system.inputs) + list(system.param_names)
    for name, value in settings.items():
        if name in system.inputs:
            inputs[name] = value
        elif name in system.param_names:
            params[name] = value
        else:
            hint = did_you_mean(name, valid)
            raise ParameterError(
                f"--set {name}=...: {system.name!r} has no input or parameter "
                f"{name!r}; {hint}{'' if hint.endswith('?') else '.'}"
            )
    return inputs, params


def _check_choice(option: str, name: str | None, valid: Sequence[str], model: str) -> None:
    from .._errors import ParameterError, did_you_mean

    if name is not None and name not in valid:
        hint = did_you_mean(name, valid)
        raise ParameterError(
            f"{option} {name}: {model!r} has no such {option[2:]}; "
            f"{hint}{'' if hint.endswith('?') else '.'}"
        )


def prepare_figure_directory(directory: str | None) -> None:
    """Create the ``--plots`` directory before any slow work starts.

    **Raises:** `CommandError` naming the directory when it cannot be created.
    """
    if not directory:
        return
    from pathlib import Path

    try:
        Path(directory).mkdir(parents=True, exist_ok=True)
    except OSError as err:
        raise CommandError(
            f"cannot create the figure directory '{directory}' ({err.strerror or err}); "
            "choose a writable directory with --plots DIR.") from err


def write_figures_into(directory: str, write):
    """Call ``write(directory)`` and turn a file-system error into a `CommandError`."""
    try:
        return write(directory)
    except OSError as err:
        raise CommandError(
            f"cannot write figures to '{directory}' ({err.strerror or err}); choose a "
            "writable directory with --plots DIR.") from err


def emit_report(args, out, summary, *, to_dict, text: str, figures: str | None) -> int:
    """Write a command's figures (with ``--plots``), then print its report as text or JSON.

    `text` and `figures` name "module:function" in `adlin.report`, imported only
    when used (matplotlib is slow to import); the figure writer returns one
    path or a list of them.  `figures` None writes none.  Returns exit status 0.
    """
    import importlib

    def load(where: str):
        module, function = where.split(":")
        return getattr(importlib.import_module(f"adlin.report.{module}"), function)

    written = []
    if args.plots and figures:
        paths = write_figures_into(args.plots, lambda d: load(figures)(summary, d))
        written = [paths] if paths and not isinstance(paths, list) else list(paths or [])
    if args.json:
        import json

        data = to_dict(summary)
        data["figures"] = [str(p) for p in written]
        out.write(json.dumps(data, indent=2, allow_nan=False) + "\n")
    else:
        from ..report.text import make_console

        console = make_console(out)
        load(text)(summary, console)
        if written:
            console.print("Figures: " + ", ".join(str(p) for p in written))
    return 0


def parse_option_number(option: str, text: str) -> float:
    """The value of a numeric option such as ``--from 10k``.

    **Raises:** `CommandError` naming the option when `text` is not a finite number.
    """
    try:
        return parse_number(text)
    except ValueError:
        raise CommandError(f"{option} {text!r} is not a finite number; write e.g. 2.5, "
                           "10k or 4.7u.") from None
