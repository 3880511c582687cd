"""adlin.targets against outside references.

- Series RLC: omega0 = 1/sqrt(LC), zeta = (R/2) sqrt(C/L), poles
  -zeta omega0 +- omega0 sqrt(zeta^2 - 1) (Alexander & Sadiku, Fundamentals of
  Electric Circuits, 6th ed., sec. 8.5); its -3 dB bandwidth
  omega0 sqrt(1 - 2 zeta^2 + sqrt(4 zeta^4 - 4 zeta^2 + 2)) (Ogata, Modern
  Control Engineering, 5th ed., frequency-response chapter, the second-order system's
  bandwidth; from memory, and re-derived here with sympy).
- First-order RC low-pass: -3 dB at 1/(2 pi R C), |H|^2 = 1/(1 + (f/fc)^2)
  (Alexander & Sadiku sec. 14.2).
- Resistor divider: gain R2/(R1+R2), source current v/(R1+R2) (voltage
  division, Alexander & Sadiku sec. 2.5; section numbers from memory).
- The pole-placement loss equals the squared product of the pseudo-hyperbolic
  distances |p - s| / |p + conj(s)| of the left half-plane (Garnett, Bounded
  Analytic Functions, ch. I.1, for the disc; from memory), computed here from
  scipy.linalg.eigvals.
- Derivatives: central finite differences.
"""

from __future__ import annotations

import functools
import math

import jax
import jax.numpy as jnp
import numpy as np
import pytest
import scipy.linalg
import sympy
from closed_forms import series_rlc
from hypothesis import given, settings
from hypothesis import strategies as st

import adlin
from adlin import targets as T

L0, C0 = 1e-3, 1e-6
W0 = 1 / math.sqrt(L0 * C0)
F0 = W0 / (2 * math.pi)
R_CRIT = 2 * math.sqrt(L0 / C0)


def rlc():
    return series_rlc(10.0, L0, C0)


def zeta_of(R, L=L0, C=C0):
    return R / 2 * math.sqrt(C / L)


@functools.cache
def rc_lowpass():
    def current(x, u, p):
        return jnp.stack([(x[0] - u[0]) / p["R"]])

    def charge(x, p):
        return p["C"] * x

    return adlin.System(current, charge, unknowns=("v_out",), inputs={"v_in": 1.0},
                        params={"R": 1e3, "C": 1e-6}, name="rc_lowpass_t")


@functools.cache
def divider():
    c = adlin.Circuit("divider_t")
    c.input("v_in", 5.0, unit="V")
    c.voltage_source("V1", "src", "gnd", "v_in")
    c.resistor("R1", "src", "out", 10e3)
    c.resistor("R2", "out", "gnd", 4.7e3)
    c.output("v_out", "out")
    return c.build()


def point(system, params):
    """Operating point and small-signal model (traceable: jit, vmap and grad work)."""
    op = adlin.steady_state(system, params=params, strategy="newton")
    return op, adlin.linearize(system, op)


@functools.cache
def rlc_losses(targets: tuple):
    """Jitted losses of `targets` as a function of log(R, L, C), and its two Jacobians."""

    def losses(logp):
        R, L, C = jnp.exp(logp)
        op, m = point(rlc(), {"R": R, "L": L, "C": C})
        return jnp.stack([t.loss(op, m) for t in targets])

    return jax.jit(losses), jax.jit(jax.jacfwd(losses)), jax.jit(jax.jacrev(losses))


@functools.cache
def evaluator(system, targets: tuple):
    """A jitted evaluation of `targets` for parameter overrides (compiled once per set)."""

    @jax.jit
    def run(params):
        return T.evaluate(targets, *point(system, params))

    return run


def rlc_results(R, targets):
    return evaluator(rlc(), tuple(targets))({"R": R})


# --- pole placement -------------------------------------------------------------------------


@pytest.mark.parametrize("R", [10.0, 0.6 * R_CRIT, R_CRIT, 1.7 * R_CRIT])
def test_pole_pair_loss_is_zero_at_the_target_and_positive_elsewhere(R):
    zeta = zeta_of(R)
    on, off_f, off_z = rlc_results(R, [T.PolePair(F0, zeta), T.PolePair(1.05 * F0, zeta),
                                       T.PolePair(F0, zeta + 0.1)])
    assert float(on.loss) < 1e-24 and bool(on.met)
    assert float(on.achieved[0]) == pytest.approx(F0, rel=1e-9)
    assert float(on.achieved[1]) == pytest.approx(zeta, rel=1e-9)
    for r in (off_f, off_z):
        assert float(r.loss) > 1e-5 and not bool(r.met)


