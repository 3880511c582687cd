"""Nonlinear transients: stimuli, the index-1 vector field, `simulate`, `Transient`."""

from .result import Transient as Transient
from .simulate import simulate as simulate
