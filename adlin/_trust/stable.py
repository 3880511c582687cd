"""Whether an operating point is stable enough for a transient to stay near it.

A pole counts as not in the left half plane when its real part is above
-1e-12 times the largest pole magnitude: the real parts of the eigenvalues
of a matrix are known only to about machine epsilon times its norm (Golub &
Van Loan, Matrix Computations, 4th ed., 2013, sec. 7.2, from memory), and
the largest pole stands for that norm.  The margin must stay that small:
the demo regulator's slowest pole (-1e3 rad/s) is 1.8e9 times smaller than
its fastest, so a margin of 1e-9 times the largest pole called it unstable.
"""

from __future__ import annotations

import numpy as np

MARGIN = 1e-12


def least_stable_pole(poles) -> complex | None:
    """The pole with the largest real part if it is not clearly stable, else None.

    **Arguments:** `poles`: finite poles (rad/s), any array-like of complex.

    **Returns:** that pole, or None when every pole has a real part below
    -MARGIN times the largest magnitude (or there are no poles).
    """
    p = np.asarray(poles, dtype=complex).ravel()
    if p.size == 0:
        return None
    worst = p[int(np.argmax(p.real))]
    scale = max(1.0, float(np.max(np.abs(p))))
    return complex(worst) if worst.real >= -MARGIN * scale else None
