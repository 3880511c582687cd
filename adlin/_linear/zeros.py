"""Transmission zeros of a SISO state-space model, jittable and differentiable.

The zeros are the finite generalized eigenvalues of the system pencil
(M, N) = ([[A, b], [c, d]], [[I, 0], [0, 0]]) (Rosenbrock, State-Space and
Multivariable Theory, 1970; Emami-Naeini & Van Dooren, Automatica 18(4),
1982).  JAX has no generalized eigensolver, and shift-invert tricks lose
accuracy on the multiple infinite eigenvalues a high relative degree creates,
so the values come from LAPACK's QZ (scipy.linalg.eig) through
`jax.pure_callback`, and the derivative from first-order perturbation theory
of a simple generalized eigenvalue: dz = w^H dM v / (w^H N v)
(Stewart & Sun, Matrix Perturbation Theory, 1990, ch. VI).

The result has fixed length n; zeros at infinity are returned as `inf`.
"""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np
import scipy.linalg

INFINITE_TOL = 1e-10


def _pencil(A, b, c, d):
    n = A.shape[0]
    top = jnp.concatenate([A, b[:, None]], axis=1)
    bottom = jnp.concatenate([c[None, :], jnp.reshape(d, (1, 1))], axis=1)
    M = jnp.concatenate([top, bottom], axis=0)
    N = jnp.diag(jnp.concatenate([jnp.ones(n), jnp.zeros(1)]))
    return M, N


def _host_zeros(M: np.ndarray, N: np.ndarray):
    """Zeros (padded with inf), with right and left eigenvectors, on the host."""
    M = np.asarray(M, dtype=float)
    N = np.asarray(N, dtype=float)
    n = M.shape[0] - 1
    w, vl, vr = scipy.linalg.eig(M, N, left=True, right=True, homogeneous_eigvals=True)
    alpha, beta = w
    scale = max(np.max(np.abs(M)), 1e-300)
    finite = np.abs(beta) * scale > INFINITE_TOL * np.abs(alpha)
    finite &= np.abs(beta) > 0
    z = np.full(n + 1, np.inf + 0j)
    z[finite] = alpha[finite] / beta[finite]
    order = np.lexsort((z.imag, np.abs(z)))
    z, vl, vr = z[order], vl[:, order], vr[:, order]
    return z[:n].astype(complex), vl[:, :n].astype(complex), vr[:, :n].astype(complex)


def _callback(M, N):
    n = M.shape[-1] - 1
    shapes = (
        jax.ShapeDtypeStruct(M.shape[:-2] + (n,), jnp.complex128),
        jax.ShapeDtypeStruct(M.shape[:-2] + (n + 1, n), jnp.complex128),
        jax.ShapeDtypeStruct(M.shape[:-2] + (n + 1, n), jnp.complex128),
    )
    return jax.pure_callback(_host_zeros, shapes, M, N, vmap_method="sequential")


@jax.custom_jvp
def _pencil_zeros(M, N):
    return _callback(M, N)[0]


@_pencil_zeros.defjvp
def _pencil_zeros_jvp(primals, tangents):
    M, N = primals
    dM, _ = tangents  # N is constant
    z, vl, vr = _callback(M, N)
    finite = jnp.isfinite(z)
    num = jnp.einsum("ik,ij,jk->k", jnp.conj(vl), dM.astype(jnp.complex128), vr)
    den = jnp.einsum("ik,ij,jk->k", jnp.conj(vl), N.astype(jnp.complex128), vr)
    dz = jnp.where(finite, num / jnp.where(finite, den, 1.0), 0.0)
    return z, dz


@jax.jit
def siso_zeros(A, b, c, d):
    """Zeros of c (sI - A)^-1 b + d, length n, `inf` for zeros at infinity."""
    if A.shape[0] == 0:
        return jnp.zeros((0,), jnp.complex128)
    M, N = _pencil(A, b, c, d)
    return _pencil_zeros(M, N)


def host_siso_zeros(A, b, c, d) -> np.ndarray:
    """`siso_zeros` for concrete numpy arrays, on the host: nothing to compile.

    A program holding a host callback is never written to the persistent
    compilation cache, so the jitted form compiled on every `adlin demo`.
    """
    n = A.shape[0]
    if n == 0:
        return np.zeros((0,), complex)
    M = np.block([[A, b[:, None]], [c[None, :], np.reshape(d, (1, 1))]])
    N = np.diag(np.concatenate([np.ones(n), np.zeros(1)]))
    return _host_zeros(M, N)[0]
