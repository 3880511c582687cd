"""The planned sparse LU of batched runs (`adlin._sparse_lu`, `adlin._design.fast_path`).

Outside references: numpy.linalg.solve (LAPACK getrf/getrs, partial pivoting)
for the solves, and a hand nodal analysis (Alexander & Sadiku, Fundamentals of
Electric Circuits, 5th ed., McGraw-Hill 2013, ch. 3, nodal analysis with a
dependent source; ch. 7.2 for the RC time constant) for the batch engine's
results with and without the plans.
"""

from __future__ import annotations

import functools

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

import adlin
from adlin._design import batch
from adlin._design.fast_path import plan_at
from adlin._sparse_lu import SparseLU


def _pattern_matrix(rng, n, density):
    """A random sparse matrix with a strong but permuted diagonal (pivoting needed)."""
    M = rng.normal(size=(n, n)) * (rng.uniform(size=(n, n)) < density)
    M[np.arange(n), rng.permutation(n)] += 5.0 * np.sign(rng.normal(size=n))
    return M


@settings(max_examples=12, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), n=st.integers(1, 10), spread=st.floats(0.0, 0.3))
def test_planned_solve_equals_lapack_on_matrices_of_the_pattern(seed, n, spread):
    rng = np.random.default_rng(seed)
    M0 = _pattern_matrix(rng, n, 0.3)
    plan = SparseLU.from_matrix(M0)
    assert plan is not None
    # the same pattern, every value moved by up to +-spread
    Ms = M0 * (1.0 + spread * rng.uniform(-1, 1, size=(8, n, n)))
    b = rng.normal(size=(8, n, 2))
    x = np.asarray(jax.jit(jax.vmap(plan.solve))(jnp.asarray(Ms), jnp.asarray(b)))
    ref = np.linalg.solve(Ms, b)
    ok = np.all(np.isfinite(x), axis=(1, 2))
    # a lane may refuse (NaN) only if LAPACK's own answer is ill-conditioned there
    assert np.all(ok | (np.linalg.cond(Ms) > 1e6))
    np.testing.assert_allclose(x[ok], ref[ok], rtol=1e-8, atol=1e-10 * np.abs(ref).max())


@settings(max_examples=12, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), n=st.integers(2, 10), spread=st.floats(0.0, 0.3))
def test_structural_check_solves_as_lapack_and_refuses_entries_outside_the_pattern(
        seed, n, spread):
    """check="structure" (Newton's steps): the same answers as LAPACK on matrices
    of the pattern; a nonzero outside the pattern makes x non-finite."""
    rng = np.random.default_rng(seed)
    M0 = _pattern_matrix(rng, n, 0.3)
    plan = SparseLU.from_matrix(M0)
    Ms = M0 * (1.0 + spread * rng.uniform(-1, 1, size=(8, n, n)))
    b = rng.normal(size=(8, n))
    solve = jax.jit(jax.vmap(functools.partial(plan.solve, check="structure")))
    x = np.asarray(solve(jnp.asarray(Ms), jnp.asarray(b)))
    ref = np.linalg.solve(Ms, b[..., None])[..., 0]
    well = np.linalg.cond(Ms) < 1e6
    assert np.all(np.isfinite(x[well]))
    np.testing.assert_allclose(x[well], ref[well], rtol=1e-8, atol=1e-10 * np.abs(ref).max())
    outside = [(i, j) for i in range(n) for j in range(n) if M0[i, j] == 0.0
               and (plan.order.index(i), j) not in plan.pattern]
    if outside:
        i, j = outside[rng.integers(len(outside))]
        Ms[:, i, j] = 1e-3
        x = np.asarray(solve(jnp.asarray(Ms), jnp.asarray(b)))
        assert not np.any(np.all(np.isfinite(x), axis=1))


def test_an_unknown_check_is_refused():
    plan = SparseLU.from_matrix(np.eye(3))
    with pytest.raises(ValueError, match="check"):
        plan.solve(jnp.eye(3), jnp.ones(3), check="none")


@settings(max_examples=12, deadline=None)
@given(seed=st.integers(0, 2**31 - 1))
@example(seed=173554272)  # residual 1.3e-10 of the row sizes (LAPACK's: 9e-11)
def test_badly_scaled_rows_and_zero_right_hand_sides_are_accepted(seed):
    """Circuit rows mix siemens and volts, and Newton's steps near a solution mix
    sizes and exact zeros: a well-conditioned (after row scaling) system must not
    be refused, and must match LAPACK.  (A row-by-row check against the row's own
    products |M_ij x_j| refused such systems: rounding in x is relative to max |x|.)"""
    rng = np.random.default_rng(seed)
    n = 12
    M0 = _pattern_matrix(rng, n, 0.3) * 10.0 ** rng.uniform(-12, 0, size=(n, 1))
    plan = SparseLU.from_matrix(M0)
    Ms = M0 * (1.0 + 0.2 * rng.uniform(-1, 1, size=(8, n, n)))
    # steps whose entries span many decades (a branch current of 1e-21 A beside
    # a node moving by 1 mV), some exactly zero
    x_true = rng.normal(size=(8, n)) * 10.0 ** rng.uniform(-22, -3, size=(8, n))
    x_true[:, rng.uniform(size=n) < 0.3] = 0.0
    b = np.einsum("kij,kj->ki", Ms, x_true)
    x = np.asarray(jax.jit(jax.vmap(plan.solve))(jnp.asarray(Ms), jnp.asarray(b)))
    scaled = Ms / np.abs(Ms).max(axis=2, keepdims=True)
    well = np.linalg.cond(scaled) < 1e6
    assert np.all(np.isfinite(x[well]))
    ref = np.linalg.solve(Ms, b[..., None])[..., 0]
    for k in np.flatnonzero(well):
        np.testing.assert_allclose(x[k], ref[k], rtol=1e-7, atol=1e-9 * np.abs(ref[k]).max())


