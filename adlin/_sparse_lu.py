"""A fixed-order sparse LU for many matrices of one pattern, fast under vmap.

A batch of samples (Monte Carlo, sweeps) solves thousands of small systems
whose matrices share one sparsity pattern and differ in values by a few tens
of percent: the Jacobians of one circuit at nearby bias points.  The LAPACK
call behind `jnp.linalg.solve` costs a few microseconds per 15 x 15 matrix in
per-call overhead, far more than the arithmetic.

`SparseLU` does the symbolic work once, on a reference matrix: the row order
of Gaussian elimination with partial pivoting on that matrix, and the pattern
with its fill-in (the static pivoting of circuit-matrix solvers that factor
once and then refactor in the same order; Davis & Palamadai Natarajan, "KLU",
ACM Trans. Math. Softw. 37(3), 2010, sec. 2).  `solve` then writes the
elimination out entry by entry, skipping structural zeros: every matrix entry
is one scalar of the program, so under `jax.vmap` each operation acts on a
contiguous vector of samples and XLA fuses the whole solve into a few loops
(measured on the demo regulator's Jacobians: about 0.5 us against 5-7 us for
the batched LAPACK call; benchmarks/throughput.py).

A fixed order is only safe while the matrix stays close to the reference, so
every solve checks itself: in every row, the residual of the dense matrix,
|M x - b|, must be within `CHECK_RTOL` of sum_j |M_ij| max_j |x_j| + |b_i|.  Where it is not (a tiny
pivot, an entry outside the pattern), the result is NaN, which callers
already treat as a failed solve; the batch engine then re-runs that sample
with the general solver.
"""

from __future__ import annotations

import functools
import warnings
from dataclasses import dataclass

import jax.numpy as jnp
import numpy as np
import scipy.linalg

#: Backward-error bound of an accepted solve (see the module docstring).  On
#: badly row-scaled matrices LAPACK's own solve reaches 9e-11 and the planned
#: one 1.3e-10 with an error no larger than LAPACK's (tests/test_sparse_lu.py,
#: seed 173554272; 1e-10 refused it); a bad row order errs by far more.
CHECK_RTOL = 1e-8
#: Largest elimination multiplier the "structure" check accepts (the row
#: order is that of partial pivoting on the reference matrix, where all are <= 1).
MAX_MULTIPLIER = 1e3
#: Largest size written out entry by entry; the program grows with the fill-in,
#: at worst as n^3, and so does its compile time.
MAX_SIZE = 40


