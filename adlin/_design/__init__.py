"""Design layer: sensitivities of chosen quantities and design targets.

Later sizing and tolerance (Monte Carlo) modules join this package.
"""

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
