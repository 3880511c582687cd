"""adlin: exact, differentiable small-signal models of nonlinear analog circuits.

Public names are imported on first use (module-level ``__getattr__``): ``import
adlin`` costs JAX and the float64 policy only, and a command that never runs a
transient, a sizing or a Monte Carlo run never imports diffrax or
``scipy.optimize``.  ``adlin.System``, ``from adlin import simulate`` and
``adlin.stimuli`` work as before.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING

from . import _config  # noqa: F401  (float64 policy; must run first)
from ._errors import (
    AdlinError as AdlinError,
    AnalysisError as AnalysisError,
    FloatingNodeError as FloatingNodeError,
    HighIndexError as HighIndexError,
    ModelError as ModelError,
    ParameterError as ParameterError,
    SteadyStateError as SteadyStateError,
)

__version__ = "0.1.0"

# Public submodules, imported on first attribute access.
_SUBMODULES = frozenset(
    {"devices", "quantities", "stimuli", "strategies", "targets", "tolerances"}
)

# Public name -> the module that defines it.
_LAZY = {
    "Junction": "._system", "System": "._system",
    "Circuit": "._circuit", "SmallSignal": "._circuit",
    "CompiledSystem": "._compile", "compile": "._compile",
    "linearize": "._linear.linearize",
    "LinearModel": "._linear.model",
    "NormalizedModel": "._linear.normalize", "normalize": "._linear.normalize",
    "RootTable": "._linear.pole_table",
    "NewtonOptions": "._steady.newton",
    "OperatingPoint": "._steady.operating_point",
    "steady_state": "._steady.solve",
    "steady_states": "._equilibria.find", "SteadyStates": "._equilibria.find",
    "SteadyStatesOptions": "._equilibria.find",
    "Branch": "._continuation.branch",
    "TrackOptions": "._continuation.options",
    "track": "._continuation.track",
    "Transient": "._transient.result", "simulate": "._transient.simulate",
    "sensitivities": "._design.sensitivities",
    "Sensitivities": "._design.sensitivity_table",
    "distortion": "._trust.distortion",
    "DistortionOptions": "._trust.distortion_options",
    "Distortion": "._trust.distortion_result",
    "linear_response": "._trust.linear_response",
    "Comparison": "._trust.compare", "compare": "._trust.compare",
    "linear_range": "._trust.linear_range",
    "LinearRange": "._trust.range_result",
    "sweep": "._design.sweep",
    "monte_carlo": "._design.monte_carlo",
    "MonteCarloResult": "._design.batch_result", "SweepResult": "._design.batch_result",
    "size": "._design.sizing",
    "SizingResult": "._design.sizing_result",
    "preferred_values": "._design.preferred_numbers",
    "round_to_series": "._design.preferred_numbers",
}

__all__ = sorted(
    {"AdlinError", "AnalysisError", "FloatingNodeError", "HighIndexError", "ModelError",
     "ParameterError", "SteadyStateError"} | _SUBMODULES | set(_LAZY)
)


def __getattr__(name: str):
    """Import a public name's module on first use and keep the name here."""
    if name in _SUBMODULES:
        value = importlib.import_module(f".{name}", __name__)
    elif name in _LAZY:
        value = getattr(importlib.import_module(_LAZY[name], __name__), name)
    else:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | _SUBMODULES | set(_LAZY))


if TYPE_CHECKING:  # the same names, eagerly, for type checkers and editors
    from . import devices as devices
    from . import quantities as quantities
    from . import stimuli as stimuli
    from . import strategies as strategies
    from . import targets as targets
    from . import tolerances as tolerances
    from ._circuit import Circuit as Circuit, SmallSignal as SmallSignal
    from ._compile import CompiledSystem as CompiledSystem, compile as compile
    from ._continuation.branch import Branch as Branch
    from ._continuation.options import TrackOptions as TrackOptions
    from ._continuation.track import track as track
    from ._design.batch_result import MonteCarloResult as MonteCarloResult
    from ._design.batch_result import SweepResult as SweepResult
    from ._design.monte_carlo import monte_carlo as monte_carlo
    from ._design.preferred_numbers import preferred_values as preferred_values
    from ._design.preferred_numbers import round_to_series as round_to_series
    from ._design.sensitivities import sensitivities as sensitivities
    from ._design.sensitivity_table import Sensitivities as Sensitivities
    from ._design.sizing import size as size
    from ._design.sizing_result import SizingResult as SizingResult
    from ._design.sweep import sweep as sweep
    from ._equilibria.find import SteadyStates as SteadyStates
    from ._equilibria.find import SteadyStatesOptions as SteadyStatesOptions
    from ._equilibria.find import steady_states as steady_states
    from ._linear.linearize import linearize as linearize
    from ._linear.model import LinearModel as LinearModel
    from ._linear.normalize import NormalizedModel as NormalizedModel, normalize as normalize
    from ._linear.pole_table import RootTable as RootTable
    from ._steady.newton import NewtonOptions as NewtonOptions
    from ._steady.operating_point import OperatingPoint as OperatingPoint
    from ._steady.solve import steady_state as steady_state
    from ._system import Junction as Junction, System as System
    from ._transient.result import Transient as Transient
    from ._transient.simulate import simulate as simulate
    from ._trust.compare import Comparison as Comparison, compare as compare
    from ._trust.distortion import distortion as distortion
    from ._trust.distortion_options import DistortionOptions as DistortionOptions
    from ._trust.distortion_result import Distortion as Distortion
    from ._trust.linear_range import linear_range as linear_range
    from ._trust.linear_response import linear_response as linear_response
    from ._trust.range_result import LinearRange as LinearRange
