"""Exceptions raised by adlin.

Every exception is an `AdlinError`, and every message is one sentence (or two)
that names the culprit (unknown, node, parameter, file) and says what to try.
The command line prints the message alone and exits with status 2.
"""

from __future__ import annotations


class AdlinError(Exception):
    """Base class of every error adlin raises on purpose."""


class ModelError(AdlinError):
    """The model is malformed: shapes, names, non-finite values, structure."""


class ParameterError(ModelError, KeyError):
    """A parameter or input name is unknown or missing."""

    def __str__(self) -> str:  # KeyError would otherwise quote the message
        return str(self.args[0]) if self.args else ""


class FloatingNodeError(ModelError):
    """An unknown that no equation depends on, or a node without a DC path."""


class HighIndexError(ModelError):
    """The algebraic part of the model is singular (differential index > 1)."""


class SteadyStateError(AdlinError):
    """The steady-state solver did not converge."""


class AnalysisError(AdlinError):
    """A linear analysis was asked for something it cannot give."""


def did_you_mean(name: str, valid: list[str] | tuple[str, ...]) -> str:
    """A short hint naming the closest valid names, for error messages."""
    import difflib

    close = difflib.get_close_matches(name, list(valid), n=3, cutoff=0.5)
    if close:
        return f"the closest valid {'name is' if len(close) == 1 else 'names are'} " + \
            ", ".join(repr(c) for c in close)
    shown = ", ".join(repr(v) for v in list(valid)[:12])
    more = "" if len(valid) <= 12 else f" (and {len(valid) - 12} more)"
    return f"valid names are {shown}{more}" if valid else "there are no valid names"
