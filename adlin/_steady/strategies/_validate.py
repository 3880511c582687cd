"""Field checks shared by the strategy configuration objects."""

from __future__ import annotations

from ..._errors import ParameterError


def positive(owner: str, **values: float) -> None:
    for name, v in values.items():
        if not (v > 0):
            raise ParameterError(f"{owner}.{name} must be positive, got {v!r}.")


def at_least(owner: str, low: int, **values: int) -> None:
    for name, v in values.items():
        if int(v) != v or v < low:
            raise ParameterError(f"{owner}.{name} must be an integer of at least {low}, got {v!r}.")


def ordered(owner: str, small: str, large: str, a: float, b: float) -> None:
    if not (a < b):
        raise ParameterError(
            f"{owner}.{small} ({a!r}) must be smaller than {owner}.{large} ({b!r}).")
