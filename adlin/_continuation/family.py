"""One-parameter families F(x, lam, args) = 0 that the continuation engine follows.

A family bundles three pure JAX functions of (x, lam, args): the residual
(n,), optionally the poles at the point (complex, a fixed number of them) and
optionally extra outputs.  `args` is any pytree of arrays (for a System: the
inputs and parameters), so new values never retrace the jitted programs,
which are cached per family (families compare by the functions they hold).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import jax.numpy as jnp

from .._system import System


@dataclass(frozen=True)
class FunctionFamily:
    """A family given as plain functions (what `track_family` wraps).

    - `residual(x, lam, args) -> (n,)`.
    - `poles(x, lam, args) -> complex (r,)` or None: poles at a point on the
      branch, for stability and Hopf detection.
    - `outputs(x, lam, args) -> (o,)` or None: extra values stored per point.
    """

    residual: Callable[[Any, Any, Any], Any]
    poles: Callable[[Any, Any, Any], Any] | None = None
    outputs: Callable[[Any, Any, Any], Any] | None = None


@dataclass(frozen=True)
class SystemSweep:
    """A System with one parameter or input playing the role of lam.

    `args` is the pair (u, p) of input and parameter vectors; lam replaces
    entry `index` of u (`kind == "input"`) or of p (`kind == "param"`).
    Poles come from the compiled System's reduced linear model, outputs are
    the System's outputs y = g(x, u, p).
    """

    system: System
    kind: str  # "input" or "param"
    index: int

    def with_lam(self, lam, args):
        u, p = args
        if self.kind == "input":
            return u.at[self.index].set(lam), p
        return u, p.at[self.index].set(lam)

    def residual(self, x, lam, args):
        u, p = self.with_lam(lam, args)
        return self.system.f(x, u, p)

    def poles(self, x, lam, args):
        from .._compile import compile

        u, p = self.with_lam(lam, args)
        return compile(self.system).linearize(x, u, p).poles().astype(jnp.complex128)

    def outputs(self, x, lam, args):
        u, p = self.with_lam(lam, args)
        return self.system.g(x, u, p)
