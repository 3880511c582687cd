"""Circuit outputs: what ``Circuit.output`` can measure.

An output is one of

- a node name: that node's voltage (V);
- the name of a branch-current unknown such as ``"i_L1"`` (A);
- a pair ``(a, b)`` of node names: ``v_a - v_b`` (V), either may be ground;
- a function ``fn(values)`` of a dict holding every unknown, input and
  parameter by name (``values["v_out"]``, ``values["i_L1"]``,
  ``values["R1"]``), returning a scalar.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import jax.numpy as jnp

from .._errors import ModelError, did_you_mean
from .assembly import Bias, Layout

Probe = Callable[[Bias], Any]


def make_probe(
    name: str, what: Any, layout: Layout, canon: Callable[[Any], Any], inputs: tuple[str, ...]
) -> tuple[Probe, str]:
    """The function of the bias that computes one output, and its natural unit."""
    nodes = set(layout.nodes) | {layout.ground}
    choices = list(layout.nodes) + list(layout.unknowns[len(layout.nodes) :])

    def node(x):
        x = canon(x)
        if x not in nodes:
            raise ModelError(
                f"output {name!r} refers to node {x!r}, which no element connects "
                f"({did_you_mean(str(x), choices)})."
            )
        return x

    if callable(what):
        return _FunctionProbe(what, name, layout, inputs), ""
    if isinstance(what, tuple):
        if len(what) != 2:
            raise ModelError(
                f"output {name!r} as a tuple must be a node pair (a, b) for "
                f"v_a - v_b, got {what!r}."
            )
        a, b = node(what[0]), node(what[1])
        return (lambda at: at.v(a) - at.v(b)), "V"
    if isinstance(what, str):
        c = canon(what)
        if c == layout.ground:
            raise ModelError(
                f"output {name!r} is the ground node {what!r}, whose voltage is "
                "zero by definition; name another node."
            )
        if c in nodes:
            return (lambda at: at.v(c)), "V"
        if what in layout.unknowns:
            k = layout.unknowns.index(what)
            return (lambda at: at.xe[k]), "A"
        node(what)  # raises with suggestions
    raise ModelError(
        f"output {name!r} must be a node name, a branch current name, a node pair "
        f"or a function, got {type(what).__name__} {what!r}."
    )


class _FunctionProbe:
    def __init__(self, fn, name: str, layout: Layout, inputs: tuple[str, ...]):
        self.fn, self.name, self.layout, self.inputs = fn, name, layout, inputs

    def __call__(self, at: Bias):
        values = {u: at.xe[k] for k, u in enumerate(self.layout.unknowns)}
        values.update({u: at.u[k] for k, u in enumerate(self.inputs)})
        values.update(at.p)
        try:
            y = jnp.asarray(self.fn(values))
        except KeyError as err:
            raise ModelError(
                f"output {self.name!r} function looked up {err.args[0]!r}, which is "
                "not an unknown, input or parameter of the circuit "
                f"({did_you_mean(str(err.args[0]), list(values))})."
            ) from None
        if y.shape != ():
            raise ModelError(
                f"output {self.name!r} function returned shape {y.shape}; it must return a scalar."
            )
        return y
