"""Steady state: damped Newton, limiting, implicit differentiation, batches."""

import math

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from closed_forms import VT, diode_resistor, diode_resistor_exact, van_der_pol

import adlin


# Banwell & Jayakumar, Electronics Letters 36(4), 2000: Lambert W closed form.
@pytest.mark.parametrize("v_source", [0.3, 0.7, 1.0, 5.0, 10.0, 50.0, 100.0, 1000.0])
@pytest.mark.parametrize("junction", [True, False], ids=["limited", "line-search-only"])
def test_diode_resistor_matches_lambert_w(v_source, junction):
    system = diode_resistor(1.0, junction=junction)  # one compiled model for every source value
    op = adlin.steady_state(system, inputs={"v_s": v_source})
    exact = diode_resistor_exact(v_source, R=1e3, Is=1e-14)
    assert bool(op.converged)
    assert float(op["v_a"]) == pytest.approx(exact, rel=1e-12, abs=1e-14)
    assert int(op.iterations) < 40


def test_plain_newton_overflows_where_adlin_converges():
    """At 50 V the first undamped Newton step from 0 V lands near 50 V, where
    exp(v/VT) overflows float64 (exp(1934)); adlin's damped, limited Newton
    still returns the Lambert W answer (Banwell & Jayakumar 2000)."""
    R, Is, V = 1e3, 1e-14, 50.0
    v = 0.0
    with np.errstate(over="ignore", invalid="ignore"):
        for _ in range(3):
            f = (v - V) / R + Is * (np.exp(v / VT) - 1)
            J = 1 / R + Is / VT * np.exp(v / VT)
            v = v - f / J
    assert not np.isfinite(v)
    op = adlin.steady_state(diode_resistor(1.0), inputs={"v_s": V})
    assert float(op["v_a"]) == pytest.approx(diode_resistor_exact(V, R, Is), rel=1e-12)


def test_gradient_matches_implicit_closed_form_and_finite_differences():
    """dV/dR of the diode-resistor circuit.  Implicit differentiation of
    (V - Vs)/R + Is (exp(V/VT) - 1) = 0 gives dV/dR = ((V - Vs)/R^2) / (1/R + g_d)
    with g_d = Is exp(V/VT)/VT (Shockley law, Sedra & Smith 7th ed. sec. 4.2)."""
    system = diode_resistor(1.0)

    def v_of(R):
        return adlin.steady_state(system, inputs={"v_s": 5.0}, params={"R": R}).x[0]

    R = 1e3
    g = float(jax.grad(v_of)(R))
    V = float(v_of(R))
    gd = 1e-14 * math.exp(V / VT) / VT
    closed = ((V - 5.0) / R**2) / (1 / R + gd)
    h = 1e-3
    fd = (diode_resistor_exact(5.0, R + h, 1e-14) - diode_resistor_exact(5.0, R - h, 1e-14)) / (2 * h)
    assert g == pytest.approx(closed, rel=1e-9)
    assert g == pytest.approx(fd, rel=1e-6)
    # forward mode agrees with reverse mode
    assert float(jax.jacfwd(v_of)(R)) == pytest.approx(g, rel=1e-12)


def test_gradient_with_respect_to_input():
    system = diode_resistor(1.0)
    g = float(jax.grad(lambda vs: adlin.steady_state(system, inputs={"v_s": vs}).x[0])(5.0))
    V = diode_resistor_exact(5.0, 1e3, 1e-14)
    gd = 1e-14 * math.exp(V / VT) / VT
    assert g == pytest.approx((1 / 1e3) / (1 / 1e3 + gd), rel=1e-9)  # resistive divider of R and 1/g_d


def _no_solution_for_positive_c():
    # x^2 + c = 0 has real roots only for c <= 0 (a fold at c = 0)
    return adlin.System(lambda x, u, p: jnp.stack([x[0] ** 2 + p["c"] + 0.0 * x[0]]),
                        unknowns=("x",), params={"c": -1.0}, name="fold")


