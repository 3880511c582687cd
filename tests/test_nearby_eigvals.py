"""Eigenvalues found from nearby ones (`adlin._linear.nearby_eigvals`), the pole
search of the batch engine's fast path.

References: mpmath's eigenvalue routine at 40 digits on the same float64
matrices (a reference library); the first-order eigenvalue error bound of the
LAPACK Users' Guide (3rd ed., 1999, sec. 4.8); the series RLC poles
s = -R/(2L) +- sqrt((R/(2L))^2 - 1/(LC)) (Alexander & Sadiku, Fundamentals of
Electric Circuits, 6th ed., sec. 8.5).
"""

from __future__ import annotations

import jax
import jax.numpy as jnp
import mpmath
import numpy as np
import pytest
import scipy.linalg
from closed_forms import series_rlc
from hypothesis import given, settings
from hypothesis import strategies as st

import adlin
from adlin._linear.model import sorted_eigvals
from adlin._linear.nearby_eigvals import (
    NearbyPlan,
    _sorted,
    distinct,
    eigvals_near,
    sorting_network,
)


def graded_matrix(seed: int = 0, spread: float = 0.0, shape_seed: int = 0) -> np.ndarray:
    """A real 7 x 7 matrix with poles over eight decades, one complex pair, badly
    scaled rows and columns: like a reduced circuit model.  With `spread`, the
    poles move by up to +-spread and the basis by a tenth of that (random with
    `seed`), as parts within tolerance move a circuit's poles."""
    rng = np.random.default_rng(seed)
    move = 1 + spread * rng.uniform(-1, 1, 8)
    blocks = np.zeros((7, 7))
    for k, lam in enumerate([-1e3, -3e6, -1e8, -2e9, -5e10]):
        blocks[k, k] = lam * move[k]
    re, im = -1e5 * move[5], 2e5 * move[6]
    blocks[5:, 5:] = [[re, im], [-im, re]]  # re +- im j
    shape = np.random.default_rng(shape_seed)
    V = np.eye(7) + 0.3 * shape.standard_normal((7, 7))
    V = V * (1 + 0.1 * spread * rng.uniform(-1, 1, V.shape))
    T = np.diag(10.0 ** shape.uniform(-3, 3, 7)) @ V
    return T @ blocks @ np.linalg.inv(T)


def mp_eigvals(A: np.ndarray) -> np.ndarray:
    mpmath.mp.dps = 40
    E, _ = mpmath.eig(mpmath.matrix(A.tolist()))
    z = np.array([complex(e) for e in E])
    return z[np.lexsort((-z.imag, np.abs(z)))]


def error_bound(A) -> np.ndarray:
    """eps ||A_b||_F kappa_i / |lambda_i| per eigenvalue, in sorted_eigvals' order:
    the first-order error bound of a backward-stable method on the balanced
    matrix A_b, kappa_i = 1/|y_i^H x_i| for unit eigenvectors (LAPACK Users'
    Guide, 3rd ed., 1999, sec. 4.8)."""
    _, (d, _) = scipy.linalg.matrix_balance(A, permute=False, separate=True)
    Ab = A * (d[None, :] / d[:, None])
    lam, vl, vr = scipy.linalg.eig(Ab, left=True, right=True)
    kappa = 1.0 / np.abs(np.sum(vl.conj() * vr, axis=0))
    order = np.lexsort((-lam.imag, np.abs(lam)))
    eps = np.finfo(float).eps
    return (eps * np.linalg.norm(Ab) * kappa / np.abs(lam))[order]


def assert_as_accurate_as_lapack(z, A):
    """Each eigenvalue within 10x the larger of LAPACK's error against mpmath's
    and the standard error bound (`error_bound`), in the order of
    `sorted_eigvals` (which is LAPACK's, sorted by modulus)."""
    ref = mp_eigvals(A)
    lapack = np.asarray(sorted_eigvals(jnp.asarray(A)))
    err = np.abs(z - ref) / np.abs(ref)
    lapack_err = np.abs(lapack - ref) / np.abs(ref)
    allowed = 10 * np.maximum(lapack_err, error_bound(A))
    assert np.all(err <= allowed), (err, lapack_err, allowed)
    np.testing.assert_allclose(z, lapack, rtol=1e-6)


def run(A, A0):
    plan = NearbyPlan.at(A0)
    z, ok = jax.jit(lambda a: eigvals_near(a, plan))(jnp.asarray(A))
    return np.asarray(z), bool(ok)


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), spread=st.floats(0.0, 0.3))
def test_perturbed_matrices_match_the_high_precision_eigenvalues(seed, spread):
    """Every entry moved by up to +-spread (a tolerance study): each eigenvalue
    agrees with mpmath's as closely as LAPACK's (`assert_as_accurate_as_lapack`).
    Entrywise spreads of this graded matrix move some eigenvalues far, even
    into the right half-plane: a harder start than a circuit's tolerances."""
    A0 = graded_matrix()
    rng = np.random.default_rng(seed)
    A = A0 * (1 + spread * rng.uniform(-1, 1, A0.shape))
    z, ok = run(A, A0)
    if not ok:  # handed back to LAPACK: all NaN, never a wrong number
        assert np.all(np.isnan(z))
        return
    assert_as_accurate_as_lapack(z, A)


def test_tolerance_spreads_are_solved_and_keep_the_lapack_order():
    """Poles moved by up to +-30 %: always solved, in sorted_eigvals' order."""
    A0 = graded_matrix()
    for seed in range(1, 21):
        A = graded_matrix(seed, spread=0.3)
        z, ok = run(A, A0)
        assert ok
        assert_as_accurate_as_lapack(z, A)


