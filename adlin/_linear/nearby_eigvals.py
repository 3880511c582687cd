"""Eigenvalues of a matrix near a reference one, by simultaneous Newton iteration.

Batched runs (sweeps, Monte Carlo) need the poles of thousands of small
reduced matrices that differ from the nominal one only by parameter spreads.
LAPACK's general eigenvalue routine, called once per matrix, took about 40 %
of a sample's time on the demo regulator (profiled, DEVELOPERS.md).  Here each
matrix is

1. balanced with the nominal diagonal scaling (exact powers of two),
2. reduced to upper Hessenberg form H by Gaussian similarity transforms
   with the row exchanges chosen on the nominal matrix (Wilkinson, The
   Algebraic Eigenvalue Problem, 1965, ch. 6, sec. 8; the "elmhes" routine
   of Martin & Wilkinson, Numer. Math. 12, 1968), written out entry by
   entry so that it fuses into elementwise loops under vmap (LAPACK's
   Householder reduction cost 2 us per 8 x 8 matrix, measured; a multiplier
   above `MAX_MULTIPLIER` hands the sample back),
3. and its eigenvalues are found as the zeros of det(H - zI), all at once by
   the Aberth-Ehrlich iteration (Aberth, Math. Comp. 27(122), 1973; Bini,
   Numer. Algorithms 13, 1996) started from the nominal eigenvalues, with
   det(H - zI) and its derivative evaluated by Hyman's method (Wilkinson,
   The Algebraic Eigenvalue Problem, 1965, ch. 7, sec. 11), which needs no
   characteristic polynomial.

Under vmap every step is elementwise over the samples.  A root stops after a
correction below `_LAST_RTOL` of its size (the convergence near a simple root
is cubic, so what is left is rounding), or once det(H - zI) is within its own
rounding error bound.  The result is checked: the roots must come in conjugate pairs
or be real, and their sum and the sum of their squares must equal trace(H)
and trace(H^2).  Where iteration or check fails the eigenvalues are NaN and
the `ok` flag is False: the batch engine then runs that sample with LAPACK.
"""

from __future__ import annotations

from dataclasses import dataclass

import jax
import jax.numpy as jnp
import numpy as np
import scipy.linalg

from .model import sorted_eigvals

#: Largest matrix handled here; the program grows as n^2.
MAX_SIZE = 24
#: Largest elimination multiplier accepted (1 at the nominal matrix, where
#: the row exchanges are chosen).
MAX_MULTIPLIER = 1e3
#: Aberth iterations before a sample is handed back (started from nearby
#: eigenvalues, the demo regulator's samples with +-20-30 % parts need 1-4).
MAX_ITERATIONS = 40
_EPS = float(np.finfo(np.float64).eps)
# |Im z| below this times |z|: a real eigenvalue (rounding in the sums of
# conjugate terms leaves ~eps there; a true pair that close to the axis is a
# numerically double real root for LAPACK too)
_REAL_RTOL = 1e3 * _EPS
# a correction below this times |z| is the last one a root needs (`_aberth`)
_LAST_RTOL = 1e-8
# trace checks: relative to sum |z| and sum |z|^2
_TRACE_RTOL = 1e-9


@dataclass(frozen=True)
class NearbyPlan:
    """What `eigvals_near` needs from the nominal matrix A0 (hashable, host data).

    - `poles`: A0's eigenvalues in `sorted_eigvals` order (the starting points).
    - `balance`: the diagonal scaling d (powers of two) that balances A0; the
      samples use d_j / d_i A_ij.
    - `pivots`: the row exchanged into place at each elimination step.
    """

    poles: tuple[complex, ...]
    balance: tuple[float, ...]
    pivots: tuple[int, ...]

    @classmethod
    def at(cls, A0) -> NearbyPlan | None:
        """The plan for matrices near A0, or None where this search does not
        apply (size, non-finite or coinciding eigenvalues, a zero pivot)."""
        A0 = np.asarray(A0, float)
        n = A0.shape[0]
        if not 0 < n <= MAX_SIZE or not np.all(np.isfinite(A0)):
            return None
        poles = np.asarray(sorted_eigvals(A0))
        if not distinct(poles):
            return None  # coinciding starts would never separate
        _, (d, _) = scipy.linalg.matrix_balance(A0, permute=False, separate=True)
        a = A0 * (d[None, :] / d[:, None])
        pivots = []
        for k in range(n - 2):
            p = k + 1 + int(np.argmax(np.abs(a[k + 1:, k])))
            if a[p, k] == 0.0:
                return None  # already reduced here: Hyman's method needs h_k+1,k != 0
            pivots.append(p)
            a[[k + 1, p]] = a[[p, k + 1]]
            a[:, [k + 1, p]] = a[:, [p, k + 1]]
            m = a[k + 2:, k] / a[k + 1, k]
            a[k + 2:, k:] -= m[:, None] * a[k + 1, k:][None, :]
            a[:, k + 1] += a[:, k + 2:] @ m
        if n > 1 and np.any(np.diagonal(a, -1) == 0.0):
            return None
        return cls(poles=tuple(complex(z) for z in poles), balance=tuple(float(v) for v in d),
                   pivots=tuple(pivots))


