"""Classify a steady state from the poles of its small-signal model.

A steady state is hyperbolic when no pole sits on the imaginary axis; then
the signs of the real parts decide its local behaviour (Hartman-Grobman).
In the plane: all real parts negative is a stable node (real poles) or a
stable focus (a complex pair), both positive an unstable node or focus,
mixed signs a saddle (Strogatz, Nonlinear Dynamics and Chaos, 2nd ed., 2015,
sec. 5.2).  In n dimensions the same words follow the counts n-, n0, n+ of
poles with negative, zero and positive real part: n0 = 0 is hyperbolic, and
n- > 0 with n+ > 0 is a saddle (Kuznetsov, Elements of Applied Bifurcation
Theory, 3rd ed., 2004, ch. 2, where a saddle with complex poles is also
called a saddle-focus; we keep the single word "saddle"; section quoted from
memory).  A pole whose real
part is zero to within the tolerance makes the state "marginal": the linear
model alone does not decide its stability.
"""

from __future__ import annotations

import numpy as np

STABLE_NODE = "stable node"
STABLE_FOCUS = "stable focus"
SADDLE = "saddle"
UNSTABLE_NODE = "unstable node"
UNSTABLE_FOCUS = "unstable focus"
MARGINAL = "marginal"
STATIC = "static"  # no storage: E = 0, no poles, stability is not defined
UNCLASSIFIED = "unclassified"  # no small-signal model there (see SteadyStates.notes)

LABELS = (STABLE_NODE, STABLE_FOCUS, SADDLE, UNSTABLE_NODE, UNSTABLE_FOCUS, MARGINAL, STATIC,
          UNCLASSIFIED)
STABLE_LABELS = (STABLE_NODE, STABLE_FOCUS)

# Eigenvalues computed in float64 carry an absolute error of roughly
# eps * ||A|| (Golub & Van Loan, Matrix Computations, 4th ed., 2013, sec. 7.2,
# Bauer-Fike theorem, from memory; more for non-normal A), so a real part below this fraction of
# the largest pole is indistinguishable from zero whatever the tolerance.
ROUNDOFF_FRACTION = 1e-12


def pole_counts(poles, tol: float = 1e-6) -> tuple[int, int, int]:
    """(n-, n0, n+): poles with negative, zero (within tolerance) and positive real part.

    **Arguments:**

    - `poles`: the finite poles (rad/s), complex.
    - `tol`: a pole is on the axis when |Re p| <= tol |p| + 1e-12 max|p|, i.e.
      its damping ratio is below `tol` or its real part is lost in rounding.

    **Returns:** the three counts.
    """
    p = np.asarray(poles, dtype=complex).ravel()
    if p.size == 0:
        return 0, 0, 0
    if not np.all(np.isfinite(p)):
        raise ValueError("poles must be finite to classify a steady state")
    mag = np.abs(p)
    floor = ROUNDOFF_FRACTION * float(mag.max())
    on_axis = np.abs(p.real) <= tol * mag + floor
    n_zero = int(on_axis.sum())
    n_neg = int(((p.real < 0) & ~on_axis).sum())
    return n_neg, n_zero, int(p.size) - n_neg - n_zero


def classify_poles(poles, tol: float = 1e-6) -> str:
    """The class of a steady state from the poles of its small-signal model.

    **Arguments:**

    - `poles`: finite poles (rad/s), complex; empty for a static model.
    - `tol`: relative tolerance deciding "on the imaginary axis" (see
      `pole_counts`) and "complex" (|Im p| > tol |p|).

    **Returns:** one of ``"stable node"``, ``"stable focus"``, ``"saddle"``,
    ``"unstable node"``, ``"unstable focus"``, ``"marginal"``, ``"static"``.
    """
    p = np.asarray(poles, dtype=complex).ravel()
    if p.size == 0:
        return STATIC
    n_neg, n_zero, n_pos = pole_counts(p, tol)
    if n_zero:
        return MARGINAL
    if n_neg and n_pos:
        return SADDLE
    # a defective double real pole may split into a pair with a tiny imaginary
    # part in rounding (about sqrt(eps) relative); that is still a node
    oscillatory = bool(np.any(np.abs(p.imag) > tol * np.abs(p)))
    if n_neg:
        return STABLE_FOCUS if oscillatory else STABLE_NODE
    return UNSTABLE_FOCUS if oscillatory else UNSTABLE_NODE


def is_stable(label: str) -> bool:
    """True for the asymptotically stable classes (stable node, stable focus)."""
    return label in STABLE_LABELS
