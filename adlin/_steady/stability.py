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
   Skipped when the power-up run did not settle (it used up its steps) and the
   unstable state has no real pole in the right half-plane, only complex
   pairs (an unstable focus): the powered-up circuit then oscillates, and runs
   started beside the focus spiral out into the same oscillation, so they
   would only spend their step limit again (a rule of our own; on the
   tunnel-diode oscillator of the hard corpus it cuts the search from 7266 to
   2454 residual evaluations).  A saddle keeps both runs: a power-up can end
   on its stable manifold (a symmetric latch), and a real unstable direction
   leads to one stable state on each side.
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
from .strategies.reasons import NO_CONVERGENCE, NO_STABLE_STATE, PSEUDO_TRANSIENT

# A pole counts as unstable when Re(s) > _RTOL * max|s| (relative, so unit-free).
_RTOL = 1e-9
#: Pseudo-time steps over which the inputs rise in the power-up run.
POWER_UP_RAMP_STEPS = 20
#: The runs `prefer_stable` makes (each compiled once per System, when first needed).
POWER_UP = PseudoTransient(scaling="storage", ramp_steps=POWER_UP_RAMP_STEPS)
FROM_BESIDE = PseudoTransient(scaling="storage")


def _unstable_poles(E: np.ndarray, A: np.ndarray):
    """Finite right-half-plane poles of E dx/dt = A x and their right eigenvectors,
    most unstable first (scipy's QZ on the pencil (A, E); infinite eigenvalues,
    i.e. algebraic unknowns, dropped)."""
    w, v = scipy.linalg.eig(A, E)
    finite = np.isfinite(w)
    w, v = w[finite], v[:, finite]
    if not w.size:
        return w, v
    scale = max(float(np.max(np.abs(w))), 1e-300)
    keep = w.real > _RTOL * scale
    order = np.argsort(-w.real[keep])
    return w[keep][order], v[:, keep][:, order]


def has_real_unstable_pole(E: np.ndarray, A: np.ndarray) -> bool:
    """True when a right-half-plane pole of E dx/dt = A x is real (a saddle-type
    instability), False when every unstable pole is one of a complex pair (or
    there is none).  A pole counts as real when |Im s| <= 1e-9 |s|."""
    w, _ = _unstable_poles(E, A)
    return bool(np.any(np.abs(w.imag) <= _RTOL * np.abs(w)))


def unstable_direction(E: np.ndarray, A: np.ndarray):
    """The right eigenvector (real part, scaled so that its largest entry is +1) of
    the most unstable finite pole of E dx/dt = A x, or None when every finite
    pole has Re(s) <= 0.

    Uses scipy's QZ (generalized eigenvalues of the pencil (A, E)); infinite
    eigenvalues (algebraic unknowns) are dropped.
    """
    w, v = _unstable_poles(E, A)
    if not w.size:
        return None
    d = np.real(v[:, 0])
    if np.max(np.abs(d)) == 0:
        d = np.imag(v[:, 0])
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

    def pencil(x):
        return tuple(np.asarray(m) for m in compiled.matrices(x, u, p)[:2])

    E, A = pencil(op.x)
    d = unstable_direction(E, A)
    if d is None:
        return op
    x = np.asarray(op.x)
    step = 1e-3 * (1.0 + np.max(np.abs(x)))  # small against the bias, beyond rounding
    # without inputs the ramp changes nothing: reuse the other program (one compile less)
    runs = [(POWER_UP if np.size(u) else FROM_BESIDE, np.asarray(x0))]
    runs += [(FROM_BESIDE, x + sign * step * d) for sign in (1.0, -1.0)]
    focus = not has_real_unstable_pole(E, A)
    tried = [op]
    for strategy, start in runs:
        cand = compiled.solve_with(strategy)(u, p, jnp.asarray(start))
        tried.append(cand)
        if bool(cand.converged) and unstable_direction(*pencil(cand.x)) is None:
            return _merge_attempts(tried, cand)
        if len(tried) == 2 and focus and int(cand.status) == NO_CONVERGENCE:
            break  # the power-up oscillates around a focus: see rule 2 above
    out = _merge_attempts(tried, op)
    marked = np.asarray(out.attempts).copy()
    marked[PSEUDO_TRANSIENT] = NO_STABLE_STATE
    return eqx.tree_at(lambda o: o.attempts, out, jnp.asarray(marked))
