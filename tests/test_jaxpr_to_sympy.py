"""The jaxpr -> sympy interpreter of benchmarks/jaxpr_to_sympy.py, and adlin against it.

The interpreter is the exact reference of benchmarks/jacobian_exactness.py, so
it is checked here against derivatives worked out by hand (sympy), including
a branch, a custom_jvp function and a scatter-add assembly; then adlin's
Jacobian of a small circuit is checked against it.
"""

from __future__ import annotations

import os
import sys

import jax
import jax.numpy as jnp
import mpmath
import numpy as np
import pytest
import sympy

import adlin

BENCHMARKS = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "benchmarks")
sys.path.insert(0, BENCHMARKS)
from jaxpr_to_sympy import interpret, to_float  # noqa: E402

X0, X1 = sympy.symbols("x0 x1", real=True)


def exact(expr_matrix, point):
    """Hand-derived Jacobian of a list of sympy expressions in (x0, x1) at point, 50 digits."""
    subs = {X0: sympy.Rational(point[0]), X1: sympy.Rational(point[1])}
    J = sympy.Matrix(expr_matrix).jacobian([X0, X1])
    with mpmath.workdps(50):
            return np.array([[mpmath.mpf(sympy.N(J[i, j].subs(subs), 50)) for j in range(2)]
                         for i in range(J.rows)], dtype=object)


def assert_close(J, J_ref, tol=1e-40):
    """Agreement of two object arrays of 50-digit mpmath numbers."""
    with mpmath.workdps(50):
        for a, b in zip(np.asarray(J).reshape(-1), np.asarray(J_ref).reshape(-1), strict=True):
            assert abs(a - b) <= tol * max(abs(b), 1), (a, b)


def test_elementary_functions():
    def f(x):
        return jnp.stack([jnp.exp(x[0]) * x[1] - jnp.log1p(x[0] ** 2),
                          jnp.tanh(x[1]) / jnp.sqrt(x[0]) + jnp.expm1(x[0] * x[1])])

    point = (0.3, -1.7)
    interp = interpret(f, jnp.asarray(point))
    exprs = interp.expressions()
    expected = [sympy.exp(X0) * X1 - sympy.log(1 + X0**2),
                sympy.tanh(X1) / sympy.sqrt(X0) + sympy.exp(X0 * X1) - 1]
    x0, x1 = interp.symbols
    for e, ref in zip(exprs, expected, strict=True):
        assert sympy.simplify(e.subs({x0: X0, x1: X1}) - ref) == 0
    assert_close(interp.jacobian(), exact(expected, point))
    np.testing.assert_allclose(to_float(interp.values()), f(jnp.asarray(point)), rtol=1e-15)


@pytest.mark.parametrize("point", [(0.5, 2.0), (-0.5, 3.0)])
def test_select_n_branch_and_custom_jvp(point):
    def f(x):
        branch = jnp.where(x[0] > 0, x[0] ** 3 * x[1], jnp.sin(x[0]) * x[1])
        return jnp.stack([branch, jax.nn.softplus(x[0] - x[1]), jnp.maximum(x[0], x[1] - 3.0),
                          jnp.abs(x[0] - x[1])])

    interp = interpret(f, jnp.asarray(point))
    active = X0**3 * X1 if point[0] > 0 else sympy.sin(X0) * X1
    peak = X0 if point[0] > point[1] - 3.0 else X1 - 3
    expected = [active, sympy.log(1 + sympy.exp(X0 - X1)), peak, X1 - X0]
    assert_close(interp.jacobian(), exact(expected, point), tol=1e-35)
    assert interp.ties == []
    assert "custom_jvp_call" in interp.primitives  # softplus goes through its primal


def test_scatter_add_assembly_and_gather():
    def f(x):
        idx = jnp.array([0, 2, 0, -1, 5])  # -1 wraps to the last node; 5 is dropped
        vals = jnp.stack([x[0] * x[1], jnp.exp(x[1]), 3.0 * x[0], x[1] ** 2, 100.0 * x[0]])
        nodes = jnp.zeros((4,)).at[idx].add(vals)
        return nodes[jnp.array([3, 2, 0])] * 2.0

    point = (1.25, -0.5)
    interp = interpret(f, jnp.asarray(point))
    assert {"scatter-add", "gather"} <= set(interp.primitives)
    expected = [2 * X1**2, 2 * sympy.exp(X1), 2 * (X0 * X1 + 3 * X0)]
    assert_close(interp.jacobian(), exact(expected, point))
    np.testing.assert_allclose(to_float(interp.values()), f(jnp.asarray(point)), rtol=1e-15)