@dataclass(frozen=True)
class SparseLU:
    """Row order and pattern (with fill-in) of an LU factorization, for `solve`.

    - `order`: original row index of each pivot row.
    - `pattern`: (row, column) pairs of the permuted matrix's structural
      nonzeros, fill-in included.
    """

    n: int
    order: tuple[int, ...]
    pattern: frozenset[tuple[int, int]]

    @classmethod
    def from_matrix(cls, M0, extra=()) -> SparseLU | None:
        """The plan for matrices like `M0` (and the nonzeros of each of `extra`).

        **Returns:** a `SparseLU`, or None when `M0` is empty, too big or singular
        (callers then keep the general solver).
        """
        M0 = np.asarray(M0, dtype=float)
        n = M0.shape[0]
        if M0.ndim != 2 or M0.shape != (n, n) or n == 0 or n > MAX_SIZE:
            return None
        if not np.all(np.isfinite(M0)):
            return None
        nz = M0 != 0
        for M in extra:
            nz |= np.asarray(M) != 0
        with warnings.catch_warnings():  # a singular M0 is an answer here, not a warning
            warnings.simplefilter("ignore", scipy.linalg.LinAlgWarning)
            lu, piv = scipy.linalg.lu_factor(M0, check_finite=False)
        if not np.all(np.abs(lu.diagonal()) > 1e-14 * np.max(np.abs(M0))):
            return None  # singular to working precision: nothing to refactor
        order = list(range(n))
        for k, p in enumerate(piv):
            order[k], order[p] = order[p], order[k]
        fill = nz[order].copy()
        for k in range(n):
            rows = [i for i in range(k + 1, n) if fill[i, k]]
            cols = [j for j in range(k + 1, n) if fill[k, j]]
            for i in rows:
                fill[i, cols] = True
        pattern = frozenset((int(i), int(j)) for i, j in zip(*np.nonzero(fill), strict=True))
        return cls(n=n, order=tuple(int(i) for i in order), pattern=pattern)

    def solve(self, M, b, check: str = "residual"):
        """x with M x = b for M (n, n) and b (n,) or (n, k); NaN where the check fails.

        Pure JAX: use it under jit and vmap (its derivative is that of the
        unrolled elimination, exact for matrices of the pattern).

        `check`: "residual" (the module docstring's test), or "structure": M
        has no nonzero outside the pattern and no elimination multiplier
        exceeds `MAX_MULTIPLIER` (bounded growth, so the solve is backward
        stable); where it fails, x is not finite (its first entry is NaN).
        The second is for Newton's steps: XLA fuses the residual
        test into the final select and recomputes it for every entry of x,
        15 times per sample on the demo's Jacobian (~2 us of ~20, profiled),
        while comparisons alone cost little.
        """
        if check not in ("residual", "structure"):
            raise ValueError(f"check must be 'residual' or 'structure', got {check!r}")
        n = self.n
        dtype = jnp.result_type(M, b)
        Mc, bc = M.astype(dtype), b.astype(dtype)
        rows = [{j: Mc[self.order[i], j] for j in range(n) if (i, j) in self.pattern}
                for i in range(n)]
        rhs = [bc[self.order[i]] for i in range(n)]
        structural = check == "structure"
        tame = [Mc[self.order[i], j] == 0 for i in range(n) for j in range(n)
                if structural and (i, j) not in self.pattern]
        for k in range(n):
            inv = 1.0 / rows[k][k]
            right = [(j, v) for j, v in rows[k].items() if j > k]
            for i in range(k + 1, n):
                if k not in rows[i]:
                    continue
                m = rows[i].pop(k) * inv
                if structural:
                    tame.append(jnp.abs(m) <= MAX_MULTIPLIER)
                for j, v in right:
                    rows[i][j] = rows[i][j] - m * v if j in rows[i] else -m * v
                rhs[i] = rhs[i] - m * rhs[k]
        x = [None] * n
        for i in reversed(range(n)):
            s = rhs[i]
            for j, v in rows[i].items():
                if j > i:
                    s = s - v * x[j]
            x[i] = s / rows[i][i]
        if structural:
            # NaN in the first entry only: callers test all(isfinite(x)), and a
            # select on every entry would recompute the test for each of them
            ok = functools.reduce(jnp.logical_and, tame, jnp.asarray(True))
            x[0] = jnp.where(ok, x[0], jnp.nan)
            return jnp.stack(x, axis=0)
        # The check uses every entry of M, inside the pattern or not, row by row
        # against the row's size times the largest |x_j|: elimination with
        # pivoting bounds the residual normwise, not entry by entry, so a row of
        # tiny entries must not be judged against its own products alone.
        # Written out entry by entry too, so that it fuses under vmap.
        xmax = x[0] if n == 1 else jnp.max(jnp.stack([jnp.abs(v) for v in x]), axis=0)
        xmax = jnp.abs(xmax)
        ok = jnp.asarray(True)
        for i in range(n):
            r, row = -bc[i], 0.0
            for j in range(n):
                r = r + Mc[i, j] * x[j]
                row = row + jnp.abs(Mc[i, j])
            ok = ok & jnp.all(jnp.abs(r) <= CHECK_RTOL * (row * xmax + jnp.abs(bc[i])))
        x = jnp.stack(x, axis=0)
        return jnp.where(ok & jnp.all(jnp.isfinite(x)), x, jnp.nan)
