"""Prefer a stable steady state: `Auto(prefer_stable=True)`, concrete values only.

A latch or a self-biased circuit has Newton-reachable states that are
unstable (a latch's metastable saddle, a reference's half-started state).
When the state found has a pole in the right half-plane (scipy's QZ on the
pencil (A, E), concrete numbers, nothing to compile), the circuit's own
dynamics are followed by pseudo-transient continuation with the real storage
matrix (`PseudoTransient(scaling="storage")`), and a stable state reached
that way is returned instead.  The rule, in this order, is deterministic:

1. Power-up: from the user's guess (all zero by default), every input ramps
   from zero to its value over the first `POWER_UP_RAMP_STEPS` pseudo-time
   steps.  This is what the engineer means by "the" bias point of a circuit
   with several: the state it wakes up in when the supply comes up (a latch's
   preset value, a reference's running state).  Taken if it ends in a stable
   state.
2. Otherwise, from just beside the unstable state along its most unstable
   direction d, first +d then -d, with the sign of d fixed so that its largest
   entry is positive; the first run that ends in a stable state is taken.
3. If none does (an oscillator's bias is unstable on purpose, and so may be
   every state of a circuit), the unstable state is returned unchanged, and
   `op.history` says that no stable state was found.
"""

from __future__ import annotations

import equinox as eqx
import jax.numpy as jnp
import numpy as np
import scipy.linalg

from .operating_point import OperatingPoint
from .strategies import PseudoTransient
from .strategies.reasons import NO_STABLE_STATE, PSEUDO_TRANSIENT

# A pole counts as unstable when Re(s) > _RTOL * max|s| (relative, so unit-free).
_RTOL = 1e-9
#: Pseudo-time steps over which the inputs rise in the power-up run.
POWER_UP_RAMP_STEPS = 20
#: The runs `prefer_stable` makes (each compiled once per System, when first needed).
POWER_UP = PseudoTransient(scaling="storage", ramp_steps=POWER_UP_RAMP_STEPS)
FROM_BESIDE = PseudoTransient(scaling="storage")


def unstable_direction(E: np.ndarray, A: np.ndarray):
    """The right eigenvector (real part, scaled so that its largest entry is +1) of
    the most unstable finite pole of E dx/dt = A x, or None when every finite
    pole has Re(s) <= 0.

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
    # the eigensolver's sign is arbitrary; fix it so the run order is reproducible
    return d / d[int(np.argmax(np.abs(d)))]


def prefer_stable(compiled, op: OperatingPoint, u, p, x0) -> OperatingPoint:
    """`op` if it is stable, else a stable state the circuit's dynamics reach, if any.

    **Arguments:**

    - `compiled`: the `CompiledSystem`.
    - `op`: a converged, un-batched operating point.
    - `u`, `p`: its inputs and parameters (vectors).
    - `x0`: the user's guess (the start of the power-up run).

    **Returns:** an `OperatingPoint`; when it differs from `op`, its `method`
    is "pseudo-transient" and its record includes the attempts made for `op`.
    When no stable state is found, `op` with the pseudo-transient slot of its
    record set to "no stable state found".
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
    # without inputs the ramp changes nothing: reuse the other program (one compile less)
    runs = [(POWER_UP if np.size(u) else FROM_BESIDE, np.asarray(x0))]
    runs += [(FROM_BESIDE, x + sign * step * d) for sign in (1.0, -1.0)]
    tried = [op]
    for strategy, start in runs:
        cand = compiled.solve_with(strategy)(u, p, jnp.asarray(start))
        tried.append(cand)
        if bool(cand.converged) and direction(cand.x) is None:
            return _merge_attempts(tried, cand)
    out = _merge_attempts(tried, op)
    marked = np.asarray(out.attempts).copy()
    marked[PSEUDO_TRANSIENT] = NO_STABLE_STATE
    return eqx.tree_at(lambda o: o.attempts, out, jnp.asarray(marked))
