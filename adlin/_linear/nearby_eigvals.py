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
   characteristic polynomial.  Since H is real, only the real roots and
   the upper member of each conjugate pair are iterated (the lower member
   is its conjugate), the real ones in real arithmetic: 2.5 complex root
   evaluations instead of 8 on the demo regulator's 6 real poles and 1 pair.

Under vmap every step is elementwise over the samples.  A root stops after a
correction below `_LAST_RTOL` of its size (the convergence near a simple root
is cubic, so what is left is rounding), or once det(H - zI) is within its own
rounding error bound.  The result is checked: the sum of the roots and the
sum of their squares must equal trace(H) and trace(H^2); this also refuses a
sample whose real poles have become a pair, or the reverse, since the
iteration keeps each root's kind.  Where iteration or check fails the eigenvalues are NaN and
the `ok` flag is False: the batch engine then runs that sample with LAPACK.
"""

from __future__ import annotations

import functools
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
# |Im z| below this times |z|: a pair that has met on the real axis, a
# numerically double real root for LAPACK too
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
        apply (size, non-finite or coinciding eigenvalues, a zero pivot).

        The complex eigenvalues must come in exact conjugate pairs, the upper
        member first, as `sorted_eigvals` returns LAPACK's."""
        A0 = np.asarray(A0, float)
        n = A0.shape[0]
        if not 0 < n <= MAX_SIZE or not np.all(np.isfinite(A0)):
            return None
        poles = np.asarray(sorted_eigvals(A0))
        if not distinct(poles):
            return None  # coinciding starts would never separate
        if not np.array_equal(np.sort_complex(poles[poles.imag < 0]),
                              np.sort_complex(np.conj(poles[poles.imag > 0]))):
            return None  # not the eigenvalues of a real matrix
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


def _hyman_real(H, z, ninv):
    """det(H - zI) / (-1)^(n-1) prod(h_k+1,k), its z-derivative, and a bound on
    the rounding error of the first, for real z (shape (m,)); H upper
    Hessenberg, ninv[k] = -1 / h_k,k-1.

    Solves rows 2..n of (H - zI) x = a e1 with x_n = 1 from the bottom up, and
    differentiates the recurrence; a is then row 1 times x.
    """
    n = H.shape[0]
    xs, ds = [None] * n, [None] * n
    xs[n - 1], ds[n - 1] = jnp.ones_like(z), jnp.zeros_like(z)
    for k in range(n - 1, -1, -1):
        g = H[k, k] - z
        s, d = g * xs[k], g * ds[k] - xs[k]
        for j in range(k + 1, n):
            s, d = s + H[k, j] * xs[j], d + H[k, j] * ds[j]
        if k > 0:
            xs[k - 1], ds[k - 1] = s * ninv[k], d * ninv[k]
    # the size of the terms of row 1, the last sum: its rounding error bound
    mag = jnp.abs(H[0, 0] - z) * jnp.abs(xs[0])
    for j in range(1, n):
        mag = mag + jnp.abs(H[0, j]) * jnp.abs(xs[j])
    return s, d, (4 * n) * _EPS * mag


def _hyman_complex(H, z, ninv):
    """`_hyman_real` for complex z, in real arithmetic on real and imaginary
    parts: H is real, and jnp would promote each h_ij to complex and spend a
    full complex product (and a guarded complex division) on it."""
    n = H.shape[0]
    zr, zi = z.real, z.imag
    xr, xi, dr, di = [None] * n, [None] * n, [None] * n, [None] * n
    xr[n - 1], xi[n - 1] = jnp.ones_like(zr), jnp.zeros_like(zr)
    dr[n - 1], di[n - 1] = jnp.zeros_like(zr), jnp.zeros_like(zr)
    for k in range(n - 1, -1, -1):
        g = H[k, k] - zr  # (H_kk - z) v = g v - i zi v
        sr, si = g * xr[k] + zi * xi[k], g * xi[k] - zi * xr[k]
        er, ei = g * dr[k] + zi * di[k] - xr[k], g * di[k] - zi * dr[k] - xi[k]
        for j in range(k + 1, n):
            sr, si = sr + H[k, j] * xr[j], si + H[k, j] * xi[j]
            er, ei = er + H[k, j] * dr[j], ei + H[k, j] * di[j]
        if k > 0:
            xr[k - 1], xi[k - 1] = sr * ninv[k], si * ninv[k]
            dr[k - 1], di[k - 1] = er * ninv[k], ei * ninv[k]
    mag = (jnp.abs(H[0, 0] - zr) + jnp.abs(zi)) * (jnp.abs(xr[0]) + jnp.abs(xi[0]))
    for j in range(1, n):
        mag = mag + jnp.abs(H[0, j]) * (jnp.abs(xr[j]) + jnp.abs(xi[j]))
    return jax.lax.complex(sr, si), jax.lax.complex(er, ei), (4 * n) * _EPS * mag


