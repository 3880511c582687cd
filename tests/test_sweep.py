"""adlin.sweep against closed forms of an RC low-pass with a source resistance.

The low-pass: a source v_s behind R_src feeds node a, R joins a to the
output node, C holds the output.  Node a has no storage, so the model is a
descriptor system with one algebraic unknown; its one pole is
-1/((R + R_src) C) and its DC output equals v_s (first-order RC circuit,
tau = R_total C: Alexander & Sadiku, Fundamentals of Electric Circuits,
5th ed., McGraw-Hill 2013, section 7.2).
"""

from __future__ import annotations

import functools

import jax.numpy as jnp
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import adlin

R_SRC = 50.0


@functools.cache
def low_pass() -> adlin.System:
    def current(x, u, p):
        va, vo = x[0], x[1]
        i_r = (va - vo) / p["R"]
        return jnp.stack([(va - u[0]) / p["R_src"] + i_r, -i_r])

    def charge(x, p):
        return jnp.stack([jnp.zeros_like(x[0]), p["C"] * x[1]])

    return adlin.System(current, charge, unknowns=("v_a", "v_out"), inputs={"v_s": 1.0},
                        outputs=("v_out",), params={"R": 1e3, "C": 1e-6, "R_src": R_SRC},
                        name="RC low-pass")


Rs = np.array([1e2, 1e3, 4.7e3, 1e4])
Cs = np.array([1e-9, 1e-7, 2.2e-6])


@functools.cache
def product_sweep():
    return adlin.sweep(low_pass(), {"R": Rs, "C": Cs}, of=["v_out", adlin.quantities.Pole(0)],
                       targets=[adlin.targets.StabilityMargin(-1e3)])


def test_product_grid_pole_is_minus_one_over_rc_everywhere():
    r = product_sweep()
    assert r.shape == (4, 3) and r.product
    assert r.varied.shape == (12, 2) and r.poles.shape == (12, 1)
    R, C = np.meshgrid(Rs, Cs, indexing="ij")
    np.testing.assert_array_equal(r.grid("R"), R)
    np.testing.assert_array_equal(r.grid("C"), C)
    expected = -1 / ((R + R_SRC) * C)  # Alexander & Sadiku, 5th ed., 7.2
    np.testing.assert_allclose(r.reshape(r.poles)[..., 0].real, expected, rtol=1e-12)
    np.testing.assert_array_equal(r.reshape(r.poles)[..., 0].imag, 0.0)
    np.testing.assert_allclose(r.grid("pole 0").real, expected, rtol=1e-12)
    np.testing.assert_allclose(r.grid("v_out"), 1.0, rtol=1e-12)  # no DC current through C
    # StabilityMargin(-1e3): every pole's real part at most -1000 rad/s
    np.testing.assert_array_equal(r.reshape(r.target_met)[..., 0], expected <= -1e3)
    assert r.yield_fraction() == pytest.approx(np.mean(expected <= -1e3))


def test_zipped_grid_pairs_the_values():
    r = adlin.sweep(low_pass(), {"R": Rs[:3], "C": Cs, "v_s": [0.5, 1.0, 2.0]}, product=False,
                    of=["v_out"])
    assert r.shape == (3,) and not r.product and r.poles.shape == (3, 1)
    np.testing.assert_allclose(np.asarray(r.poles)[:, 0].real, -1 / ((Rs[:3] + R_SRC) * Cs),
                               rtol=1e-12)
    np.testing.assert_allclose(r["v_out"], [0.5, 1.0, 2.0], rtol=1e-12)  # inputs may be swept


def test_progress_reports_every_chunk():
    calls = []
    r = adlin.sweep(low_pass(), {"R": np.linspace(1e3, 2e3, 10)}, chunk=4,
                    progress=lambda done, total: calls.append((done, total)))
    assert r.chunk == 4 and r.n == 10
    assert calls == [(4, 10), (8, 10), (10, 10)]
    np.testing.assert_allclose(np.asarray(r.poles)[:, 0].real,
                               -1 / ((np.linspace(1e3, 2e3, 10) + R_SRC) * 1e-6), rtol=1e-12)