def _hessenberg(A, pivots):
    """(upper Hessenberg matrix similar to A, whether every multiplier stayed
    within `MAX_MULTIPLIER`), eliminating with the planned row exchanges."""
    n = A.shape[0]
    a = [[A[i, j] for j in range(n)] for i in range(n)]
    ok = jnp.asarray(True)
    for k, p in enumerate(pivots):
        a[k + 1], a[p] = a[p], a[k + 1]
        for row in a:
            row[k + 1], row[p] = row[p], row[k + 1]
        # G A G^-1 with G = I - sum_i m_i e_i e_k+1^T: rows first, then columns
        ms = {}
        for i in range(k + 2, n):
            m = ms[i] = a[i][k] / a[k + 1][k]  # one quotient, used on both sides
            ok = ok & (jnp.abs(m) <= MAX_MULTIPLIER)
            a[i][k] = jnp.zeros_like(m)
            for j in range(k + 1, n):
                a[i][j] = a[i][j] - m * a[k + 1][j]
        for r in range(n):
            for i, m in ms.items():
                a[r][k + 1] = a[r][k + 1] + m * a[r][i]
    H = jnp.stack([jnp.stack([a[i][j] if j >= i - 1 else jnp.zeros_like(a[i][j])
                              for j in range(n)]) for i in range(n)])
    return H, ok


def distinct(z, rtol: float = 1e-6) -> bool:
    """True when the (host) eigenvalues z are finite and pairwise apart by more
    than rtol of their size: usable starting points for `eigvals_near`."""
    z = np.asarray(z, complex)
    if not np.all(np.isfinite(z)):
        return False
    gap = np.abs(z[:, None] - z[None, :]) + np.diag(np.full(z.size, np.inf))
    return bool(np.all(gap > rtol * np.maximum(np.abs(z[:, None]), np.abs(z[None, :]))))


def _hyman(H, z):
    """det(H - zI) / (-1)^(n-1) prod(h_k+1,k), its z-derivative, and a bound on
    the rounding error of the first, for each z (shape (m,)); H upper Hessenberg.

    Solves rows 2..n of (H - zI) x = a e1 with x_n = 1 from the bottom up, and
    differentiates the recurrence; a is then row 1 times x.
    """
    n = H.shape[0]
    xs = [None] * n
    ds = [None] * n
    xs[n - 1] = jnp.ones_like(z)
    ds[n - 1] = jnp.zeros_like(z)
    for k in range(n - 1, -1, -1):
        s = -z * xs[k]
        d = -z * ds[k] - xs[k]
        for j in range(k + 1, n):
            s = s + H[k, j] * xs[j]
            d = d + H[k, j] * ds[j]
        s = s + H[k, k] * xs[k]
        d = d + H[k, k] * ds[k]
        if k > 0:
            xs[k - 1] = -s / H[k, k - 1]
            ds[k - 1] = -d / H[k, k - 1]
    # the size of the terms of row 1, the last sum: its rounding error bound
    mag = _size(H[0, 0] - z) * _size(xs[0])
    for j in range(1, n):
        mag = mag + jnp.abs(H[0, j]) * _size(xs[j])
    return s, d, (4 * n) * _EPS * mag


def _size(v):
    """|Re v| + |Im v|, within a factor sqrt(2) of |v| and far cheaper under
    XLA than the overflow-safe complex modulus; for tests and bounds."""
    return jnp.abs(v.real) + jnp.abs(v.imag)


def _divide(a, b):
    """a / b for complex b as a conj(b) / |b|^2: XLA's complex division, which
    guards against overflow, made the iteration several times slower, and
    the values here stay far inside the exponent range."""
    return a * jnp.conj(b) / (b.real * b.real + b.imag * b.imag)