def _size(v):
    """|Re v| + |Im v|, within a factor sqrt(2) of |v| and far cheaper under
    XLA than the overflow-safe complex modulus; for tests and bounds."""
    return jnp.abs(v.real) + jnp.abs(v.imag)


def _divide(a, b):
    """a / b for complex b as a conj(b) / |b|^2: XLA's complex division, which
    guards against overflow, made the iteration several times slower, and
    the values here stay far inside the exponent range."""
    return a * jnp.conj(b) / (b.real * b.real + b.imag * b.imag)


def _repulsions(r, c):
    """Aberth's sums over the other roots, sum_j 1/(z_i - z_j), for the real
    roots r and the upper members c of the conjugate pairs, the lower members
    conj(c) included; each pair of roots' reciprocal is computed once."""
    nr, nc = r.shape[0], c.shape[0]
    sr = [jnp.zeros_like(r[0]) for _ in range(nr)]
    sc = [-0.5j / c[k].imag for k in range(nc)]  # 1 / (c - conj c)
    for i in range(nr):
        for j in range(i + 1, nr):
            t = 1.0 / (r[i] - r[j])
            sr[i], sr[j] = sr[i] + t, sr[j] - t
    for k in range(nc):
        for j in range(nr):
            t = _divide(1.0, c[k] - r[j])
            # r_j against c_k and conj c_k: 1/(r - c) + 1/(r - conj c) = -2 Re t
            sc[k], sr[j] = sc[k] + t, sr[j] - 2.0 * t.real
        for m in range(k + 1, nc):
            t, u = _divide(1.0, c[k] - c[m]), _divide(1.0, c[k] - jnp.conj(c[m]))
            # c_m's terms: 1/(c_m - c_k) = -t, 1/(c_m - conj c_k) = -conj(u)
            sc[k], sc[m] = sc[k] + t + u, sc[m] - t - jnp.conj(u)
    stack = lambda v, like: jnp.stack(v) if v else jnp.zeros((0,), like.dtype)  # noqa: E731
    return stack(sr, r), stack(sc, c)


def _aberth(H, r0, c0):
    """(real roots, upper members of the complex pairs, whether all converged),
    from the starts r0 (real) and c0 (Im > 0).  A real root stays real and a
    pair stays a conjugate pair; the roots of a sample whose real roots became
    a pair (or the reverse) fail the trace checks of `eigvals_near`."""
    n = H.shape[0]
    ninv = [None] + [-1.0 / H[k, k - 1] for k in range(1, n)]

    def cond(c):
        return (c["k"] < MAX_ITERATIONS) & ~(jnp.all(c["done_r"]) & jnp.all(c["done_c"]))

    def body(state):
        r, c = state["r"], state["c"]
        fr, dr, bound_r = _hyman_real(H, r, ninv)
        fc, dc, bound_c = _hyman_complex(H, c, ninv)
        rep_r, rep_c = _repulsions(r, c)
        newton_r, newton_c = fr / dr, _divide(fc, dc)
        wr = newton_r / (1.0 - newton_r * rep_r)
        wc = _divide(newton_c, 1.0 - newton_c * rep_c)
        # Near a simple root the iteration converges cubically (quadratically
        # at worst), so after a correction below _LAST_RTOL |z| the remaining
        # error is at rounding level: take it and stop.  Also take the last
        # correction where det(H - zI) is within its rounding bound (the bound
        # is loose for small eigenvalues of graded matrices; stopping before
        # that step cost 100x in accuracy on one in tests/test_nearby_eigvals.py).
        stop_r = (jnp.abs(fr) <= bound_r) | (jnp.abs(wr) <= _LAST_RTOL * jnp.abs(r))
        stop_c = (_size(fc) <= bound_c) | (_size(wc) <= _LAST_RTOL * _size(c))
        step_r = jnp.where(state["done_r"] | ~jnp.isfinite(wr), 0.0, wr)
        step_c = jnp.where(state["done_c"] | ~jnp.isfinite(wc), 0.0, wc)
        return {"r": r - step_r, "c": c - step_c, "done_r": state["done_r"] | stop_r,
                "done_c": state["done_c"] | stop_c, "k": state["k"] + 1}

    out = jax.lax.while_loop(cond, body, {
        "r": r0, "c": c0, "done_r": jnp.zeros(r0.shape, bool),
        "done_c": jnp.zeros(c0.shape, bool), "k": jnp.asarray(0)})
    return out["r"], out["c"], jnp.all(out["done_r"]) & jnp.all(out["done_c"])