PLACEMENTS = (T.PolePair(F0, 0.3), T.PolePair(0.4 * F0, 0.9), T.PolePair(3 * F0, 0.05),
              T.PolePair(2 * F0, 1.4), T.RealPole(0.5 * F0))


@settings(max_examples=20, deadline=None)
@given(st.floats(1.0, 3 * R_CRIT))
def test_pole_placement_loss_is_the_pseudo_hyperbolic_product(R):
    E = np.diag([C0, L0])
    A = np.array([[0.0, 1.0], [-1.0, -R]])
    poles = scipy.linalg.eigvals(A, E)
    for target, res in zip(PLACEMENTS, rlc_results(R, PLACEMENTS), strict=True):
        if isinstance(target, T.RealPole):
            roots = [-2 * math.pi * target.f_hz]
        else:
            roots = list(target.roots())
            if target.zeta < 1:
                roots = roots[:1]  # the conjugate root follows for a real model
        d = [np.prod(np.abs(poles - s) / np.abs(poles + np.conj(s))) for s in roots]
        if len(roots) == 2:
            # two real roots: both distances, and the divided difference of
            # b(s) = prod (s - p) / (-s - p) scaled by omega, in place of the second
            b = [np.prod((s - poles) / (-s - poles)) for s in roots]
            w = 2 * math.pi * target.f_hz
            want = d[0] ** 2 + abs(w * (b[0] - b[1]) / (roots[0] - roots[1])) ** 2
        else:
            want = d[0] ** 2
        assert float(res.loss) == pytest.approx(want, rel=1e-9, abs=1e-15), target


def test_double_pole_target_needs_both_poles():
    # zeta = 1 asks for a double pole at -omega0: one pole there is not enough
    (crit,) = rlc_results(R_CRIT, [T.PolePair(F0, 1.0)])
    assert float(crit.loss) < 1e-24 and bool(crit.met)
    # overdamped RLC whose slower pole sits at -omega0 / 2: a real-pole target there is met,
    # the double-pole target at that frequency is not
    R = (W0 / 2 + 2 * W0) * L0  # poles -omega0/2 and -2 omega0 (product omega0^2, sum R/L)
    real, double = rlc_results(R, [T.RealPole(F0 / 2), T.PolePair(F0 / 2, 1.0)])
    assert float(real.loss) < 1e-24 and bool(real.met)
    assert float(real.achieved[0]) == pytest.approx(F0 / 2, rel=1e-9)
    assert float(double.loss) > 1e-3 and not bool(double.met)


# --- all-pole bounds -----------------------------------------------------------------------


@pytest.mark.parametrize("R", [10.0, 0.6 * R_CRIT, 1.7 * R_CRIT])
def test_min_damping_and_stability_margin_against_closed_forms(R):
    zeta = zeta_of(R)
    a = R / (2 * L0)
    largest_real = -a if zeta < 1 else -a + math.sqrt(a * a - W0 * W0)
    damp, margin_ok, margin_bad = rlc_results(
        R, [T.MinDamping(0.5), T.StabilityMargin(0.99 * largest_real),
            T.StabilityMargin(1.1 * largest_real)])
    assert float(damp.achieved[0]) == pytest.approx(min(zeta, 1.0), rel=1e-9)
    assert bool(damp.met) == (zeta >= 0.5)
    want = 2 * max(0.5 - zeta, 0.0) ** 2  # the pair counts twice
    assert float(damp.loss) == pytest.approx(want, rel=1e-9, abs=1e-30)
    assert float(margin_ok.achieved[0]) == pytest.approx(largest_real, rel=1e-9)
    assert bool(margin_ok.met) and float(margin_ok.loss) == 0.0
    assert not bool(margin_bad.met)
    excess = (largest_real - 1.1 * largest_real) / abs(1.1 * largest_real)
    n_violating = 2 if zeta < 1 else 1
    assert float(margin_bad.loss) == pytest.approx(n_violating * excess**2, rel=1e-9)


