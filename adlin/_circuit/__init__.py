"""Circuits from elements between named nodes (modified nodal analysis)."""

from .builder import Circuit as Circuit
from .small_signal import SmallSignal as SmallSignal
