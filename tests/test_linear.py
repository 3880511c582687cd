"""Linear models: matrices, poles, zeros, responses, reduction, normalization."""

import math

import jax
import jax.numpy as jnp
import numpy as np
import pytest
import scipy.signal
from closed_forms import (
    VT,
    descriptor_divider,
    descriptor_divider_tf,
    diode_resistor,
    rc_ladder,
    rc_ladder_poles,
    series_rlc,
    van_der_pol,
)
from hypothesis import given, settings
from hypothesis import strategies as st

import adlin


def _lin(system, **kw):
    return adlin.linearize(system, adlin.steady_state(system, **kw))


def test_series_rlc_natural_frequency_and_damping():
    """omega0 = 1/sqrt(LC), zeta = (R/2) sqrt(C/L) (Alexander & Sadiku, 6th ed., sec. 8.5)."""
    R, L, C = 50.0, 1e-3, 1e-6
    lin = _lin(series_rlc(R, L, C))
    w0, zeta = 1 / math.sqrt(L * C), R / 2 * math.sqrt(C / L)
    (pair,) = lin.pole_table().roots
    assert pair.pair
    assert pair.magnitude_rad_s == pytest.approx(w0, rel=1e-12)
    assert pair.damping == pytest.approx(zeta, rel=1e-12)
    assert pair.q == pytest.approx(1 / (2 * zeta), rel=1e-12)
    assert pair.time_constant_s == pytest.approx(1 / (zeta * w0), rel=1e-12)
    assert pair.frequency_hz == pytest.approx(w0 / (2 * math.pi), rel=1e-12)
    np.testing.assert_allclose(np.asarray(lin.dc_gain()), [[1.0]], rtol=1e-13)


def test_rc_ladder_poles():
    """Equal two-section RC ladder: -(3 +- sqrt 5)/(2RC) (Morgan-Voyce, IRE Trans. CT 1959)."""
    R, C = 4.7e3, 10e-9
    poles = np.sort(np.asarray(_lin(rc_ladder(R, C)).poles()).real)[::-1]
    np.testing.assert_allclose(poles, rc_ladder_poles(R, C), rtol=1e-12)


@pytest.mark.parametrize("mu", [0.3, 1.0, 3.0])
def test_van_der_pol_eigenvalues_at_origin(mu):
    """(mu +- sqrt(mu^2 - 4))/2 (Strogatz, Nonlinear Dynamics and Chaos, sec. 7.6)."""
    system = van_der_pol(1.0)
    lin = _lin(system, params={"mu": mu}, guess={"x": 0.1, "y": 0.1})
    expected = np.roots([1.0, -mu, 1.0])
    got = np.asarray(lin.poles())
    np.testing.assert_allclose(np.sort_complex(got), np.sort_complex(expected), rtol=1e-12)


class TestDescriptor:
    """Singular E: two nodes without storage, a source current, a floating capacitor.
    Hand-derived H(s) (Thevenin, Alexander & Sadiku 6th ed. sec. 4.5)."""

    values = dict(R1=1e3, R2=2.2e3, R3=3.3e3, Resr=47.0, C=1e-6)

    @pytest.fixture(scope="class")
    @classmethod
    def lin(cls):
        return _lin(descriptor_divider(**cls.values))

    def test_storage_matrix_is_singular(self, lin):
        assert np.linalg.matrix_rank(np.asarray(lin.E)) == 1
        assert lin.n_dynamic == 1

    def test_pole_zero_gain(self, lin):
        v = self.values
        rth = v["R1"] * v["R3"] / (v["R1"] + v["R3"])
        np.testing.assert_allclose(np.asarray(lin.poles()), [-1 / (v["C"] * (rth + v["R2"] + v["Resr"]))],
                                   rtol=1e-12)
        np.testing.assert_allclose(np.asarray(lin.zeros()), [-1 / (v["C"] * v["Resr"])], rtol=1e-10)
        np.testing.assert_allclose(np.asarray(lin.dc_gain()), [[v["R3"] / (v["R1"] + v["R3"])]],
                                   rtol=1e-13)

    def test_frequency_response(self, lin):
        f = np.logspace(0, 7, 29)
        H = np.asarray(lin.freq_response(f))
        assert H.shape == (1, 1, f.size)
        np.testing.assert_allclose(H[0, 0], descriptor_divider_tf(2j * np.pi * f, **self.values),
                                   rtol=1e-12)

    def test_reduced_model_agrees_with_scipy(self, lin):
        """freq_response of the reduced model equals scipy.signal.freqresp of to_scipy()."""
        f = np.logspace(0, 7, 15)
        _, H_scipy = scipy.signal.freqresp(lin.to_scipy(), 2 * np.pi * f)
        red = lin.reduce()
        assert red.reduced and red.E.shape == (1, 1) and red.state_names == ("v_b",)
        np.testing.assert_allclose(np.asarray(red.freq_response(f))[0, 0], H_scipy, rtol=1e-12)
        np.testing.assert_allclose(np.asarray(lin.freq_response(f))[0, 0], H_scipy, rtol=1e-12)