TARGETS = (T.PolePair(F0, 0.5), T.PolePair(1.3 * F0, 1.0), T.RealPole(0.7 * F0),
           T.MinDamping(0.5), T.StabilityMargin(-0.5 * W0), T.MinDamping(0.9),
           T.Bandwidth("v_c", "v_in", min_hz=0.8 * F0))


@pytest.mark.parametrize("R", [R_CRIT, 0.7 * R_CRIT])
def test_losses_are_smooth_where_poles_coalesce(R):
    # at R_CRIT the two poles coincide (a defective double pole): every loss still has a
    # finite gradient equal to central finite differences, forward and reverse mode
    f, jf, jr = rlc_losses(TARGETS)
    x = jnp.log(jnp.array([R, L0, C0]))
    fwd, rev = np.asarray(jf(x)), np.asarray(jr(x))
    assert np.isfinite(fwd).all() and np.isfinite(rev).all()
    h = 1e-6
    for j in range(3):
        e = np.zeros(3)
        e[j] = h
        fd = (np.asarray(f(x + e)) - np.asarray(f(x - e))) / (2 * h)
        np.testing.assert_allclose(fwd[:, j], fd, rtol=1e-5, atol=1e-9)
        np.testing.assert_allclose(rev[:, j], fd, rtol=1e-5, atol=1e-9)


# --- response targets ---------------------------------------------------------------------------


RC_BANDS = (T.Bandwidth("v_out", "v_in", min_hz=1e3), T.Bandwidth("v_out", "v_in", max_hz=1e3))


@settings(max_examples=20, deadline=None)
@given(st.floats(10.0, 1e6), st.floats(1e-3, 1e3))
def test_rc_bandwidth_is_one_over_two_pi_rc(R, fc_khz):
    fc = 1e3 * fc_khz
    C = 1 / (2 * math.pi * R * fc)
    at_least, at_most = evaluator(rc_lowpass(), RC_BANDS)({"R": R, "C": C})
    assert float(at_least.achieved[0]) == pytest.approx(fc, rel=1e-9)
    assert bool(at_least.met) == (fc >= 1e3) and bool(at_most.met) == (fc <= 1e3)
    # |H(j 2 pi f)|^2 = 1 / (1 + (f/fc)^2) at f = 1 kHz
    r = 1 / (1 + (1e3 / fc) ** 2)
    assert float(at_least.loss) == pytest.approx(max(1 - 2 * r, 0) ** 2, rel=1e-9, abs=1e-15)
    assert float(at_most.loss) == pytest.approx(max(2 * r - 1, 0) ** 2, rel=1e-9, abs=1e-15)


def second_order_bandwidth(zeta):
    """Bandwidth / omega0 of 1/(s^2 + 2 zeta s + 1), re-derived with sympy."""
    w, z = sympy.symbols("w z", positive=True)
    mag2 = 1 / ((1 - w**2) ** 2 + (2 * z * w) ** 2)
    sols = sympy.solve(sympy.Eq(mag2.subs(z, sympy.Rational(zeta).limit_denominator(10**9)),
                                sympy.Rational(1, 2)), w)
    return float(min(s for s in sols if s.is_real and s > 0))


@pytest.mark.parametrize("R", [10.0, 0.6 * R_CRIT, 1.7 * R_CRIT])
def test_rlc_bandwidth_against_second_order_formula(R):
    zeta = zeta_of(R)
    formula = math.sqrt(1 - 2 * zeta**2 + math.sqrt(4 * zeta**4 - 4 * zeta**2 + 2))
    assert second_order_bandwidth(zeta) == pytest.approx(formula, rel=1e-7)
    (bw,) = rlc_results(R, [T.Bandwidth("v_c", "v_in", min_hz=0.1 * F0)])
    assert float(bw.achieved[0]) == pytest.approx(formula * F0, rel=1e-9)