def eigvals_near(A, plan: NearbyPlan):
    """(eigenvalues of A sorted as `sorted_eigvals` sorts them, ok).

    `plan`: from the nearby nominal matrix (`NearbyPlan.at`).  Pure JAX, for
    jit and vmap; where `ok` is False the eigenvalues are NaN.
    """
    scale = np.asarray(plan.balance, float)
    H, small = _hessenberg(A * (scale[None, :] / scale[:, None]), plan.pivots)
    poles = np.array(plan.poles, complex)
    r, c, converged = _aberth(H, jnp.asarray(poles[poles.imag == 0].real),
                              jnp.asarray(poles[poles.imag > 0]))
    # a pair that met on the real axis is a (numerically) double real root,
    # as LAPACK returns it
    c = jnp.where(jnp.abs(c.imag) > _REAL_RTOL * jnp.abs(c), c, c.real + 0j)
    roots = jnp.concatenate([r.astype(c.dtype), c, jnp.conj(c)])
    total = jnp.sum(jnp.abs(roots))
    tr1 = jnp.abs(jnp.sum(roots) - jnp.trace(H)) <= _TRACE_RTOL * total
    tr2 = (jnp.abs(jnp.sum(roots ** 2) - jnp.sum(H * H.T))
           <= _TRACE_RTOL * jnp.sum(jnp.abs(roots) ** 2))
    ok = small & converged & tr1 & tr2 & jnp.all(jnp.isfinite(roots))
    return jnp.where(ok, _sorted(roots), jnp.nan), ok


def _sorted(z):
    """z by modulus, each conjugate pair with its upper member first (the order
    `sorted_eigvals` gives LAPACK's eigenvalues), by a sorting network: under
    vmap its compare-and-swaps are elementwise over the samples, where XLA's
    sort of each row cost 0.7 us per sample of the demo regulator (measured)."""
    key = jnp.abs(z)
    k, v = [key[i] for i in range(z.shape[0])], [z[i] for i in range(z.shape[0])]
    for i, j in sorting_network(z.shape[0]):
        swap = (k[i] > k[j]) | ((k[i] == k[j]) & (v[i].imag < v[j].imag))
        k[i], k[j] = jnp.where(swap, k[j], k[i]), jnp.where(swap, k[i], k[j])
        v[i], v[j] = jnp.where(swap, v[j], v[i]), jnp.where(swap, v[i], v[j])
    return jnp.stack(v) if v else z


@functools.cache
def sorting_network(n: int) -> tuple[tuple[int, int], ...]:
    """Compare-and-swap pairs (i < j) that sort any n values: Batcher's
    odd-even merge sort (Batcher, "Sorting networks and their applications",
    AFIPS Spring Joint Computer Conference, 1968), for any n by leaving out
    the comparators that reach past the end (as if padded with +infinity).
    19 comparators for n = 8."""
    pairs = []
    p = 1
    while p < n:
        k = p
        while k >= 1:
            for j in range(k % p, n - k, 2 * k):
                for i in range(min(k, n - j - k)):
                    if (i + j) // (2 * p) == (i + j + k) // (2 * p):
                        pairs.append((i + j, i + j + k))
            k //= 2
        p *= 2
    return tuple(pairs)