def test_step_response_matches_scipy():
    """Exact step response against scipy.signal.step on the same state-space model."""
    lin = _lin(series_rlc(20.0, 1e-3, 1e-6))
    t = np.linspace(0, 2e-3, 201)
    _, y = scipy.signal.step(lin.to_scipy(), T=t)
    np.testing.assert_allclose(np.asarray(lin.step(t))[0, 0], y, rtol=1e-7, atol=1e-9)


def test_rlc_zero_from_capacitor_current():
    """Output i_L of a series RLC: H(s) = sC/(LCs^2 + RCs + 1), one zero at s = 0
    (Alexander & Sadiku 6th ed. sec. 14.2)."""
    system = series_rlc(50.0, 1e-3, 1e-6)
    system = adlin.System(system.current, system.charge, unknowns=system.unknowns,
                          inputs=system.inputs, outputs=("i_L",), params=system.params)
    lin = _lin(system)
    z = np.asarray(lin.zeros())
    assert z.shape == (1,)
    assert abs(z[0]) < 1e-6
    zt = lin.zero_table()
    assert len(zt.roots) == 1


def test_pole_gradient_closed_form_and_finite_difference():
    """d/dR of the slow ladder pole -(3 - sqrt 5)/(2RC) is (3 - sqrt 5)/(2 R^2 C)."""
    system = rc_ladder(1e3, 1e-6)

    def slow_pole(R):
        return jnp.real(_lin(system, params={"R": R}).poles()[0])

    R = 1e3
    g = float(jax.grad(slow_pole)(R))
    assert g == pytest.approx((3 - math.sqrt(5)) / (2 * R**2 * 1e-6), rel=1e-10)
    h = 1e-2
    fd = (float(slow_pole(R + h)) - float(slow_pole(R - h))) / (2 * h)
    assert g == pytest.approx(fd, rel=1e-7)


def _diode_rc():
    """Diode-resistor node with a capacitor: pole -(1/R + g_d)/C with g_d = I_D/VT
    depends on the bias (Sedra & Smith 7th ed. sec. 4.3, small-signal diode model)."""
    base = diode_resistor(1.0)
    return adlin.System(base.current, lambda x, p: p["C"] * x, unknowns=base.unknowns,
                        inputs=base.input_values, params={**base.params, "C": 1e-9},
                        junctions=base.junctions)


def test_pole_gradient_through_steady_state():
    system = _diode_rc()

    def pole(R):
        return jnp.real(_lin(system, params={"R": R}).poles()[0])

    def closed(R):
        op = adlin.steady_state(system, params={"R": R})
        v = float(op["v_a"])
        gd = 1e-14 * math.exp(v / VT) / VT
        return -(1 / R + gd) / 1e-9

    R = 2e3
    assert float(pole(R)) == pytest.approx(closed(R), rel=1e-12)
    g = float(jax.grad(pole)(R))
    h = 1e-3
    fd = (closed(R + h) - closed(R - h)) / (2 * h)
    assert g == pytest.approx(fd, rel=1e-6)


def test_jit_and_vmap_of_poles():
    system = rc_ladder(1e3, 1e-6)
    Rs = jnp.array([1e3, 2e3, 5e3])

    @jax.jit
    def poles(R):
        return _lin(system, params={"R": R}).poles()

    batched = jax.vmap(poles)(Rs)
    for R, p in zip(np.asarray(Rs), np.asarray(batched), strict=True):
        np.testing.assert_allclose(np.sort(p.real)[::-1], rc_ladder_poles(R, 1e-6), rtol=1e-12)


