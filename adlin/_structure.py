"""Compile-time structure of a model: which parts are dynamic, which algebraic.

The storage Jacobian E = dq/dx of a circuit is usually singular (nodes with no
capacitance, source branch currents).  Its null spaces are fixed by topology,
not by element values, so they are found once, numerically, at a generic test
point, and kept as constant bases: a right basis R = [S_d, N_r] (x = R z) and a
left basis L = [S_r^T; N_l^T].  In those coordinates E is block diagonal
[[E11, 0], [0, 0]] and an index-1 system reduces exactly by the Schur complement
(Brenan, Campbell & Petzold, Numerical Solution of Initial-Value Problems in
Differential-Algebraic Equations, SIAM 1996, sec. 2.2).  Because the bases are
constants, the reduction is differentiable with no SVD in the traced path.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

RANK_TOL = 1e-10  # relative, after row/column equilibration


@dataclass(frozen=True)
class Structure:
    """Dynamic/algebraic partition found at compile time (plain numpy)."""

    n_dynamic: int
    right: np.ndarray  # (n, n): x = right @ z, first n_dynamic columns select unknowns
    left: np.ndarray  # (n, n): rows combine equations, last rows span the left null space
    dynamic_columns: tuple[int, ...]  # unknowns that carry the reduced states
    dynamic_rows: tuple[int, ...]


def equilibrate(M: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Scale rows, then columns, to unit max-abs; returns (scaled, row_scale, col_scale)."""
    M = np.asarray(M, dtype=float)
    rmax = np.max(np.abs(M), axis=1) if M.size else np.zeros(0)
    rs = np.where(rmax > 0, 1.0 / np.where(rmax > 0, rmax, 1.0), 1.0)
    M1 = rs[:, None] * M
    cmax = np.max(np.abs(M1), axis=0) if M.size else np.zeros(0)
    cs = np.where(cmax > 0, 1.0 / np.where(cmax > 0, cmax, 1.0), 1.0)
    return M1 * cs[None, :], rs, cs


def null_spaces(M: np.ndarray, tol: float = RANK_TOL):
    """Rank and orthonormal-ish right/left null bases of M (equilibrated SVD)."""
    n = M.shape[0]
    if n == 0:
        return 0, np.zeros((0, 0)), np.zeros((0, 0))
    Ms, rs, cs = equilibrate(M)
    U, s, Vt = np.linalg.svd(Ms)
    smax = s[0] if s.size and s[0] > 0 else 1.0
    rank = int(np.sum(s > tol * smax))
    right = cs[:, None] * Vt[rank:].T  # M @ right == 0
    left = rs[:, None] * U[:, rank:]  # left.T @ M == 0
    # tidy: make each null vector unit max-norm with a positive largest entry
    for B in (right, left):
        for k in range(B.shape[1]):
            i = np.argmax(np.abs(B[:, k]))
            B[:, k] /= B[i, k]
    return rank, right, left


def find_structure(E: np.ndarray) -> Structure:
    """Partition the unknowns and equations of a model from its storage Jacobian."""
    E = np.asarray(E, dtype=float)
    n = E.shape[0]
    rank, right_null, left_null = null_spaces(E)
    Es, _, _ = equilibrate(E)
    cols = _pivots(Es, rank)
    rows = _pivots(Es.T, rank)
    S_d = np.eye(n)[:, cols]
    S_r = np.eye(n)[:, rows]
    right = np.concatenate([S_d, right_null], axis=1)
    left = np.concatenate([S_r, left_null], axis=1).T
    return Structure(rank, right, left, tuple(int(c) for c in cols), tuple(int(r) for r in rows))


def _pivots(M: np.ndarray, rank: int) -> list[int]:
    if rank == 0:
        return []
    _, _, piv = scipy.linalg.qr(M, pivoting=True, mode="economic")
    return sorted(int(i) for i in piv[:rank])
