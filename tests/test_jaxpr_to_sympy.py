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

sys.path.insert(0, os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "benchmarks"))
from jaxpr_to_sympy import interpret, to_float  # noqa: E402

X0, X1 = sympy.symbols("x0 x1", real=True)


def exact(expr_matrix, point):
    """Hand-derived Jacobian of a list of sympy expressions in (x0, x1) at point, 50 digits."""
    subs = {X0: sympy.Rational(point[0]), X1: sympy.Rational(point[1])}
    J = sympy.Matrix(expr_matrix).jacobian([X0, X1])
    return np.array([[mpmath.mpf(sympy.N(J[i, j].subs(subs), 50)) for j in range(2)]
                     for i in range(J.rows)], dtype=object)


def assert_close(J, J_ref, tol=1e-40):
    for a, b in zip(np.asarray(J).reshape(-1), np.asarray(J_ref).reshape(-1)):
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
    for e, ref in zip(exprs, expected):
        assert sympy.simplify(e.subs({x0: X0, x1: X1}) - ref) == 0
    assert_close(interp.jacobian(), exact(expected, point))
    np.testing.assert_allclose(to_float(interp.values()), f(jnp.asarray(point)), rtol=1e-15)


@pytest.mark.parametrize("point", [(0.5, 2.0), (-0.5, 2.0)])
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
