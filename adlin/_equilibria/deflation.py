"""Deflated Newton: find a new root of f(x) = 0 that is none of the known ones.

Deflation (Farrell, Birkisson & Funke, "Deflation techniques for finding
distinct solutions of nonlinear partial differential equations", SIAM J.
Sci. Comput. 37(4), 2015) multiplies the residual by an operator that blows
up at every known root r_k and tends to one far from them:

    G(x) = M(x) f(x),    M(x) = prod_k (1 / ||x - r_k||_W^p + shift)

G has the roots of f except the known ones, so Newton on G started from the
same guess goes elsewhere.  The paper's recommended choice, which we quote
from memory, is the shifted operator with power p = 2 and shift 1: the
power 2 removes a simple root even when Newton approaches it fast, and the
shift keeps G from vanishing as ||x|| grows (with shift 1, M >= 1, so
|G| >= |f|: a small G is a small f).

The norm is weighted, ||d||_W^2 = sum_i (d_i / s_i)^2 with s_i the typical
size of unknown i (`unknown_scales`: its largest magnitude at the states
known, at least 1 V for a voltage and 1 mA for a current), so a 2 mA branch
current and a 2 V node voltage count alike; without it the currents'
differences would be invisible next to the voltages'.

The deflated Newton step is the Newton step of f scaled by
1 / (1 - grad(ln M) . dx) (Sherman-Morrison on the rank-one term of dG/dx;
checked in the tests), so the solver's junction limiting and line search act
as they do on f; we reuse `adlin._steady.newton.newton_solve` on G.

The known roots live in a padded array of fixed capacity with a mask, so the
jitted solve is compiled once and reused as roots are added.
"""

from __future__ import annotations

import dataclasses
import functools
from collections.abc import Mapping, Sequence

import jax
import jax.numpy as jnp
import numpy as np

from .._steady.newton import NewtonOptions, newton_solve
from .._system import System


def deflation_factor(x, roots, mask, scale, power: float, shift: float):
    """M(x) = prod over the unmasked roots of (1/||x - r_k||_W^power + shift).

    Computed as exp(sum of logs) so that many nearby roots do not overflow
    the product before the logarithms do.

    **Arguments:**

    - `x`: point (n,).
    - `roots`: known roots, padded (capacity, n).
    - `mask`: which rows of `roots` are real roots (capacity,).
    - `scale`: typical size of each unknown (n,), all > 0.
    - `power`, `shift`: the operator's p and shift.

    **Returns:** the scalar M(x) (infinite at a known root).
    """
    d2 = jnp.sum(((x[None, :] - roots) / scale[None, :]) ** 2, axis=1)
    # padded rows get a harmless distance so their (discarded) branch has a
    # finite derivative: a NaN there would poison the gradient through where()
    d2 = jnp.where(mask, d2, 1.0)
    term = jnp.log(d2 ** (-0.5 * power) + shift)
    return jnp.exp(jnp.sum(jnp.where(mask, term, 0.0)))


@functools.lru_cache(maxsize=32)
def deflated_solver(system: System, options: NewtonOptions, power: float, shift: float):
    """A jitted deflated Newton solve for `system`, built once per settings.

    **Returns:** ``solve(u, p, x0, roots, mask, scale) -> (x, status,
    iterations, evaluations)``, with the status codes of `newton_solve`.
    Capacity is the first axis of `roots`: a new capacity compiles once more.
    """
    from .._compile import compile

    table = compile(system).junctions
    # Full (junction-limited) Newton steps on G, no Armijo search: near known
    # roots M makes |G| a poor merit function, and the search stalls there
    # (on the tunnel-diode circuit of Khalil, Example 2.1, the damped run
    # stopped at v = 0.02 V while full steps reached the third state).
    options = dataclasses.replace(options, max_backtracks=0)

    def solve(u, p, x0, roots, mask, scale):
        def deflated(x):
            return deflation_factor(x, roots, mask, scale, power, shift) * system.f(x, u, p)

        res = newton_solve(deflated, x0, table, options)
        return res.x, res.status, res.iterations, res.evaluations

    return jax.jit(solve)


# Smallest scale by unit: below these an unknown's size says nothing about how
# far apart two states are (the same floors as the continuation's arclength
# norm, `adlin._continuation.options.TrackOptions`).
UNIT_FLOORS = {"V": 1.0, "A": 1e-3}


def unknown_scales(
    system: System,
    points: Sequence[np.ndarray],
    fixed: Mapping[str, float] | None = None,
) -> np.ndarray:
    """Typical size of each unknown, for the weighted distance between states.

    The scale of an unknown is the largest magnitude it takes at `points`,
    but at least a floor given by its unit (`System.unit`): 1 V for
    voltages, 1 mA for currents, 1 for anything else.  Without the floor an
    unknown that is (nearly) zero at every state known so far would make any
    move along it look infinitely far.  `fixed` overrides scales by name.

    **Returns:** a float64 array (n,) of positive scales.
    """
    mags = np.zeros(system.n)
    for x in points:
        mags = np.maximum(mags, np.abs(np.asarray(x, dtype=float)))
    floors = np.array([UNIT_FLOORS.get(system.unit(name), 1.0) for name in system.unknowns])
    scale = np.maximum(mags, floors)
    for name, value in (fixed or {}).items():
        scale[system.unknowns.index(name)] = float(value)
    return scale