def test_structural_and_control_flow_primitives_agree_with_jax():
    """Wider coverage (pad, dot_general, reductions, loops, cond, gather...) against jax.jacfwd."""

    def f(x):
        M = jnp.outer(x, x[::-1]) + jnp.eye(3)
        loop = jax.lax.fori_loop(0, 3, lambda i, v: v * x[0] + jnp.sin(v), x[1])
        while_ = jax.lax.while_loop(lambda s: s[0] < 4, lambda s: (s[0] + 1, s[1] * 1.5 + x[2]),
                                    (0, x[0]))[1]
        cond = jax.lax.cond(x[0] > 0.2, lambda v: v**2, lambda v: v**3, x[1])
        smooth = (jnp.clip(x, 0.1, 0.5) + jnp.sqrt(x) * jnp.tanh(x) + jax.nn.sigmoid(x)
                  + jnp.log(x) + x**0.7 + jnp.arctan2(x, 1.0 + x))
        return jnp.concatenate([
            M @ x,
            jnp.pad(x, (1, 2), constant_values=0.5),
            jax.lax.pad(x, 0.0, [(-1, 2, 1)]),
            jnp.cumsum(x**2),
            jax.lax.dynamic_slice(x, (jnp.int32(1),), (2,)),
            jax.lax.dynamic_update_slice(x, jnp.stack([x[0] * x[1]]), (jnp.int32(2),)),
            jnp.stack([loop, while_, cond]),
            jnp.sum(M, axis=0) + jnp.max(M, axis=1) - jnp.min(M, axis=0) + jnp.prod(M, axis=1),
            smooth,
            jnp.reshape(jnp.transpose(M), (9,))[jnp.array([1, 5, 7])],
            jnp.take(x, jnp.array([[0, 1], [2, 2]]), axis=0).sum(axis=1),
            jnp.fmod(x * 7.0, 1.0) + jnp.floor(x) * x + jnp.abs(x - 0.3),
        ])

    x = jnp.asarray([0.31, 0.7, 0.45])
    interp = interpret(f, x)
    assert {"while", "scan", "cond", "pad", "dot_general", "cumsum"} <= set(interp.primitives)
    assert interp.ties == []
    value, J_jax = jax.jit(lambda x: (f(x), jax.jacfwd(f)(x)))(x)  # jit: op-by-op is slow
    np.testing.assert_allclose(to_float(interp.values()), value, rtol=1e-14, atol=1e-15)
    J_exact = to_float(interp.jacobian())
    J_jax = np.asarray(J_jax)
    nz = J_exact != 0
    assert np.all(J_jax[~nz] == 0)
    assert np.max(np.abs(J_jax[nz] - J_exact[nz]) / np.abs(J_exact[nz])) <= 1e-13


def test_custom_jvp_rule_is_not_trusted():
    """The reference differentiates the primal, so a wrong custom derivative rule shows up."""

    @jax.custom_jvp
    def g(v):
        return jnp.exp(v)

    g.defjvp(lambda primals, tangents: (g(primals[0]), 1.001 * g(primals[0]) * tangents[0]))
    x = jnp.asarray([0.2, 0.3])
    J_exact = to_float(interpret(lambda x: jnp.stack([g(x[0]) * x[1]]), x).jacobian())
    np.testing.assert_allclose(J_exact, [[np.exp(0.2) * 0.3, np.exp(0.2)]], rtol=1e-15)
    J_jax = np.asarray(jax.jacfwd(lambda x: jnp.stack([g(x[0]) * x[1]]))(x))
    assert abs(J_jax[0, 0] / J_exact[0, 0] - 1.001) < 1e-12


def test_unsupported_primitive_is_named():
    with pytest.raises(NotImplementedError, match="'sort'"):
        interpret(lambda x: jnp.sort(x) * x, jnp.asarray([2.0, 1.0]))


def test_adlin_jacobian_of_resistor_diode_circuit_is_exact():
    c = adlin.Circuit("resistor_diode")
    c.input("v_supply", 3.3)
    c.voltage_source("VB", "bias", "gnd", "v_supply")
    c.resistor("R1", "bias", "a", 10e3)
    c.diode("D1", "a", "gnd", saturation_current=1e-14, zero_bias_capacitance=2e-12)
    c.capacitor("C1", "a", "gnd", 10e-12)
    system = c.build()
    op = adlin.steady_state(system)
    E, A, _, _, _ = adlin.compile(system).matrices(op.x, op.u, op.p)

    for J_adlin, fun, args in ((-np.asarray(A), system.f, (op.u, op.p)),
                               (np.asarray(E), system.q, (op.p,))):
        interp = interpret(fun, op.x, *args, names=system.unknowns)
        assert interp.ties == []
        J_exact = to_float(interp.jacobian())
        nz = J_exact != 0
        assert nz.any()
        assert np.all(J_adlin[~nz] == 0)
        rel = np.abs(J_adlin[nz] - J_exact[nz]) / np.abs(J_exact[nz])
        assert rel.max() <= 1e-13, rel.max()