def _aberth(H, z0):
    n = H.shape[0]

    def cond(c):
        return (c["k"] < MAX_ITERATIONS) & ~jnp.all(c["done"])

    def body(c):
        z, done = c["z"], c["done"]
        f, df, bound = _hyman(H, z)
        newton = _divide(f, df)
        # sum over j != i of 1/(z_i - z_j), each pair's reciprocal computed once
        terms = [[None] * n for _ in range(n)]
        for i in range(n):
            for j in range(i + 1, n):
                terms[i][j] = _divide(1.0, z[i] - z[j])
                terms[j][i] = -terms[i][j]
        repel = jnp.stack([sum(t for t in row if t is not None) for row in terms]) if n > 1 \
            else jnp.zeros_like(z)
        w = _divide(newton, 1.0 - newton * repel)
        size = _size(w)
        # Near a simple root the iteration converges cubically (quadratically
        # at worst), so after a correction below _LAST_RTOL |z| the remaining
        # error is at rounding level: take it and stop.  Also take the last
        # correction where det(H - zI) is within its rounding bound (the bound
        # is loose for small eigenvalues of graded matrices; stopping before
        # that step cost 100x in accuracy on one in tests/test_nearby_eigvals.py).
        at_root = _size(f) <= bound
        last = size <= _LAST_RTOL * _size(z)
        step = jnp.where(done | ~jnp.isfinite(w), 0.0, w)
        return {"z": z - step, "done": done | at_root | last, "k": c["k"] + 1}

    out = jax.lax.while_loop(cond, body, {"z": z0, "done": jnp.zeros(n, bool),
                                          "k": jnp.asarray(0)})
    return out["z"], jnp.all(out["done"])


def eigvals_near(A, plan: NearbyPlan):
    """(eigenvalues of A sorted as `sorted_eigvals` sorts them, ok).

    `plan`: from the nearby nominal matrix (`NearbyPlan.at`).  Pure JAX, for
    jit and vmap; where `ok` is False the eigenvalues are NaN.
    """
    n = A.shape[-1]
    scale = np.asarray(plan.balance, float)
    H, small = _hessenberg(A * (scale[None, :] / scale[:, None]), plan.pivots)
    z, converged = _aberth(H, jnp.asarray(np.array(plan.poles), jnp.complex128))
    size = jnp.abs(z)
    upper = z.imag > _REAL_RTOL * size
    lower = z.imag < -_REAL_RTOL * size
    # each root below the axis becomes the conjugate of its nearest root above
    gap = jnp.abs(z[:, None] - jnp.conj(z)[None, :])
    partner = jnp.argmin(jnp.where(upper[None, :], gap, jnp.inf), axis=1)
    uses = jnp.sum(jnp.where(lower[:, None], jax.nn.one_hot(partner, n, dtype=jnp.int32), 0),
                   axis=0)
    paired = jnp.all(jnp.where(upper, uses == 1, uses == 0))
    roots = jnp.where(lower, jnp.conj(z[partner]), jnp.where(upper, z, z.real + 0j))
    total = jnp.sum(jnp.abs(roots))
    tr1 = jnp.abs(jnp.sum(roots) - jnp.trace(H)) <= _TRACE_RTOL * total
    tr2 = (jnp.abs(jnp.sum(roots ** 2) - jnp.sum(H * H.T))
           <= _TRACE_RTOL * jnp.sum(jnp.abs(roots) ** 2))
    ok = small & converged & paired & tr1 & tr2 & jnp.all(jnp.isfinite(roots))
    return jnp.where(ok, _sorted(roots), jnp.nan), ok


def _sorted(z):
    """z by modulus, each conjugate pair with its upper member first (LAPACK's
    order, kept by `sorted_eigvals`' stable sort); one sort, not a lexsort of
    two keys (each sort costs ~0.3 us per sample under vmap, profiled)."""
    s = z[jnp.argsort(jnp.abs(z), stable=True)]
    lower_first = (s[:-1].imag < 0) & (s[1:] == jnp.conj(s[:-1]))
    no = jnp.zeros((1,), bool)
    here, after = jnp.concatenate([lower_first, no]), jnp.concatenate([no, lower_first])
    return jnp.where(here, jnp.roll(s, -1), jnp.where(after, jnp.roll(s, 1), s))
