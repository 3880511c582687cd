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
from . import devices as devices
from . import strategies as strategies
from ._system import Junction as Junction, System as System
from ._circuit import Circuit as Circuit, SmallSignal as SmallSignal

__version__ = "0.1.0"
from ._compile import CompiledSystem as CompiledSystem, compile as compile
from ._linear.linearize import linearize as linearize
from ._linear.model import LinearModel as LinearModel
from ._linear.normalize import NormalizedModel as NormalizedModel, normalize as normalize
from ._linear.pole_table import RootTable as RootTable
from ._steady.newton import NewtonOptions as NewtonOptions
from ._steady.operating_point import OperatingPoint as OperatingPoint
from ._steady.solve import steady_state as steady_state
from ._equilibria.find import steady_states as steady_states, SteadyStates as SteadyStates
from ._equilibria.find import SteadyStatesOptions as SteadyStatesOptions
from ._continuation.branch import Branch as Branch
from ._continuation.options import TrackOptions as TrackOptions
from ._continuation.track import track as track
from . import stimuli as stimuli
from ._transient import Transient as Transient, simulate as simulate
from . import targets as targets
from . import quantities as quantities
from ._design.sensitivities import sensitivities as sensitivities
from ._design.sensitivity_table import Sensitivities as Sensitivities
from ._trust.distortion import distortion as distortion
from ._trust.distortion_options import DistortionOptions as DistortionOptions
from ._trust.distortion_result import Distortion as Distortion
from ._trust.linear_response import linear_response as linear_response
from ._trust.compare import Comparison as Comparison, compare as compare
from ._trust.linear_range import linear_range as linear_range
from ._trust.range_result import LinearRange as LinearRange
from . import tolerances as tolerances
from ._design.sweep import sweep as sweep
from ._design.monte_carlo import monte_carlo as monte_carlo
from ._design.batch_result import MonteCarloResult as MonteCarloResult, SweepResult as SweepResult
from ._design.sizing import size as size
from ._design.sizing_result import SizingResult as SizingResult
from ._design.preferred_numbers import preferred_values as preferred_values
from ._design.preferred_numbers import round_to_series as round_to_series
