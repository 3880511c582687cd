"""Prefer a stable steady state: Auto(prefer_stable=True), concrete values only.

A latch or a self-biased circuit has Newton-reachable states that are
unstable (saddles).  When the state found has a pole in the right half-plane,
the circuit's own dynamics are followed from just beside it, along the
unstable eigenvector (both ways), by pseudo-transient continuation with the
real storage matrix (backward Euler on the circuit, `PseudoTransient(scaling=
"storage")`); a stable state reached that way is returned instead.  When none
is found (an oscillator's bias is unstable on purpose) the unstable state is
returned unchanged.
"""

from __future__ import annotations

import equinox as eqx
import jax.numpy as jnp
import numpy as np
import scipy.linalg

from .operating_point import OperatingPoint
from .strategies import PseudoTransient
from .strategies.reasons import PSEUDO_TRANSIENT, UNSTABLE_ONLY

# A pole counts as unstable when Re(s) > _RTOL * max|s| (relative, so unit-free).
_RTOL = 1e-9


def unstable_direction(E: np.ndarray, A: np.ndarray):
    """The right eigenvector (real part, unit max-norm) of the most unstable finite
    pole of E dx/dt = A x, or None when every finite pole has Re(s) <= 0.

    Uses scipy's QZ (generalized eigenvalues of the pencil (A, E)); infinite
    eigenvalues (algebraic unknowns) are dropped.
    """
    w, v = scipy.linalg.eig(A, E)
    finite = np.isfinite(w)
    if not finite.any():
        return None
    w, v = w[finite], v[:, finite]
    scale = max(float(np.max(np.abs(w))), 1e-300)
    k = int(np.argmax(w.real))
    if w[k].real <= _RTOL * scale:
        return None
    d = np.real(v[:, k])
    if np.max(np.abs(d)) == 0:
        d = np.imag(v[:, k])
    return d / np.max(np.abs(d))


def prefer_stable(compiled, op: OperatingPoint, u, p) -> OperatingPoint:
    """`op` if it is stable, else a stable state reached from beside it, if any.

    **Arguments:**

    - `compiled`: the `CompiledSystem`.
    - `op`: a converged, un-batched operating point.
    - `u`, `p`: its inputs and parameters (vectors).

    **Returns:** an `OperatingPoint`; when it differs from `op`, its `method`
    is "pseudo-transient" and its record includes the attempts made for `op`.
    """
    from .solve import _merge_attempts

    def direction(x):
        E, A = (np.asarray(m) for m in compiled.matrices(x, u, p)[:2])
        return unstable_direction(E, A)

    d = direction(op.x)
    if d is None:
        return op
    x = np.asarray(op.x)
    step = 1e-3 * (1.0 + np.max(np.abs(x)))  # small against the bias, beyond rounding
    follow = compiled.solve_with(PseudoTransient(scaling="storage"))
    tried = [op]
    for sign in (1.0, -1.0):
        cand = follow(u, p, x + sign * step * d)
        if bool(cand.converged):
            if direction(cand.x) is None:
                return _merge_attempts(tried + [cand], cand)
            # record that the dynamics led back to an unstable state
            marked = np.asarray(cand.attempts).copy()
            marked[PSEUDO_TRANSIENT] = UNSTABLE_ONLY
            cand = eqx.tree_at(lambda o: o.attempts, cand, jnp.asarray(marked))
        tried.append(cand)
    return _merge_attempts(tried, op)
