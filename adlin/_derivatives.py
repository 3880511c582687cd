"""The model's derivatives as the compiled programs use them.

Two ways to get the same exact matrices:

- `ForwardDerivatives` (any System): forward-mode AD of the whole model, each
  function traced once with its value carried as the auxiliary output.
- `CircuitDerivatives` (a System built by `Circuit.build`): each element is
  differentiated only with respect to the few unknowns it reads
  (`adlin._circuit.element_jacobian`), which for the demo regulator made the
  Newton Jacobian about ten times cheaper than `jax.jacfwd` of the residual
  (15 tangents through every element).  If an element reads an unknown it did
  not declare, the forward-mode path is used instead, at trace time.

`derivatives_of(system)` picks one, once per compiled System.
"""

from __future__ import annotations

import jax
import jax.numpy as jnp

from ._circuit.assembly import Assembly
from ._circuit.element_jacobian import ElementJacobians, UndeclaredRead
from ._system import System


class ForwardDerivatives:
    """f, q and their Jacobians by `jax.jacfwd` of the System's functions.

    **Arguments:** `system`: the model.
    """

    def __init__(self, system: System):
        self.system = system

    def current(self, x, u, p):
        """(f, df/dx, df/du) at (x, u, p); p is the parameter vector."""
        n = self.system.n

        def split(z):
            y = self.system.f(z[:n], z[n:], p)
            return y, y

        J, f = jax.jacfwd(split, has_aux=True)(jnp.concatenate([x, u]))
        return f, J[:, :n], J[:, n:]

    def current_x(self, x, u, p):
        """(f, df/dx): what each Newton iteration needs."""

        def twice(x_):
            y = self.system.f(x_, u, p)
            return y, y

        J, f = jax.jacfwd(twice, has_aux=True)(x)
        return f, J

    def charge(self, x, p):
        """(q, dq/dx) at (x, p)."""

        def twice(x_):
            y = self.system.q(x_, p)
            return y, y

        E, q = jax.jacfwd(twice, has_aux=True)(x)
        return q, E


class CircuitDerivatives(ForwardDerivatives):
    """Element-by-element Jacobians of a circuit's System (same values, less work).

    **Arguments:**

    - `system`: a System whose `current` (and `charge`, if any) are the bound
      methods of `assembly`.
    - `assembly`: the circuit equations.
    """

    def __init__(self, system: System, assembly: Assembly):
        super().__init__(system)
        self.elements = ElementJacobians(assembly)
        self.has_charge = system.charge is not None

    def current(self, x, u, p):
        try:
            return self.elements.current(x, u, self.system.param_dict(p))
        except UndeclaredRead:
            return super().current(x, u, p)

    def current_x(self, x, u, p):
        try:
            return self.elements.current_x(x, u, self.system.param_dict(p))
        except UndeclaredRead:
            return super().current_x(x, u, p)

    def charge(self, x, p):
        if not self.has_charge:
            return super().charge(x, p)
        try:
            return self.elements.charge(x, self.system.param_dict(p))
        except UndeclaredRead:
            return super().charge(x, p)


def derivatives_of(system: System) -> ForwardDerivatives:
    """The cheapest exact derivative provider for `system`."""
    owner = getattr(system.current, "__self__", None)
    if isinstance(owner, Assembly) and (
        system.charge is None or getattr(system.charge, "__self__", None) is owner
    ):
        return CircuitDerivatives(system, owner)
    return ForwardDerivatives(system)