def test_a_point_that_cannot_converge_is_listed_and_fails_the_yield():
    # R_src = 0 divides by zero in the model: the residual is not finite there
    r = adlin.sweep(low_pass(), {"R_src": [50.0, 0.0, 10.0]}, of=["v_out"],
                    targets=[adlin.targets.StabilityMargin(-1.0)])
    fails = r.failures()
    assert [f["index"] for f in fails] == [1]
    assert fails[0]["values"] == {"R_src": 0.0}
    assert fails[0]["status"] == 3 and "non-finite" in fails[0]["reason"]
    assert r.converged.tolist() == [True, False, True]
    assert r.target_met[:, 0].tolist() == [True, False, True]
    assert r.yield_fraction() == pytest.approx(2 / 3)
    assert np.isnan(np.asarray(r.poles)[1]).all()
    for row in r.summary():
        assert row["count"] == 2
        assert all(np.isfinite(row[k]) for k in ("mean", "std", "min", "median", "max"))


def test_errors_name_the_culprit():
    s = low_pass()
    with pytest.raises(adlin.ParameterError, match="'Rx'.*closest valid.*'R'"):
        adlin.sweep(s, {"Rx": [1.0]})
    with pytest.raises(adlin.ParameterError, match="same number"):
        adlin.sweep(s, {"R": [1e3, 2e3], "C": [1e-6]}, product=False)
    with pytest.raises(adlin.ParameterError, match="empty"):
        adlin.sweep(s, {"R": []})
    with pytest.raises(adlin.ParameterError, match="not finite"):
        adlin.sweep(s, {"R": [1e3, np.inf]})
    with pytest.raises(adlin.ParameterError, match="chunk"):
        adlin.sweep(s, {"R": [1e3]}, chunk=0)
    with pytest.raises(adlin.ParameterError, match="unknown or output 'v_b'"):
        adlin.sweep(s, {"R": [1e3]}, of=["v_b"])
    with pytest.raises(adlin.ParameterError, match="grid="):
        adlin.sweep(s, {})


def test_traced_values_are_refused_with_a_clear_error():
    import jax

    def f(r):
        return adlin.sweep(low_pass(), {"R": r}).x

    with pytest.raises(adlin.AnalysisError, match="concrete values"):
        jax.jit(f)(jnp.array([1e3, 2e3]))
    with pytest.raises(adlin.AnalysisError, match="concrete values"):
        jax.grad(lambda c: adlin.sweep(low_pass(), {"R": [1e3]}, params={"C": c}).n)(1e-6)


_decades = st.floats(min_value=-1.0, max_value=1.0)


@settings(max_examples=15, deadline=None)
@given(st.lists(st.tuples(_decades, _decades), min_size=8, max_size=8))
def test_zipped_pole_law_over_random_values(points):
    # R from 100 ohm to 10 kohm and C from 0.1 uF to 10 uF, log-uniform; 8 points each run
    # reuse one compiled chunk.  tau = (R + R_src) C (Alexander & Sadiku, 5th ed., 7.2).
    R = 1e3 * 10.0 ** np.array([a for a, _ in points])
    C = 1e-6 * 10.0 ** np.array([b for _, b in points])
    r = adlin.sweep(low_pass(), {"R": R, "C": C}, product=False)
    np.testing.assert_allclose(np.asarray(r.poles)[:, 0].real, -1 / ((R + R_SRC) * C), rtol=1e-11)


def test_the_nominal_point_is_remembered_per_nominal_values_only():
    """Runs about the same nominal values reuse its operating point and plans;
    other values get their own, equal to a fresh `adlin.steady_state` (the
    DC output equals v_s, Alexander & Sadiku, 5th ed., 7.2), and the memo
    stays bounded."""
    from adlin._compile import compile
    from adlin._design import nominal_point as memo

    system = low_pass()
    compiled = compile(system)
    memo._MEMO.pop(compiled, None)
    first, plans = memo.nominal_point(compiled, {"v_s": 2.0}, None, plans=True)
    again, plans_again = memo.nominal_point(compiled, {"v_s": 2.0}, None, plans=True)
    assert again is first and plans_again is plans
    other, _ = memo.nominal_point(compiled, {"v_s": 2.0 + 1e-12}, None, plans=False)
    assert other is not first
    np.testing.assert_allclose(np.asarray(other.x), [2.0 + 1e-12] * 2, rtol=1e-14)
    np.testing.assert_array_equal(np.asarray(other.x),
                                  np.asarray(adlin.steady_state(system, {"v_s": 2.0 + 1e-12}).x))
    for k in range(memo.MEMO_SIZE + 3):
        memo.nominal_point(compiled, None, {"R": 1e3 + k}, plans=False)
    assert len(memo._MEMO[compiled]) == memo.MEMO_SIZE
    fresh, _ = memo.nominal_point(compiled, {"v_s": 2.0}, None, plans=False)
    assert fresh is not first  # evicted, solved again
    np.testing.assert_array_equal(np.asarray(fresh.x), np.asarray(first.x))
