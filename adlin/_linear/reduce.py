"""Exact elimination of the algebraic unknowns of an index-1 descriptor model.

With the constant bases found at compile time (see `adlin._structure`),
L E R = [[E11, 0], [0, 0]] and, writing L A R, L B, C R in the same blocks,

    E11 z1' = (A11 - A12 A22^-1 A21) z1 + (B1 - A12 A22^-1 B2) u
    y       = (C1 - C2 A22^-1 A21) z1 + (D - C2 A22^-1 B2) u

(Schur complement; Dai, Singular Control Systems, Springer 1989, sec. 1.2).
Everything is a matrix expression, so it runs under jit, vmap and grad.
"""

from __future__ import annotations

import jax.numpy as jnp


def reduce_descriptor(E, A, B, C, D, left, right, r: int, solve_a22=jnp.linalg.solve,
                      solve_e11=jnp.linalg.solve, state_only: bool = False):
    """Return (Ar, Br, Cr, Dr, off_block, a22_cond) for the state-space form with E = I.

    `solve_a22`, `solve_e11` solve with the blocks A22 and E11 (the batch engine
    passes fixed-order sparse solvers, `adlin._sparse_lu`).  `state_only`:
    Ar alone (Br, Cr, Dr are None), without the input columns in the solves
    (the batch engine's poles; ~0.5 us of a ~16 us sample, profiled).

    `off_block` is max |E12|,|E21|,|E22| relative to max |E11|: near zero when the
    compile-time partition holds at this operating point.
    """
    Ep = left @ E @ right
    Ap = left @ A @ right
    Bp = left @ B
    Cp = C @ right
    E11 = Ep[:r, :r]
    A11, A12, A21, A22 = Ap[:r, :r], Ap[:r, r:], Ap[r:, :r], Ap[r:, r:]
    B1, B2 = Bp[:r], Bp[r:]
    C1, C2 = Cp[:, :r], Cp[:, r:]
    if state_only:
        As = A11 - A12 @ solve_a22(A22, A21) if A22.shape[0] else A11
        Ar = solve_e11(E11, As) if r else As
        return Ar, None, None, None, None, None
    if A22.shape[0]:
        X = solve_a22(A22, jnp.concatenate([A21, B2], axis=1))
        X21, XB = X[:, :r], X[:, r:]
        As = A11 - A12 @ X21
        Bs = B1 - A12 @ XB
        Cr = C1 - C2 @ X21
        Dr = D - C2 @ XB
        a22_cond = jnp.linalg.cond(A22)
    else:
        As, Bs, Cr, Dr = A11, B1, C1, D
        a22_cond = jnp.asarray(1.0)
    if r:
        Y = solve_e11(E11, jnp.concatenate([As, Bs], axis=1))
        Ar, Br = Y[:, :r], Y[:, r:]
        scale = jnp.max(jnp.abs(E11))
    else:
        Ar, Br = As, Bs
        scale = jnp.asarray(1.0)
    off = jnp.concatenate([Ep[:r, r:].ravel(), Ep[r:, :].ravel(), jnp.zeros(1)])
    return Ar, Br, Cr, Dr, jnp.max(jnp.abs(off)) / scale, a22_cond