def test_mna_like_matrix_with_zero_diagonal_needs_the_planned_row_order():
    # a voltage source's branch row has a zero diagonal entry: the plan's row
    # order (from partial pivoting on the reference) must move it
    M0 = np.array([[1e-3, 0.0, 1.0], [0.0, 2e-3, -1.0], [1.0, -1.0, 0.0]])
    plan = SparseLU.from_matrix(M0)
    b = np.array([0.0, 1e-3, 5.0])
    np.testing.assert_allclose(np.asarray(plan.solve(jnp.asarray(M0), jnp.asarray(b))),
                               np.linalg.solve(M0, b), rtol=1e-12)


def test_entry_outside_the_pattern_or_a_vanishing_pivot_gives_nan():
    rng = np.random.default_rng(3)
    M0 = _pattern_matrix(rng, 6, 0.2)
    plan = SparseLU.from_matrix(M0)
    inv = {row: i for i, row in enumerate(plan.order)}
    r, c = next((r, c) for r in range(6) for c in range(6) if (inv[r], c) not in plan.pattern)
    M = M0.copy()
    M[r, c] = 0.1 * np.abs(M0).max()  # an entry the plan does not know
    assert np.all(np.isnan(np.asarray(plan.solve(jnp.asarray(M), jnp.ones(6)))))
    # the plan's first pivot driven to zero: fixed order cannot work, LAPACK can
    k = plan.order[0]
    M = M0.copy()
    M[k, 0] = 0.0
    if np.linalg.cond(M) < 1e8:
        assert np.all(np.isnan(np.asarray(plan.solve(jnp.asarray(M), jnp.ones(6)))))
    assert SparseLU.from_matrix(np.zeros((3, 3))) is None  # singular: no plan


R_SRC, R_B = 50.0, 2e3


@functools.cache
def tapped_low_pass() -> adlin.System:
    """v_s behind R_src into node a, R from a to out, C at out; a transconductance
    g_m copies v_out into R_B at node b.  With g_m = 0 (nominal) the Jacobian
    entry d(KCL_b)/d(v_out) = -g_m is exactly zero, so it is outside the plan."""
    def current(x, u, p):
        va, vo, vb = x
        i_r = (va - vo) / p["R"]
        return jnp.stack([(va - u[0]) / p["R_src"] + i_r, -i_r, vb / p["R_b"] - p["g_m"] * vo])

    def charge(x, p):
        return jnp.stack([jnp.zeros_like(x[0]), p["C"] * x[1], jnp.zeros_like(x[2])])

    return adlin.System(current, charge, unknowns=("v_a", "v_out", "v_b"), inputs={"v_s": 1.0},
                        outputs=("v_b",), params={"R": 1e3, "C": 1e-6, "R_src": R_SRC,
                                                  "R_b": R_B, "g_m": 0.0}, name="tapped RC")


def test_batch_with_plans_matches_closed_forms_and_reruns_what_the_plan_cannot_solve():
    """DC: v_out = v_s and v_b = g_m R_B v_s; the one pole is -1/((R + R_src) C).

    Newton starts every sample at the nominal point (v_s = 1 V), so a sample with
    g_m != 0 and v_s != 1 V needs the Jacobian entry -g_m that the plan omits."""
    system = tapped_low_pass()
    R = np.array([1e3, 1.2e3, 0.8e3, 1.1e3, 1e3, 0.9e3])
    gm = np.array([0.0, 0.0, 1e-3, 0.0, 2e-3, 5e-4])  # nonzero: outside the plan
    vs = np.array([1.0, 1.5, 0.7, 2.0, 1.2, 0.9])  # moves v_out, so the entry matters
    grid = {"R": R, "g_m": gm, "v_s": vs}
    fast = adlin.sweep(system, grid, product=False, fast_solves=True)
    general = adlin.sweep(system, grid, product=False, fast_solves=False)
    assert np.all(np.asarray(fast.converged))
    x = np.asarray(fast.x)
    np.testing.assert_allclose(x[:, 1], vs, rtol=1e-12)
    np.testing.assert_allclose(x[:, 2], gm * R_B * vs, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(np.asarray(fast.poles)[:, 0].real, -1.0 / ((R + R_SRC) * 1e-6),
                               rtol=1e-12)
    np.testing.assert_allclose(x, np.asarray(general.x), rtol=1e-12, atol=1e-15)
    # the planned program alone leaves exactly the g_m != 0 samples unfinished
    cs = adlin.compile(system)
    op = adlin.steady_state(system)
    plans = plan_at(cs, op.x, op.u, op.p)
    pidx, uidx = batch.resolve_names(system, ("R", "g_m", "v_s"), "test")
    fn = batch._program(cs, pidx, uidx, (), (), plans)
    out = fn(jnp.asarray(np.stack([R, gm, vs], axis=1)), op.u, op.p, op.x, jnp.zeros((0,)))
    np.testing.assert_array_equal(np.asarray(out[2]), gm == 0.0)


def test_fast_solves_must_be_a_bool_or_none():
    with pytest.raises(adlin.ParameterError, match="fast_solves"):
        adlin.sweep(tapped_low_pass(), {"R": [1e3]}, fast_solves="yes")
