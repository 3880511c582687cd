"""adlin.size: sizing against closed forms, rounding to preferred numbers, errors, determinism."""

import functools
import math

import jax.numpy as jnp
import numpy as np
import pytest
from closed_forms import series_rlc

import adlin
from adlin._design.sizing import trace_count
from adlin.targets import Bandwidth, MinDamping, PolePair

# --- series RLC: R for a damping ratio ---------------------------------------------------
L_H, C_F = 1e-3, 1e-6
F0_HZ = 1 / (2 * math.pi * math.sqrt(L_H * C_F))


def rlc():
    return series_rlc(10.0, L_H, C_F)


def r_for_damping(zeta):
    # Series RLC: alpha = R/(2L), omega0 = 1/sqrt(LC), zeta = alpha/omega0, so
    # R = 2 zeta sqrt(L/C) (Alexander & Sadiku, Fundamentals of Electric Circuits,
    # 5th ed., ch. 8, the source-free/step response of the series RLC circuit).
    return 2 * zeta * math.sqrt(L_H / C_F)


@functools.cache
def rlc_sized():
    return adlin.size(rlc(), {"R": (1.0, 1e3)}, [PolePair(F0_HZ, 0.707)], starts=3, seed=1)


def test_rlc_damping_lands_on_closed_form():
    res = rlc_sized()
    assert res.free_names == ("R",)
    np.testing.assert_allclose(float(res.values[0]), r_for_damping(0.707), rtol=1e-4)
    assert bool(res.met)
    assert res.loss < 1e-12
    f, zeta = np.asarray(res.targets[0].achieved)
    np.testing.assert_allclose([f, zeta], [F0_HZ, 0.707], rtol=1e-6)


def test_rlc_history_and_poles_per_iteration():
    res = rlc_sized()
    m = res.loss_history.shape[1]
    assert res.loss_history.shape == (3, m)
    assert res.value_history.shape == (m, 1) and res.pole_history.shape == (m, 2)
    n = int(res.history_length[res.best])
    hist = np.asarray(res.loss_history[res.best, :n])
    assert hist[-1] <= hist[0] and np.all(np.isfinite(hist))
    # each recorded pole pair is that of the recorded R: s^2 + (R/L) s + 1/(LC)
    # (Alexander & Sadiku, 5th ed., ch. 8, characteristic equation of the series RLC)
    path = zip(np.asarray(res.value_history[:n, 0]), np.asarray(res.pole_history[:n]), strict=True)
    for R, poles in path:
        expected = np.roots([1.0, R / L_H, 1 / (L_H * C_F)])
        np.testing.assert_allclose(np.sort_complex(poles), np.sort_complex(expected),
                                   rtol=1e-9)
    np.testing.assert_allclose(np.asarray(res.value_history[-1]), np.asarray(res.values))
    assert res.evaluations >= n and res.failed_evaluations == 0
    # start 0 is the nominal R (10 ohm) clipped into the bounds
    assert float(res.start_values[0, 0]) == pytest.approx(10.0)


def test_second_call_with_other_bounds_does_not_retrace():
    rlc_sized()
    before = trace_count()
    res = adlin.size(rlc(), {"R": (5.0, 500.0)}, [PolePair(F0_HZ, 0.707)], starts=2, seed=3)
    assert trace_count() == before
    np.testing.assert_allclose(float(res.values[0]), r_for_damping(0.707), rtol=1e-4)


def test_min_damping_is_met_and_progress_is_reported():
    calls = []
    res = adlin.size(rlc(), {"R": (1.0, 1e3)}, MinDamping(0.5), starts=1,
                     progress=lambda s, i, loss: calls.append((s, i, loss)))
    # every pole damped at least 0.5 means R >= 2 * 0.5 * sqrt(L/C) (Alexander & Sadiku)
    assert float(res.values[0]) >= r_for_damping(0.5) * (1 - 1e-9)
    assert bool(res.met) and res.loss == 0.0
    assert calls[0][:2] == (0, 0) and calls[-1][1] == len(calls) - 1
    assert calls[0][2] > 0  # R = 10 ohm has damping 0.158