def test_vmap_reports_per_sample_status():
    system = _no_solution_for_positive_c()
    cs = jnp.array([-4.0, -1.0, 1.0, -9.0])
    ops = jax.vmap(lambda c: adlin.steady_state(system, params={"c": c}, guess={"x": 1.0},
                                                throw=False))(cs)
    assert ops.converged.tolist() == [True, True, False, True]
    good = np.asarray(ops.converged)
    np.testing.assert_allclose(np.asarray(ops.x[good, 0]), [2.0, 1.0, 3.0], rtol=1e-12)
    assert np.all(np.isfinite(np.asarray(ops.x)))  # never NaN, even where it failed
    assert int(ops.status[2]) != 0


def test_failure_raises_with_diagnosis():
    system = _no_solution_for_positive_c()
    with pytest.raises(adlin.SteadyStateError, match=r"not found.*'x' equation.*guess="):
        adlin.steady_state(system, params={"c": 1.0}, guess={"x": 1.0})


def test_failure_under_jit_raises_runtime_error():
    system = _no_solution_for_positive_c()
    f = jax.jit(lambda c: adlin.steady_state(system, params={"c": c}, guess={"x": 1.0}).x)
    assert float(f(-4.0)[0]) == pytest.approx(2.0)
    with pytest.raises(Exception, match="did not converge"):
        jax.block_until_ready(f(1.0))


def test_compiled_functions_do_not_retrace():
    traces = []

    def current(x, u, p):
        traces.append(1)
        return jnp.stack([(x[0] - u[0]) / p["R"] + 1e-14 * (jnp.exp(x[0] / VT) - 1)])

    system = adlin.System(current, unknowns=("v",), inputs=("v_s",), params={"R": 1e3})
    cs = adlin.compile(system)
    x0 = cs.default_guess()
    cs.solve(jnp.array([1.0]), jnp.array([1e3]), x0)
    n_after_first = len(traces)
    for vs, R in [(2.0, 1e3), (3.0, 2e3), (4.0, 5e2)]:
        op = cs.solve(jnp.array([vs]), jnp.array([R]), x0)
        assert bool(op.converged)
    assert len(traces) == n_after_first
    # the free function reuses the same compiled model
    adlin.steady_state(system, inputs={"v_s": 5.0}, params={"R": 3e3})
    adlin.steady_state(system, inputs={"v_s": 6.0}, params={"R": 4e3})
    n_free = len(traces)
    adlin.steady_state(system, inputs={"v_s": 7.0}, params={"R": 5e3})
    assert len(traces) == n_free


def test_guess_forms_and_operating_point_access():
    system = diode_resistor(1.0)
    op1 = adlin.steady_state(system)
    op2 = adlin.steady_state(system, guess=op1)
    op3 = adlin.steady_state(system, guess={"v_a": 0.6})
    op4 = adlin.steady_state(system, guess=np.array([0.6]))
    for op in (op2, op3, op4):
        assert float(op["v_a"]) == pytest.approx(float(op1["v_a"]), rel=1e-13)
    assert int(op2.iterations) <= 2
    assert float(op1["R"]) == 1e3 and float(op1["v_s"]) == 1.0
    assert op1.method == "newton"
    assert float(op1.residual_norm) < 1e-12  # amperes, before the final update
    assert "v_a" in op1 and "nope" not in op1
    with pytest.raises(adlin.ParameterError, match="no quantity 'v_b'.*'v_a'"):
        op1["v_b"]


def test_van_der_pol_origin_is_a_steady_state():
    """The origin is the only equilibrium of the Van der Pol oscillator (Strogatz sec. 7.6)."""
    op = adlin.steady_state(van_der_pol(0.5), guess={"x": 0.3, "y": -0.2})
    np.testing.assert_allclose(np.asarray(op.x), [0.0, 0.0], atol=1e-12)
