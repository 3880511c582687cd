"""Nonlinear transients: stimuli, the index-1 vector field, `simulate`, `Transient`.

`simulate` and `Transient` load on first use (module `__getattr__`): they bring
in diffrax (about 0.4 s), which `adlin.stimuli` and the linear responses that
import this package's `stimuli` module never need.
"""

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from .result import Transient as Transient
    from .simulate import simulate as simulate

__all__ = ["Transient", "simulate"]


def __getattr__(name: str):
    if name == "simulate":
        from .simulate import simulate

        return simulate
    if name == "Transient":
        from .result import Transient

        return Transient
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
