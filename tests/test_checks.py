"""Every bad model or input gives an adlin error that names the culprit."""

import math

import jax.numpy as jnp
import pytest

import adlin


def _rc(**kw):
    def current(x, u, p):
        return jnp.stack([(x[0] - u[0]) / p["R"]])

    args = dict(unknowns=("v_out",), inputs=("v_in",), params={"R": 1e3, "C": 1e-6})
    args.update(kw)
    return adlin.System(current, lambda x, p: p["C"] * x, **args)


def test_wrong_current_shape():
    s = adlin.System(lambda x, u, p: jnp.stack([x[0], x[1], x[0]]), unknowns=("a", "b"))
    with pytest.raises(adlin.ModelError, match=r"current function.*shape \(3,\)"
                       r".*2 unknowns are declared \['a', 'b'\]"):
        adlin.compile(s)


def test_wrong_output_shape():
    s = adlin.System(lambda x, u, p: x - 1.0, output=lambda x, u, p: x, unknowns=("a", "b"),
                     outputs=("y",))
    with pytest.raises(adlin.ModelError, match=r"output function.*shape \(2,\)"
                       r".*1 outputs are declared \['y'\]"):
        adlin.compile(s)


def test_missing_parameter_is_named():
    s = adlin.System(lambda x, u, p: x - p["Vref"], unknowns=("a",), params={"V_ref": 1.0})
    with pytest.raises(adlin.ParameterError, match=r"reads parameter 'Vref'"
                       r".*closest valid name is 'V_ref'"):
        adlin.compile(s)


def test_unknown_parameter_override_lists_valid_names():
    with pytest.raises(adlin.ParameterError, match=r"unknown parameter 'R1'.*'R'"):
        adlin.steady_state(_rc(), params={"R1": 5.0})
    with pytest.raises(adlin.ParameterError, match=r"unknown input 'vin'.*'v_in'"):
        adlin.steady_state(_rc(), inputs={"vin": 5.0})


def test_non_finite_at_guess_names_equation():
    s = adlin.System(lambda x, u, p: jnp.stack([jnp.log(x[0]) - 1.0, x[1] - 2.0]),
                     unknowns=("v_a", "v_b"))
    with pytest.raises(adlin.ModelError, match=r"equation 'v_a' is -inf at the starting guess"):
        adlin.steady_state(s)
    op = adlin.steady_state(s, guess={"v_a": 1.0})
    assert float(op["v_a"]) == pytest.approx(jnp.e)


def test_non_finite_derivative_is_named():
    s = adlin.System(lambda x, u, p: jnp.stack([jnp.sqrt(x[0]) - 1.0 + x[1], x[1] - 2.0]),
                     unknowns=("v_a", "v_b"))
    with pytest.raises(adlin.ModelError, match=r"d\(current of equation 'v_a'\)/d\('v_a'\) is inf"):
        adlin.steady_state(s, guess={"v_a": 0.0, "v_b": 1.0})


def test_unused_unknown():
    s = adlin.System(lambda x, u, p: jnp.stack([x[0] - 1.0, x[0] - 2.0]), unknowns=("a", "b"))
    with pytest.raises(adlin.FloatingNodeError, match=r"unknown 'b' enters no equation"):
        adlin.compile(s)


def test_node_without_dc_path():
    # node m sits between two capacitors: no DC path
    def current(x, u, p):
        return jnp.stack([(x[0] - u[0]) / 1e3, 0.0 * x[1]])

    def charge(x, p):
        return jnp.stack([1e-6 * (x[0] - x[1]), 1e-6 * (x[1] - x[0]) + 1e-6 * x[1]])

    s = adlin.System(current, charge, unknowns=("v_a", "v_m"), inputs=("v_in",))
    with pytest.raises(adlin.FloatingNodeError, match=r"'v_m' has no DC path"):
        adlin.compile(s)


def test_two_nodes_floating_together():
    # a and b joined by a resistor, tied to the rest only through a capacitor
    def current(x, u, p):
        va, vb, vc = x
        return jnp.stack([(va - vb) / 1e3, (vb - va) / 1e3, (vc - u[0]) / 1e3])

    def charge(x, p):
        q = 1e-6 * (x[1] - x[2])
        return jnp.stack([0.0 * q, q, -q])

    s = adlin.System(current, charge, unknowns=("v_a", "v_b", "v_c"), inputs=("v_in",))
    with pytest.raises(adlin.FloatingNodeError, match=r"singular in 'v_a', 'v_b'"):
        adlin.compile(s)