def test_dc_gain_and_bias_limit_on_a_divider():
    system = divider()
    R1, R2, v = 10e3, 4.7e3, 5.0
    gain = R2 / (R1 + R2)
    i_drawn = v / (R1 + R2)
    # the source's branch current enters its + node from outside: drawn current is -i_V1
    supply = T.BiasLimit(lambda op: -op["i_V1"], high=0.3e-3, name="supply current", unit="A")
    window = T.BiasLimit("v_out", low=1.0, high=1.7, unit="V")
    targets = [T.DCGain("v_out", "v_in", value=gain), T.DCGain("v_out", "v_in", value=0.5),
               T.DCGain("v_out", "v_in", low=0.4, high=0.6), supply, window]
    T.validate(targets, system)
    op, m = point(system, {})
    exact, off, band, cur, win = T.evaluate(targets, op, m)
    assert float(exact.achieved[0]) == pytest.approx(gain, rel=1e-12) and bool(exact.met)
    assert float(exact.loss) < 1e-24
    assert float(off.loss) == pytest.approx(((gain - 0.5) / 0.5) ** 2, rel=1e-9)
    assert not bool(off.met)
    assert float(band.loss) == pytest.approx(((0.4 - gain) / 0.6) ** 2, rel=1e-9)
    assert float(cur.achieved[0]) == pytest.approx(i_drawn, rel=1e-12)
    assert float(cur.loss) == pytest.approx(((i_drawn - 0.3e-3) / 0.3e-3) ** 2, rel=1e-9)
    assert not bool(cur.met)
    assert float(win.achieved[0]) == pytest.approx(v * gain, rel=1e-12)
    assert bool(win.met) and float(win.loss) == 0.0
    assert cur.row()["achieved_text"].startswith("supply current 340.1 uA")


def test_targets_under_jit_vmap_and_grad():
    system = divider()
    targets = (T.DCGain("v_out", "v_in", value=0.4), T.BiasLimit("v_out", low=1.0, high=2.5))

    @jax.jit
    def run(R2):
        op, m = point(system, {"R2": R2})
        return T.evaluate(targets, op, m), T.total_loss(targets, op, m)

    results, total = run(4.7e3)
    assert float(total) == pytest.approx(sum(float(r.loss) for r in results), rel=1e-12)
    batch, totals = jax.vmap(run)(jnp.array([1e3, 4.7e3, 20e3]))
    assert batch[1].met.shape == (3,) and totals.shape == (3,)
    # gain R2/(R1+R2) = 0.4 at R2 = R1 * 2/3: that sample's gain target is met
    _, at = run(10e3 * 2 / 3)
    assert float(at) < 1e-24

    def loss(R2):
        return run(R2)[1]

    R2, h = 4.7e3, 1e-2
    fd = (loss(R2 + h) - loss(R2 - h)) / (2 * h)
    assert float(jax.grad(loss)(R2)) == pytest.approx(float(fd), rel=1e-6)


# --- messages ----------------------------------------------------------------------------------


def test_bad_targets_are_refused_with_the_culprit_named():
    system = divider()
    with pytest.raises(adlin.ParameterError, match="'v_ot'.*'v_out'"):
        T.validate([T.DCGain("v_ot", "v_in", value=1.0)], system)
    with pytest.raises(adlin.ParameterError, match="'v_outt'"):
        T.validate(T.BiasLimit("v_outt", high=1.0), system)
    with pytest.raises(adlin.ParameterError, match="zeta"):
        T.PolePair(1e3, -0.2)
    with pytest.raises(adlin.ParameterError, match="min_hz"):
        T.Bandwidth("v_out", "v_in")
    with pytest.raises(adlin.ParameterError, match="scale"):
        T.BiasLimit("v_out", low=0.0, high=0.0)
    with pytest.raises(adlin.ParameterError, match="name="):
        T.BiasLimit(lambda op: op["v_out"], high=1.0)
    with pytest.raises(adlin.ParameterError, match="either value"):
        T.DCGain("v_out", "v_in", value=1.0, low=0.5)
    with pytest.raises(adlin.ParameterError, match="weight"):
        T.MinDamping(0.5, weight=0.0)
    with pytest.raises(adlin.ParameterError, match="targets must be"):
        T.validate(["v_out"], system)
    assert T.PolePair(1e3, 0.5) == T.PolePair(1e3, 0.5)
    assert hash(T.PolePair(1e3, 0.5)) == hash(T.PolePair(np.float64(1e3), 0.5))