def test_same_seed_same_result():
    a = adlin.size(rlc(), {"R": (1.0, 1e3), "L": (1e-4, 1e-2)}, [PolePair(F0_HZ, 0.5)],
                   starts=3, seed=7, max_iterations=30)
    b = adlin.size(rlc(), {"R": (1.0, 1e3), "L": (1e-4, 1e-2)}, [PolePair(F0_HZ, 0.5)],
                   starts=3, seed=7, max_iterations=30)
    for name in ("values", "start_values", "final_losses", "loss_history", "value_history"):
        np.testing.assert_array_equal(np.asarray(getattr(a, name)), np.asarray(getattr(b, name)))
    assert a.best == b.best and a.evaluations == b.evaluations
    c = adlin.size(rlc(), {"R": (1.0, 1e3), "L": (1e-4, 1e-2)}, [PolePair(F0_HZ, 0.5)],
                   starts=3, seed=8, max_iterations=30)
    assert not np.array_equal(np.asarray(a.start_values[1:]), np.asarray(c.start_values[1:]))


# --- rounding ----------------------------------------------------------------------------
def test_rounding_rechecks_targets():
    # zeta = (R/2) sqrt(C/L) (Alexander & Sadiku, 5th ed., ch. 8): R* = 44.71 ohm;
    # E24 gives 43 ohm (zeta 0.680), E96 44.2 ohm (zeta 0.699).
    tight = PolePair(F0_HZ, 0.707, zeta_tol=0.01)
    e24 = adlin.size(rlc(), {"R": (1.0, 1e3)}, tight, starts=1, round_to="E24")
    e96 = adlin.size(rlc(), {"R": (1.0, 1e3)}, tight, starts=1, round_to="e96")
    for res, series in ((e24, "E24"), (e96, "E96")):
        assert res.series == series
        assert float(res.rounded_values[0]) == adlin.round_to_series(float(res.values[0]), series)
        R = float(res.rounded_values[0])
        zeta = R / 2 * math.sqrt(C_F / L_H)
        np.testing.assert_allclose(float(res.rounded_targets[0].achieved[1]), zeta, rtol=1e-9)
        assert bool(res.met)
        assert res.as_dict() == {"R": R}
    assert float(e24.rounded_values[0]) == 43.0 and not bool(e24.rounded_met)
    assert float(e96.rounded_values[0]) == 44.2 and bool(e96.rounded_met)
    row = e24.table()[0]
    assert row["met"] and not row["rounded_met"]
    assert "damping 0.6799" in row["rounded_achieved_text"]
    assert "E24: not met" in repr(e24)


def test_rounding_stays_inside_the_bounds():
    res = adlin.size(rlc(), {"R": (44.0, 1e3)}, PolePair(F0_HZ, 0.707), starts=1,
                     round_to="E24")
    assert float(res.rounded_values[0]) == 47.0  # 43 ohm would leave the bounds


# --- non-inverting amplifier around a single-pole op-amp ----------------------------------
A0, F_A, R1 = 1e6, 1.0, 1e3  # GBW = A0 * f_a = 1 MHz


@functools.cache
def noninverting():
    """A(s) = A0 / (1 + s / w_a) as dv_o/dt = w_a (A0 (v_in - beta v_o) - v_o), with the
    divider feedback factor beta = R1 / (R1 + R2) (output unloaded)."""

    def h(x, u, p):
        beta = p["R1"] / (p["R1"] + p["R2"])
        return jnp.stack([2 * jnp.pi * p["f_a"] * (p["A0"] * (u[0] - beta * x[0]) - x[0])])

    return adlin.System.from_ode(h, states=("v_o",), inputs=("v_in",), outputs=("v_o",),
                                 params={"A0": A0, "f_a": F_A, "R1": R1, "R2": 9e3})


def first_order_bandwidth(r2):
    # f_3dB = GBW / (1 + R2/R1) (Sedra & Smith, Microelectronic Circuits, 7th ed., sec. 2.8,
    # frequency response of closed-loop amplifiers); first order in 1/(A0 beta).
    return A0 * F_A / (1 + r2 / R1)


@pytest.mark.parametrize("r2", [9e3, 99e3])
def test_closed_loop_bandwidth_is_gbw_over_noise_gain(r2):
    s = noninverting()
    op = adlin.steady_state(s, params={"R2": r2})
    lin = adlin.linearize(s, op)
    (res,) = adlin.targets.evaluate([Bandwidth("v_o", "v_in", min_hz=1.0)], op, lin)
    beta = R1 / (R1 + r2)
    np.testing.assert_allclose(float(res.achieved[0]), first_order_bandwidth(r2),
                               rtol=2 / (A0 * beta))