def test_string_of_tiny_saturation_current_junctions_is_not_floating():
    # Near 0 V a junction with Is = 1e-18 A conducts ~1e-17 S, numerically an
    # open circuit; the check must still see the DC path through the string.
    # The solved string obeys Shockley's law, I = Is (exp(V/(n VT)) - 1)
    # (Sedra & Smith, Microelectronic Circuits, 7th ed., sec. 4.2), and KVL.
    from closed_forms import VT

    c = adlin.Circuit("led_string")
    c.input("v_supply", 48.0)
    c.voltage_source("VS", "sup", "gnd", "v_supply")
    c.resistor("R1", "sup", "d0", 330.0)
    for k in range(12):
        c.diode(f"D{k}", f"d{k}", f"m{k}", saturation_current=1e-18, emission_coefficient=2.0)
        c.resistor(f"RS{k}", f"m{k}", "gnd" if k == 11 else f"d{k + 1}", 1.0)
    op = adlin.steady_state(c.build())
    i = (48.0 - float(op["v_d0"])) / 330.0
    v_junction = 2.0 * VT * math.log1p(i / 1e-18)
    assert float(op["v_d0"]) == pytest.approx(12 * (v_junction + i * 1.0), rel=1e-9)
    assert float(op["v_d5"]) - float(op["v_m5"]) == pytest.approx(v_junction, rel=1e-9)


def test_index_two_source_across_capacitor():
    # an ideal source directly across a capacitor: the capacitor voltage is fixed
    # algebraically, the source current is the derivative of its charge (index 2)
    def current(x, u, p):
        v, i = x
        return jnp.stack([v / 1e3 + i, v - u[0]])

    s = adlin.System(current, lambda x, p: jnp.stack([1e-6 * x[0], 0.0 * x[1]]),
                     unknowns=("v_a", "i_src"), inputs=("v_in",))
    with pytest.raises(adlin.HighIndexError, match=r"index > 1.*'i_src'.*series resistance"):
        adlin.compile(s)


@pytest.mark.parametrize(
    "kwargs, pattern",
    [
        (dict(unknowns=("a", "a")), "duplicate names"),
        (dict(unknowns="a"), "single string"),
        (dict(unknowns=()), "at least one unknown"),
        (dict(unknowns=("a",), params={"a": 1.0}), "both as a parameter"),
        (dict(unknowns=("a",), outputs=("b",)), "output 'b' is not an unknown"),
        (dict(unknowns=("a",), params={"R": "big"}), "must be a number"),
    ],
)
def test_system_constructor_errors(kwargs, pattern):
    with pytest.raises(adlin.ModelError, match=pattern):
        adlin.System(lambda x, u, p: x, **kwargs)


def test_model_function_exception_is_wrapped():
    def bad(x, u, p):
        raise RuntimeError("boom")

    with pytest.raises(adlin.ModelError, match=r"current function of 'model' failed: "
                       r"RuntimeError: boom"):
        adlin.compile(adlin.System(bad, unknowns=("a",)))


def test_unpacking_the_wrong_number_of_unknowns():
    def current(x, u, p):
        a, b = x  # the model expects two unknowns, one is declared
        return jnp.stack([a - b])

    with pytest.raises(adlin.ModelError, match=r"current function of 'model' failed"):
        adlin.compile(adlin.System(current, unknowns=("a",)))


def test_bad_guess_shape_and_name():
    with pytest.raises(adlin.ModelError, match=r"guess has shape \(3,\)"):
        adlin.steady_state(_rc(), guess=jnp.zeros(3))
    with pytest.raises(adlin.ParameterError, match=r"guess names 'v_o'.*'v_out'"):
        adlin.steady_state(_rc(), guess={"v_o": 1.0})


def test_linearize_needs_matching_operating_point():
    a = _rc()
    b = adlin.System(lambda x, u, p: x - 1.0, unknowns=("z",))
    op = adlin.steady_state(a)
    with pytest.raises(adlin.ModelError, match="belongs to a model"):
        adlin.linearize(b, op)
    with pytest.raises(adlin.ModelError, match="needs an OperatingPoint"):
        adlin.linearize(a, {"v_out": 1.0})


def test_float64_is_on_after_import():
    """adlin switches jax_enable_x64 on at import (documented in adlin/_config.py)."""
    assert jnp.ones(3).dtype == jnp.float64
