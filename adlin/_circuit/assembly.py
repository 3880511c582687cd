"""From elements to the three System functions f, q and g.

The unknowns are the node voltages ``v_<node>`` (every node but ground, in
order of first use) followed by the branch currents ``i_<element>``.  Each
element adds its contributions to rows of an extended residual of length
n + 1 whose last row belongs to ground and is dropped, so that no element has
to test for ground.  All row indices are plain Python integers fixed at build
time; the loop over elements runs once, while JAX traces, and the whole
residual is one scatter-add (``.at[rows].add``).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any

import jax.numpy as jnp
import numpy as np

from .values import Ref

Stamp = list[tuple[int, Any]]


class Layout:
    """Positions of node voltages, branch currents and inputs in x and u."""

    def __init__(
        self, nodes: Sequence[str], branches: Sequence[str], ground: str, inputs: Sequence[str]
    ):
        self.nodes = tuple(nodes)
        self.branches = tuple(branches)  # element names that carry a branch current
        self.ground = ground
        self.node_index = {node: k for k, node in enumerate(self.nodes)}
        self.node_index[ground] = len(self.nodes) + len(self.branches)
        self.branch_index = {name: len(self.nodes) + k for k, name in enumerate(self.branches)}
        self.input_index = {name: k for k, name in enumerate(inputs)}
        self.n = len(self.nodes) + len(self.branches)
        self.unknowns = tuple(f"v_{node}" for node in self.nodes) + tuple(
            f"i_{name}" for name in self.branches
        )

    def unknown_of_node(self, node: str) -> str | None:
        """Unknown name of a node voltage, None for ground."""
        return None if node == self.ground else f"v_{node}"


class Bias:
    """What element stamps see while JAX traces: voltages, currents, values."""

    def __init__(self, layout: Layout, x, u, p: Mapping[str, Any]):
        self.layout = layout
        x = jnp.asarray(x)
        self.xe = jnp.concatenate([x, jnp.zeros((1,), dtype=x.dtype)])
        self.u = u
        self.p = p

    def row(self, node: str) -> int:
        """Residual row of a node (the dropped ground row for ground)."""
        return self.layout.node_index[node]

    def branch_row(self, element: str) -> int:
        return self.layout.branch_index[element]

    def v(self, node: str):
        return self.xe[self.layout.node_index[node]]

    def i(self, element: str):
        return self.xe[self.layout.branch_index[element]]

    def value(self, ref: Ref):
        if ref.kind == "param":
            return self.p[ref.name]
        return self.u[self.layout.input_index[ref.name]]

    def local(self, pmap: Mapping[str, Ref]) -> dict[str, Any]:
        """An element's own parameters under their local names."""
        return {k: self.value(r) for k, r in pmap.items()}


def scatter(n: int, stamp: Stamp, dtype):
    """Sum the stamp into a vector of length n + 1 (last entry: ground)."""
    if not stamp:
        return jnp.zeros((n + 1,), dtype=dtype)
    rows = np.asarray([r for r, _ in stamp], dtype=np.int32)
    vals = jnp.stack([jnp.asarray(v, dtype=dtype) for _, v in stamp])
    return jnp.zeros((n + 1,), dtype=dtype).at[rows].add(vals)


class Assembly:
    """The circuit equations, fixed at build time.

    `current`, `charge` and `output` are the f, q and g handed to `System`; they
    are bound methods of this object, so a System compares and hashes by it.
    """

    def __init__(
        self, layout: Layout, elements: Sequence[Any], probes: Sequence[Callable[[Bias], Any]]
    ):
        self.layout = layout
        self.elements = tuple(elements)
        self.storage = tuple(e for e in self.elements if e.stores_charge)
        self.probes = tuple(probes)

    def _dtype(self, x):
        return jnp.result_type(jnp.asarray(x).dtype, jnp.float32)

    def current_with_ground(self, x, u, p):
        """f extended by one last entry: the current leaving the ground node."""
        at = Bias(self.layout, x, u, p)
        stamp: Stamp = []
        for element in self.elements:
            stamp.extend(element.currents(at))
        return scatter(self.layout.n, stamp, self._dtype(x))

    def charge_with_ground(self, x, p):
        at = Bias(self.layout, x, None, p)
        stamp: Stamp = []
        for element in self.storage:
            stamp.extend(element.charges(at))
        return scatter(self.layout.n, stamp, self._dtype(x))

    def current(self, x, u, p):
        return self.current_with_ground(x, u, p)[:-1]

    def charge(self, x, p):
        return self.charge_with_ground(x, p)[:-1]

    def output(self, x, u, p):
        at = Bias(self.layout, x, u, p)
        return jnp.stack([jnp.asarray(probe(at), dtype=self._dtype(x)) for probe in self.probes])
