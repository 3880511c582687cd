"""Design layer: sensitivities of chosen quantities and design targets.

Later sizing and tolerance (Monte Carlo) modules join this package.
"""

from .batch_result import BatchResult as BatchResult
from .batch_result import MonteCarloResult as MonteCarloResult
from .batch_result import SweepResult as SweepResult
from .monte_carlo import monte_carlo as monte_carlo
from .preferred_numbers import preferred_values as preferred_values
from .preferred_numbers import round_to_series as round_to_series
from .quantities import AbstractQuantity as AbstractQuantity
from .quantities import Bias as Bias
from .quantities import DCGain as DCGain
from .quantities import Expression as Expression
from .quantities import Pole as Pole
from .quantities import PoleDamping as PoleDamping
from .quantities import PoleFrequency as PoleFrequency
from .quantities import TransferMagnitude as TransferMagnitude
from .sensitivities import sensitivities as sensitivities
from .sensitivity_table import Sensitivities as Sensitivities
from .sizing import size as size
from .sizing_result import SizingResult as SizingResult
from .sweep import sweep as sweep