def test_pairs_are_exact_conjugates_and_real_eigenvalues_exactly_real():
    A0 = graded_matrix()
    z, ok = run(graded_matrix(3, spread=0.1), A0)
    assert ok
    real = np.abs(z.imag) < 1e-6 * np.abs(z)
    assert np.all(z.imag[real] == 0.0)
    upper = np.flatnonzero(z.imag > 0)
    assert upper.size == 1 and z[upper[0] + 1] == np.conj(z[upper[0]])


def test_a_double_eigenvalue_is_handed_back_or_as_accurate_as_lapack():
    """A Jordan block: the eigenvalue is only sqrt(eps)-determined for any method."""
    J = np.array([[-2.0, 1.0, 0.3], [0.0, -2.0, 0.7], [0.0, 0.0, -5.0]])
    J0 = J.copy()
    J0[1, 1] = -2.5  # distinct nominal starts
    T = np.array([[1.0, 0.4, -0.3], [0.2, 1.0, 0.5], [-0.6, 0.1, 1.0]])
    A, A0 = (T @ M @ np.linalg.inv(T) for M in (J, J0))
    z, ok = run(A, A0)
    lapack = np.asarray(sorted_eigvals(jnp.asarray(A)))
    ref = np.array([-2.0, -2.0, -5.0])
    if ok:
        assert np.max(np.abs(z - ref)) <= max(10 * np.max(np.abs(lapack - ref)), 1e-12)
    else:
        assert np.all(np.isnan(z))


def test_distinct_starts():
    assert distinct(np.array([-1.0, -2.0, -1 + 1j, -1 - 1j]))
    assert not distinct(np.array([-1.0, -1.0 + 1e-9]))
    assert not distinct(np.array([-1.0, np.nan]))


@pytest.mark.parametrize("nominal_zeta", [1.5, 0.5])
@pytest.mark.parametrize("zeta", [0.3, 0.9, 0.99, 1.02, 1.5, 3.0])
def test_batched_series_rlc_poles_across_critical_damping(zeta, nominal_zeta):
    """The nominal circuit is overdamped (two real poles) or underdamped (a
    pair); the samples cross to the other kind.  The search keeps each root's
    kind, so a crossing sample must be handed back: the fast path must give the
    closed-form poles, found from the nominal ones or by the general path."""
    L, C = 1e-3, 1e-6
    r_crit = 2 * np.sqrt(L / C)
    system = series_rlc(nominal_zeta * r_crit, L, C)
    R = zeta * r_crit * np.array([1.0, 0.999, 1.001])
    res = adlin.sweep(system, {"R": R}, product=False, fast_solves=True)
    a = R / (2 * L)
    root = np.sqrt((a**2 - 1 / (L * C)).astype(complex))
    expected = np.stack([-a + root, -a - root], axis=1)
    got = np.asarray(res.poles)
    for g, e in zip(got, expected, strict=True):
        np.testing.assert_allclose(np.sort_complex(g), np.sort_complex(e), rtol=1e-9)


@pytest.mark.parametrize("n", range(17))
def test_sorting_network_sorts_every_input(n):
    """By the 0-1 principle a comparator network sorts every input if it sorts
    every sequence of zeros and ones (Knuth, The Art of Computer Programming,
    vol. 3, 2nd ed., sec. 5.3.4, Theorem Z): all 2^n of them, checked at
    once.  For n = 2^k, Batcher's network has (k^2 - k + 4) 2^(k-2) - 1
    comparators (same section, from memory): 5, 19 and 63 for 4, 8 and 16."""
    net = sorting_network(n)
    v = (np.arange(1 << n)[:, None] >> np.arange(n)[None, :]) & 1
    for i, j in net:
        assert i < j < n
        lo, hi = np.minimum(v[:, i], v[:, j]), np.maximum(v[:, i], v[:, j])
        v[:, i], v[:, j] = lo, hi
    assert np.all(np.diff(v, axis=1) >= 0)
    if n in (4, 8, 16):
        k = n.bit_length() - 1
        assert len(net) == (k * k - k + 4) * 2 ** (k - 2) - 1


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), n_real=st.integers(0, 9), n_pairs=st.integers(0, 7))
def test_sorted_roots_are_in_the_order_of_sorted_eigvals(seed, n_real, n_pairs):
    """The network's order equals `sorted_eigvals`' on LAPACK's eigenvalues of a
    real matrix with those eigenvalues (block diagonal in a random basis)."""
    n = n_real + 2 * n_pairs
    if n == 0:
        return
    rng = np.random.default_rng(seed)
    blocks = np.zeros((n, n))
    blocks[range(n_real), range(n_real)] = -(10.0 ** rng.uniform(0, 6, n_real))
    for k in range(n_pairs):
        a, b = -(10.0 ** rng.uniform(0, 6)), 10.0 ** rng.uniform(0, 6)
        i = n_real + 2 * k
        blocks[i:i + 2, i:i + 2] = [[a, b], [-b, a]]
    T = np.eye(n) + 0.2 * rng.standard_normal((n, n))
    lam = np.asarray(jnp.linalg.eigvals(jnp.asarray(T @ blocks @ np.linalg.inv(T))))
    expected = np.asarray(sorted_eigvals(jnp.asarray(T @ blocks @ np.linalg.inv(T))))
    got = np.asarray(jax.jit(_sorted)(jnp.asarray(rng.permutation(lam))))
    np.testing.assert_array_equal(got, expected)
