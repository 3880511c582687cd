"""Strategy names and their configuration classes."""

from __future__ import annotations

from ..._errors import ParameterError, did_you_mean
from .base import AbstractStrategy


def _classes():
    from .auto import Auto
    from .conductance import ConductanceStepping
    from .homotopy import NewtonHomotopy
    from .newton import Newton
    from .pseudo_transient import PseudoTransient
    from .source import SourceStepping

    return {c.name: c for c in (Auto, Newton, ConductanceStepping, SourceStepping,
                                PseudoTransient, NewtonHomotopy)}


def strategy_names() -> tuple[str, ...]:
    return tuple(_classes())


def resolve(strategy, *, allow_auto: bool = True) -> AbstractStrategy:
    """A strategy configuration object from a name or an instance.

    **Raises:** `ParameterError` for an unknown name (with the closest valid
    names) or an object that is not a strategy.
    """
    classes = _classes()
    if isinstance(strategy, str):
        key = strategy.strip().lower().replace("_", "-")
        if key not in classes:
            raise ParameterError(
                f"unknown steady-state strategy {strategy!r}: "
                f"{did_you_mean(key, tuple(classes))}; or pass a configuration object from "
                "adlin.strategies.")
        strategy = classes[key]()
    if not isinstance(strategy, AbstractStrategy):
        raise ParameterError(
            f"strategy must be a name ({', '.join(repr(k) for k in classes)}) or an object from "
            f"adlin.strategies, got {type(strategy).__name__}.")
    if not allow_auto and strategy.name == "auto":
        raise ParameterError("Auto cannot be nested inside Auto(order=...); list the "
                             "strategies themselves.")
    return strategy
