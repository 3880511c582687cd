"""Element-by-element circuit Jacobians against forward-mode AD of the whole residual.

The reference is `jax.jacfwd` of `System.f` and `System.q` (the assembled
modified-nodal residual and charges): the element path must give the same
exact derivatives, entry by entry, only summed in another order.  The
implicit-function derivative of the steady state is checked against central
finite differences of re-solved bias points (the textbook definition of the
derivative; Nocedal & Wright, Numerical Optimization, 2nd ed., 2006,
sec. 8.1).
"""

from __future__ import annotations

import functools

import hypothesis.strategies as st
import jax
import jax.numpy as jnp
import numpy as np
import pytest
from hypothesis import given, settings

import adlin
from adlin._circuit.element_jacobian import ElementJacobians
from adlin._derivatives import CircuitDerivatives, ForwardDerivatives, derivatives_of
from adlin.scenarios import sensor_ldo

RTOL = 1e-13  # relative to the largest entry: sums of the same terms in another order


def _mixed() -> adlin.Circuit:
    """Every element kind: controlled sources of all four kinds, an inductor,
    a diode with charge, a BJT, a MOSFET, and an input-valued source."""
    c = adlin.Circuit("mixed")
    c.input("v_src", 1.3)
    c.input("i_aux", 1e-4)
    c.param("R_a", 2e3)
    c.voltage_source("VIN", "in", "gnd", "v_src")
    c.resistor("R1", "in", "a", "R_a")
    c.inductor("L1", "a", "b", 1e-3)
    c.resistor("R2", "b", "gnd", 500.0)
    c.capacitor("C1", "a", "gnd", 1e-9)
    c.diode("D1", "b", "c", saturation_current=1e-14, zero_bias_capacitance=2e-12)
    c.resistor("R3", "c", "gnd", 1e3)
    c.vccs("G1", "d", "gnd", "a", "b", 1e-3)
    c.resistor("R4", "d", "gnd", 1e3)
    c.vcvs("E1", "e", "gnd", "c", "gnd", 2.0)
    c.resistor("R5", "e", "f", 1e3)
    c.cccs("F1", "f", "gnd", "L1", 0.5)
    c.ccvs("H1", "g", "gnd", "VIN", 100.0)
    c.resistor("R6", "g", "gnd", 1e3)
    c.current_source("IAUX", "gnd", "h", "i_aux")
    c.bjt("Q1", c="d", b="h", e="gnd", base_emitter_capacitance=1e-12)
    c.resistor("R7", "h", "gnd", 1e5)
    c.mosfet("M1", d="f", g="e", s="gnd", b="gnd", gate_source_capacitance=1e-13)
    c.output("v_d", "d")
    return c


@functools.cache
def _system(name: str) -> adlin.System:
    return {"ldo": sensor_ldo, "mixed": _mixed}[name]().build()


def _reference(system, x, u, p):
    dfdx, dfdu = jax.jacfwd(system.f, argnums=(0, 1))(x, u, p)
    return system.f(x, u, p), dfdx, dfdu, jax.jacfwd(system.q)(x, p)


@functools.cache
def _both(name: str):
    system = _system(name)
    derivs = derivatives_of(system)
    assert isinstance(derivs, CircuitDerivatives)

    def element(x, u, p):
        f, dfdx, dfdu = derivs.current(x, u, p)
        f2, dfdx2 = derivs.current_x(x, u, p)
        _, E = derivs.charge(x, p)
        return f, dfdx, dfdu, E, f2, dfdx2

    return jax.jit(functools.partial(_reference, system)), jax.jit(element)


def _close(a, b, what):
    a, b = np.asarray(a), np.asarray(b)
    scale = max(np.max(np.abs(a)), 1e-300)
    assert np.max(np.abs(a - b)) <= RTOL * scale, what


@pytest.mark.parametrize("name", ["ldo", "mixed"])
@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 2**31 - 1))
def test_element_jacobians_equal_forward_mode(name, seed):
    system = _system(name)
    rng = np.random.default_rng(seed)
    x = jnp.asarray(rng.uniform(-1.0, 2.0, system.n))
    u = np.asarray(system.input_vector()) * rng.uniform(0.5, 1.5, len(system.inputs))
    p = np.asarray(system.param_vector()) * rng.uniform(0.8, 1.2, len(system.param_names))
    u, p = jnp.asarray(u), jnp.asarray(p)
    reference, element = _both(name)
    f, dfdx, dfdu, E = reference(x, u, p)
    f_e, dfdx_e, dfdu_e, E_e, f2, dfdx2 = element(x, u, p)
    for a, b, what in ((f, f_e, "f"), (dfdx, dfdx_e, "df/dx"), (dfdu, dfdu_e, "df/du"),
                       (E, E_e, "dq/dx"), (f, f2, "f (Newton pair)"),
                       (dfdx, dfdx2, "df/dx (Newton pair)")):
        _close(a, b, what)


def test_undeclared_read_falls_back_to_forward_mode():
    # An element that reads a branch current it does not declare: the element
    # path cannot differentiate it, so the whole model falls back, exactly.
    from adlin._circuit.elements import Resistor, _pair

    class Sneaky(Resistor):
        def currents(self, at):
            g = 1.0 / at.value(self.resistance)
            return _pair(at, self.a, self.b, g * (at.v(self.a) - at.v(self.b)) + 1e-3 * at.i("VS"))

    c = adlin.Circuit("sneaky")
    c.voltage_source("VS", "a", "gnd", 1.0)
    c.resistor("R1", "a", "b", 1e3)
    name = c.resistor("R2", "b", "gnd", 1e3)
    element = c._elements[name]
    c._elements[name] = Sneaky(element.name, element.a, element.b, element.resistance)
    system = c.build()
    x = jnp.asarray([1.0, 0.4, -1e-3])
    u, p = system.input_vector(), system.param_vector()
    derivs = derivatives_of(system)
    f, dfdx, _ = derivs.current(x, u, p)
    f_ref, dfdx_ref, _ = ForwardDerivatives(system).current(x, u, p)
    _close(f_ref, f, "f")
    _close(dfdx_ref, dfdx, "df/dx")
    row, col = system.unknowns.index("v_b"), system.unknowns.index("i_VS")
    assert float(dfdx[row, col]) == pytest.approx(1e-3)


def test_element_jacobians_emit_no_scatter():
    # A scatter-add in the batched solve was where a hang appeared (DEVELOPERS.md).
    system = _system("ldo")
    ej = ElementJacobians(system.current.__self__)
    x = jnp.zeros(system.n)
    jaxpr = jax.make_jaxpr(lambda x, u, p: ej.current(x, u, system.param_dict(p)))(
        x, system.input_vector(), system.param_vector())
    assert "scatter" not in str(jaxpr)


@pytest.mark.slow
def test_steady_state_gradient_matches_finite_differences():
    # d v_out / d R_load through the reused final Newton update (custom JVP).
    system = _system("ldo")
    cs = adlin.compile(system)
    u = system.input_vector()
    p0 = system.param_vector()
    k = system.param_names.index("R_load")
    out = system.unknowns.index("v_out")

    def v_out(r):
        return cs.solve(u, p0.at[k].set(r), jnp.zeros(system.n)).x[out]

    r0 = float(p0[k])
    grad = float(jax.grad(v_out)(r0))
    h = 1e-3 * r0
    fd = (float(v_out(r0 + h)) - float(v_out(r0 - h))) / (2 * h)
    assert grad == pytest.approx(fd, rel=1e-5)
    assert grad > 0  # a lighter load lifts a regulator's output slightly (finite loop gain)