def test_zeros_under_jit_keep_fixed_length_with_inf():
    system = descriptor_divider(**TestDescriptor.values)
    z = jax.jit(lambda C: _lin(system, params={"C": C}).zeros())(1e-6)
    assert z.shape == (1,)
    np.testing.assert_allclose(np.asarray(z), [-1 / (1e-6 * 47.0)], rtol=1e-10)
    # zero derivative: d/dC of -1/(C Resr) = 1/(C^2 Resr)
    g = jax.grad(lambda C: jnp.real(_lin(system, params={"C": C}).zeros()[0]))(1e-6)
    assert float(g) == pytest.approx(1 / (1e-12 * 47.0), rel=1e-8)


@settings(max_examples=25, deadline=None)
@given(T=st.floats(1e-9, 1e3), R=st.floats(10.0, 1e6))
def test_normalized_poles_scale_exactly_with_time(T, R):
    """Scaling time by T multiplies every pole by T (t = T tau, so s_tau = T s)."""
    lin = _ladder_lin(R)
    norm = lin.normalize(time_scale_s=T)
    np.testing.assert_allclose(np.sort_complex(np.asarray(norm.poles())),
                               np.sort_complex(T * np.asarray(lin.poles())), rtol=1e-12)
    # state scaling is a similarity transform: it never moves poles
    norm2 = lin.normalize(time_scale_s=T, scales={"v_1": 7.0, "v_2": 0.01})
    np.testing.assert_allclose(np.sort_complex(np.asarray(norm2.poles())),
                               np.sort_complex(np.asarray(norm.poles())), rtol=1e-10)


_LADDER = rc_ladder(1e3, 1e-6)


def _ladder_lin(R):
    return _lin(_LADDER, params={"R": R}, inputs={"v_in": 2.0})


def test_normalize_automatic_scales():
    lin = _ladder_lin(1e3)
    norm = lin.normalize()
    slow = abs(rc_ladder_poles(1e3, 1e-6)[0])
    assert float(norm.time_scale) == pytest.approx(1 / slow, rel=1e-12)
    assert float(jnp.min(jnp.abs(norm.poles()))) == pytest.approx(1.0, rel=1e-12)
    scales = norm.scales()
    assert scales["v_1"] == pytest.approx(2.0) and scales["v_in"] == pytest.approx(2.0)
    assert dict(norm.scale_origin)["time"] == "dominant time constant"
    assert float(norm.gains()["v_2/v_in"]) == pytest.approx(1.0, rel=1e-12)
    ratios = np.asarray(norm.time_constant_ratios())
    np.testing.assert_allclose(ratios, [1.0, (3 - math.sqrt(5)) / (3 + math.sqrt(5))], rtol=1e-12)
    # a node at 0 V is scaled by the thermal voltage, not by zero
    zero_bias = _lin(_LADDER, inputs={"v_in": 0.0}).normalize()
    assert zero_bias.scales()["v_1"] == pytest.approx(VT, rel=1e-12)
    with pytest.raises(adlin.AnalysisError, match="'v_3'.*'v_1'"):
        lin.normalize(scales={"v_3": 1.0})


def test_pair_selection_errors():
    lin = _ladder_lin(1e3)
    with pytest.raises(adlin.ParameterError, match="unknown output 'v_9'"):
        lin.zeros(output="v_9")


def test_compiled_poles_function_batches():
    """CompiledSystem.poles: steady state + linearization + poles in one jitted call,
    batched over parameter samples (ladder closed form, Morgan-Voyce 1959)."""
    cs = adlin.compile(_LADDER)
    u, x0 = _LADDER.input_vector(), cs.default_guess()
    Rs = np.array([1e3, 3e3])
    P = jnp.stack([_LADDER.param_vector({"R": R}) for R in Rs])
    poles, ok = jax.vmap(lambda p: cs.poles(u, p, x0))(P)
    assert np.asarray(ok).all()
    for R, p in zip(Rs, np.asarray(poles), strict=True):
        np.testing.assert_allclose(np.sort(p.real)[::-1], rc_ladder_poles(R, 1e-6), rtol=1e-12)