def test_sizing_r2_for_a_bandwidth():
    f_t = 20e3
    res = adlin.size(noninverting(), {"R2": (1e2, 1e7)},
                     Bandwidth("v_o", "v_in", min_hz=f_t, max_hz=f_t), starts=2)
    r2 = float(res.values[0])
    # Sedra & Smith, 7th ed., sec. 2.8: R2 = R1 (GBW / f_t - 1), to first order (5e-5 here)
    np.testing.assert_allclose(r2, R1 * (A0 * F_A / f_t - 1), rtol=1e-4)
    # exact for the one-pole model: f_a (1 + A0 beta) = f_t (the same derivation, all orders)
    beta = (f_t / F_A - 1) / A0
    np.testing.assert_allclose(r2, R1 * (1 / beta - 1), rtol=1e-7)
    assert bool(res.met)


# --- trial points without a steady state -------------------------------------------------
@functools.cache
def fold():
    """dx/dt = a - 1 - x^2: a steady state x* = sqrt(a - 1) only for a >= 1 (a
    saddle-node at a = 1), with the pole f'(x*) = -2 sqrt(a - 1) (Strogatz, Nonlinear
    Dynamics and Chaos, 2nd ed., sec. 3.1 and 2.4 on linear stability; from memory)."""

    def h(x, u, p):
        return jnp.stack([p["a"] - 1.0 - x[0] ** 2])

    return adlin.System.from_ode(h, states=("x",), inputs=(), outputs=("x",),
                                 params={"a": 5.0}, name="fold")


def test_trial_points_without_steady_state_are_survived():
    # a pole at -0.2 rad/s needs a = 1 + 0.1^2 = 1.01, just beside the region a < 1
    # where there is no steady state; the first steps from a = 5 land there
    res = adlin.size(fold(), {"a": (0.01, 100.0)}, adlin.targets.RealPole(0.2 / (2 * math.pi)),
                     starts=1)
    assert res.failed_evaluations > 0
    np.testing.assert_allclose(float(res.values[0]), 1.01, rtol=1e-8)
    assert bool(res.met)
    n = int(res.history_length[0])
    assert np.all(np.isfinite(np.asarray(res.loss_history[0, :n])))
    assert np.all(np.isfinite(np.asarray(res.pole_history[:n])))


# --- errors ------------------------------------------------------------------------------
def test_unknown_free_name():
    with pytest.raises(adlin.ParameterError, match=r"'Rr'.*closest valid name is 'R'"):
        adlin.size(rlc(), {"Rr": (1.0, 10.0)}, MinDamping(0.5))


@pytest.mark.parametrize("bounds, match", [
    ((10.0, 1.0), "low must be below high"),
    ((5.0, 5.0), "low must be below high"),
    ((0.0, 10.0), "positive"),
    ((-1.0, 10.0), "positive"),
    ((1.0, math.inf), "positive and finite"),
    ((1.0,), "pair"),
])
def test_bad_bounds(bounds, match):
    with pytest.raises(adlin.ParameterError, match=match):
        adlin.size(rlc(), {"R": bounds}, MinDamping(0.5))


def test_no_targets_and_no_free():
    with pytest.raises(adlin.ParameterError, match="needs targets"):
        adlin.size(rlc(), {"R": (1.0, 10.0)}, [])
    with pytest.raises(adlin.ParameterError, match="needs free"):
        adlin.size(rlc(), {}, MinDamping(0.5))


def test_target_naming_what_the_model_lacks():
    with pytest.raises(adlin.ParameterError, match="unknown output 'v_x'"):
        adlin.size(rlc(), {"R": (1.0, 10.0)}, Bandwidth("v_x", "v_in", min_hz=1e3))


@pytest.mark.parametrize("kwargs, match", [
    ({"starts": 0}, "starts"),
    ({"max_iterations": 0}, "max_iterations"),
    ({"round_to": "E48"}, "'E48'.*'E12', 'E24', 'E96'"),
    ({"progress": 3}, "progress"),
])
def test_bad_options(kwargs, match):
    with pytest.raises(adlin.ParameterError, match=match):
        adlin.size(rlc(), {"R": (1.0, 10.0)}, MinDamping(0.5), **kwargs)


def test_regulator_example_is_a_model_file():
    # examples/ldo_compensation.py doubles as a model file for `adlin size`
    from pathlib import Path

    from adlin.cli.model_file import load_model

    path = Path(__file__).resolve().parents[1] / "examples" / "ldo_compensation.py"
    model = load_model(path)
    assert model.label.endswith(":regulator") and model.circuit is not None
    assert {"C_out", "R_esr", "R_load"} <= set(model.system.param_names)


def test_not_a_system():
    with pytest.raises(adlin.ModelError, match="System"):
        adlin.size(object(), {"R": (1.0, 10.0)}, MinDamping(0.5))
