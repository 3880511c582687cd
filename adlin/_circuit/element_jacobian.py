"""Circuit Jacobians element by element, assembled without scatter.

`jax.jacfwd` of the whole residual pushes one tangent per unknown through every
element: for the n-unknown circuit that is n times the work of the residual,
although each element reads only its own two to five unknowns.  Here each
element is differentiated with respect to the unknowns and inputs it reads
(its terminal voltages, its own and its controlling branch currents, the
inputs among its values), and the blocks are added into the dense matrices
with plain sums fixed at trace time, the element stamps of modified nodal
analysis (Ho, Ruehli & Brennan, "The modified nodal approach to network
analysis", IEEE Trans. Circuits Syst. 22(6), 1975; Vlach & Singhal, Computer
Methods for Circuit Analysis and Design, 2nd ed., 1994, ch. 3 on element
stamps, from memory).  The values are the exact derivatives of `Assembly.current`
and `Assembly.charge`: each entry is the same sum of element derivatives,
possibly added in another order.

No scatter is emitted: with jaxlib 0.10.2 on CPU, a scatter-add assembling the
blocks inside the batched solve + linearize program made its second execution
hang (see DEVELOPERS.md).  The sums become one concatenation of scalars.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Mapping
from typing import Any

import jax
import jax.numpy as jnp

from .assembly import Assembly, Bias, Layout


class UndeclaredRead(Exception):
    """An element read an unknown or input outside its declared terminals (internal)."""


class _LocalBias(Bias):
    """The bias one element sees: its own unknowns and inputs come from a short vector z."""

    def __init__(self, layout: Layout, slots: Mapping[int, int], input_slots: Mapping[int, int],
                 z, u, p):
        self.layout = layout
        self.slots = slots
        self.input_slots = input_slots
        self.z = z
        self.u = u
        self.p = p

    def _unknown(self, index: int):
        if index == self.layout.n:  # ground
            return jnp.zeros((), dtype=self.z.dtype)
        if index not in self.slots:
            raise UndeclaredRead(index)
        return self.z[self.slots[index]]

    def v(self, node: str):
        return self._unknown(self.layout.node_index[node])

    def i(self, element: str):
        return self._unknown(self.layout.branch_index[element])

    def value(self, ref):
        if ref.kind == "param":
            return self.p[ref.name]
        k = self.layout.input_index[ref.name]
        if k in self.input_slots:
            return self.z[self.input_slots[k]]
        if self.u is None:
            raise UndeclaredRead(ref.name)
        return self.u[k]


def _reads(layout: Layout, element) -> tuple[tuple[int, ...], tuple[int, ...]]:
    """(unknown indices, input indices) an element may read, from its declarations."""
    unknowns = [layout.node_index[node] for node in element.nodes()]
    if element.has_branch:
        unknowns.append(layout.branch_index[element.name])
    control = getattr(element, "control", None)
    if isinstance(control, str) and control in layout.branch_index:
        unknowns.append(layout.branch_index[control])
    unknowns = tuple(dict.fromkeys(k for k in unknowns if k != layout.n))
    inputs = tuple(dict.fromkeys(
        layout.input_index[r.name] for r in element.refs().values() if r.kind == "input"))
    return unknowns, inputs


class ElementJacobians:
    """Residual, charges and their exact Jacobians of an `Assembly`, element by element.

    **Arguments:**

    - `assembly`: the circuit equations (from `Circuit.build`).
    """

    def __init__(self, assembly: Assembly):
        self.assembly = assembly
        layout = assembly.layout
        self.n = layout.n
        self.m = len(layout.input_index)
        self._reads = {id(e): _reads(layout, e) for e in assembly.elements}

    def _stamps(self, elements, method: str, x, u, p, with_inputs: bool):
        """Per element: rows, values and the Jacobian block w.r.t. its own variables."""
        layout = self.assembly.layout
        out = []
        for element in elements:
            unknowns, inputs = self._reads[id(element)]
            if not with_inputs:
                inputs = ()
            slots = {k: j for j, k in enumerate(unknowns)}
            input_slots = {k: len(unknowns) + j for j, k in enumerate(inputs)}
            rows: list[int] = []

            def local(z, element=element, slots=slots, input_slots=input_slots, rows=rows):
                at = _LocalBias(layout, slots, input_slots, z, u, p)
                stamp = getattr(element, method)(at)
                rows[:] = [r for r, _ in stamp]
                vals = jnp.stack([jnp.asarray(v, dtype=z.dtype) for _, v in stamp]) if stamp \
                    else jnp.zeros((0,), z.dtype)
                return vals, vals

            # static slices, no gather
            z = jnp.stack([x[k] for k in unknowns] + [u[k].astype(x.dtype) for k in inputs]) \
                if unknowns or inputs else jnp.zeros((0,), x.dtype)
            block, vals = jax.jacfwd(local, has_aux=True)(z)
            cols = tuple(unknowns) + tuple(self.n + k for k in inputs)
            out.append((tuple(rows), cols, vals, block))
        return out

    def _assemble(self, stamps, width: int, dtype):
        """Dense (vector, matrix) from the element stamps, by sums fixed at trace time."""
        n = self.n
        value: dict[int, list] = defaultdict(list)
        entry: dict[tuple[int, int], list] = defaultdict(list)
        for rows, cols, vals, block in stamps:
            for k, r in enumerate(rows):
                if r == n:  # the ground row is dropped
                    continue
                value[r].append(vals[k])
                for j, c in enumerate(cols):
                    entry[(r, c)].append(block[k, j])
        zero = jnp.zeros((), dtype)

        def total(terms):
            return sum(terms[1:], terms[0]) if terms else zero

        vector = jnp.stack([total(value[r]) for r in range(n)])
        matrix = jnp.stack([total(entry[(r, c)]) for r in range(n) for c in range(width)])
        return vector, matrix.reshape(n, width)

    def current(self, x, u, p) -> tuple[Any, Any, Any]:
        """(f, df/dx, df/du) at (x, u, p); p is the dict of parameter values."""
        x = jnp.asarray(x)
        dtype = jnp.result_type(x.dtype, jnp.float32)
        u = jnp.asarray(u, dtype=dtype)
        stamps = self._stamps(self.assembly.elements, "currents", x, u, p, with_inputs=True)
        f, J = self._assemble(stamps, self.n + self.m, dtype)
        return f, J[:, : self.n], J[:, self.n :]

    def current_x(self, x, u, p) -> tuple[Any, Any]:
        """(f, df/dx) at (x, u, p): the Newton iteration's pair."""
        x = jnp.asarray(x)
        dtype = jnp.result_type(x.dtype, jnp.float32)
        u = jnp.asarray(u, dtype=dtype)
        stamps = self._stamps(self.assembly.elements, "currents", x, u, p, with_inputs=False)
        return self._assemble(stamps, self.n, dtype)

    def charge(self, x, p) -> tuple[Any, Any]:
        """(q, dq/dx) at (x, p)."""
        x = jnp.asarray(x)
        dtype = jnp.result_type(x.dtype, jnp.float32)
        stamps = self._stamps(self.assembly.storage, "charges", x, None, p, with_inputs=False)
        return self._assemble(stamps, self.n, dtype)
