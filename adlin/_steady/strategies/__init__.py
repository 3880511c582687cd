"""Steady-state strategies: configuration objects and their pure-JAX searches."""

from .auto import DEFAULT_ORDER as DEFAULT_ORDER
from .auto import Auto as Auto
from .base import AbstractStrategy as AbstractStrategy
from .conductance import ConductanceStepping as ConductanceStepping
from .homotopy import NewtonHomotopy as NewtonHomotopy
from .newton import Newton as Newton
from .problem import Candidate as Candidate
from .problem import Problem as Problem
from .pseudo_transient import PseudoTransient as PseudoTransient
from .registry import resolve as resolve
from .registry import strategy_names as strategy_names
from .source import SourceStepping as SourceStepping
