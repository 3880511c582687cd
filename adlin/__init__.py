"""adlin: exact, differentiable small-signal models of nonlinear analog circuits."""

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
from ._system import Junction as Junction, System as System

__version__ = "0.1.0"
