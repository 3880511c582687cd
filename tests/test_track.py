"""adlin.track: pseudo-arclength continuation, folds, Hopf points, stability.

Each check names the outside source of the expected value.
"""

import functools
import math

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from closed_forms import diode_resistor, diode_resistor_exact, van_der_pol
from hypothesis import given, settings
from hypothesis import strategies as st

import adlin
from adlin._continuation.track import track_family

# --- reference systems ---------------------------------------------------------------------

S_CURVE_TRACES = []


def _s_curve_field(x, u, p):
    S_CURVE_TRACES.append(1)  # counts traces of the model (no retracing per step)
    return jnp.stack([p["r"] + x[0] - x[0] ** 3])


@functools.cache
def s_curve() -> adlin.System:
    """x' = r + x - x^3: the imperfect pitchfork with unit bifurcation parameter.

    Folds (saddle-node points) where r + x - x^3 = 0 and 1 - 3x^2 = 0:
    x = -+1/sqrt 3, r = +-2/(3 sqrt 3) (Strogatz, Nonlinear Dynamics and Chaos,
    2nd ed., sec. 3.6, the cusp x' = h + r x - x^3 at r = 1).  An equilibrium is
    stable where the slope 1 - 3x^2 is negative (Strogatz sec. 2.4).
    """
    return adlin.System.from_ode(_s_curve_field, states=("x",), params={"r": -1.0},
                                 name="s_curve")


R_FOLD = 2 / (3 * math.sqrt(3))
X_FOLD = 1 / math.sqrt(3)


@functools.cache
def s_curve_branch() -> adlin.Branch:
    return adlin.track(s_curve(), "r", -1.0, 1.0)


@functools.cache
def wien_bridge() -> adlin.System:
    """Wien-bridge oscillator with an ideal amplifier of gain K (a VCVS).

    Series R-C from the amplifier output to node p, parallel R-C from p to
    ground, amplifier input at p.  The feedback ratio is
    sRC / ((sRC)^2 + 3 sRC + 1), which is 1/3 at omega = 1/(RC), so the loop
    oscillates at K = 3 (Sedra & Smith, Microelectronic Circuits, 7th ed.,
    sec. 18.2, from memory); the closed-loop characteristic polynomial is
    (sRC)^2 + (3 - K) sRC + 1.
    """
    c = adlin.Circuit("wien_bridge")
    c.param("K", 2.0)
    c.param("R", 10e3, unit="ohm")
    c.param("C", 10e-9, unit="F")
    c.vcvs("A1", "out", "gnd", "p", "gnd", "K")
    c.resistor("R1", "out", "m", "R")
    c.capacitor("C1", "m", "p", "C")
    c.resistor("R2", "p", "gnd", "R")
    c.capacitor("C2", "p", "gnd", "C")
    c.output("v_out", "out")
    return c.build()


@functools.cache
def lc_tank() -> adlin.System:
    """Parallel L, C, loss conductance G = 1/R_loss and a negative conductance -gn.

    Node equation C v' + (G - gn) v + i_L = 0, L i_L' = v: the poles
    s^2 + ((G - gn)/C) s + 1/(LC) = 0 cross the imaginary axis at gn = G with
    omega = 1/sqrt(LC) (common practice for negative-resistance oscillators).
    The negative conductance is a VCCS feeding current into the node.
    """
    c = adlin.Circuit("lc_tank")
    c.param("gn", 0.5e-3, unit="S")
    c.resistor("R_loss", "t", "gnd", 1e3)
    c.inductor("L1", "t", "gnd", 1e-3)
    c.capacitor("C1", "t", "gnd", 1e-9)
    c.vccs("Gn", "gnd", "t", "t", "gnd", "gn")
    return c.build()


@functools.cache
def defined_below_one() -> adlin.System:
    """x' = lam - x, with a model law that is tabulated only for lam <= 1 and
    returns NaN beyond (the steady state x = lam is exact where it is defined)."""

    def h(x, u, p):
        return jnp.stack([p["lam"] - x[0] + jnp.where(p["lam"] > 1.0, jnp.nan, 0.0)])

    return adlin.System.from_ode(h, states=("x",), params={"lam": 0.0}, name="defined_below_one")


# --- folds and the S-curve -------------------------------------------------------------------


def test_s_curve_folds_located_to_1e8():
    """Strogatz 2nd ed. sec. 3.6: folds at r = +-2/(3 sqrt 3), x = -+1/sqrt 3."""
    b = s_curve_branch()
    assert b.complete and b.reason == "reached the stop value"
    assert len(b.folds) == 2
    assert len(b.hopf) == 0  # a real pole crossing zero at a fold is not a Hopf point
    assert np.all(np.asarray(b.folds.exact))
    r = np.asarray(b.folds.values)
    x = np.asarray(b.folds.x)[:, 0]
    # walking up from r = -1 on the lower branch: the first fold is at +R_FOLD
    assert r[0] == pytest.approx(R_FOLD, abs=1e-8)
    assert x[0] == pytest.approx(-X_FOLD, abs=1e-8)
    assert r[1] == pytest.approx(-R_FOLD, abs=1e-8)
    assert x[1] == pytest.approx(X_FOLD, abs=1e-8)


def test_s_curve_is_followed_back_over_itself():
    """The parameter rises to the first fold, falls to the second, rises again;
    every sample satisfies r + x - x^3 = 0 (Strogatz sec. 3.6)."""
    b = s_curve_branch()
    r, x = np.asarray(b.values), b["x"]
    dr = np.diff(r)
    signs = np.sign(dr[dr != 0])
    runs = [signs[0]] + [s for a, s in zip(signs[:-1], signs[1:], strict=True) if s != a]
    assert runs == [1, -1, 1]
    assert r[0] == -1.0 and r[-1] == 1.0
    np.testing.assert_allclose(r + x - x**3, 0.0, atol=1e-12)
    # the middle part lies on the middle root, between the fold values of x
    mid = (np.arange(len(b)) > int(b.folds.index[0])) & (np.arange(len(b)) <= int(b.folds.index[1]))
    assert np.all(np.abs(x[mid]) < X_FOLD)


def test_s_curve_stability_and_segments():
    """Stable where the slope 1 - 3x^2 < 0 (Strogatz 2nd ed. sec. 2.4); the pole
    of this one-state model is that slope.  The stable runs end at the folds."""
    b = s_curve_branch()
    x = b["x"]
    slope = 1 - 3 * x**2
    np.testing.assert_allclose(np.asarray(b.poles)[:, 0].real, slope, rtol=1e-9, atol=1e-12)
    np.testing.assert_array_equal(np.asarray(b.stable), slope < 0)
    seg = b.segments
    assert list(np.asarray(seg.stable)) == [True, False, True]
    assert float(seg.stop[0]) == pytest.approx(R_FOLD, abs=1e-8)
    assert float(seg.start[1]) == pytest.approx(R_FOLD, abs=1e-8)
    assert float(seg.stop[1]) == pytest.approx(-R_FOLD, abs=1e-8)
    assert b.stable_ranges() == [(-1.0, pytest.approx(R_FOLD, abs=1e-8)),
                                 (pytest.approx(-R_FOLD, abs=1e-8), 1.0)]


@settings(max_examples=12, deadline=None, derandomize=True, database=None)
@given(st.lists(st.floats(-0.95, 0.95), min_size=1, max_size=3, unique=True))
def test_s_curve_crossings_are_every_real_root(levels):
    """Where the branch crosses r = c it passes through every real root of
    x^3 - x - c = 0 (three between the folds, one outside; numpy.roots as the
    reference)."""
    b = adlin.track(s_curve(), "r", -1.0, 1.0, crossings=levels)
    got_r = np.asarray(b.crossings.values)
    got_x = np.asarray(b.crossings.x)[:, 0]
    for c in levels:
        roots = np.roots([1.0, 0.0, -1.0, -c])
        real = np.sort(roots[np.abs(roots.imag) < 1e-9].real)
        mine = np.sort(got_x[got_r == c])
        assert mine.shape == real.shape
        np.testing.assert_allclose(mine, real, atol=1e-10)


def test_branch_that_turns_back_past_start_ends_there():
    """From the middle root x = 0 at r = 0 the branch climbs to the fold at
    r = 2/(3 sqrt 3) and comes back down the lower branch, leaving the range at
    r = 0, where the lower root of x^3 - x = 0 is x = -1 (Strogatz sec. 3.6)."""
    # plain Newton keeps the unstable middle root as the start; the default "auto"
    # prefers a stable state and would start on an outer branch instead
    b = adlin.track(s_curve(), "r", 0.0, 1.0, guess={"x": 0.0}, strategy="newton")
    assert not b.complete
    assert "turned back" in b.reason
    assert float(b.values[-1]) == 0.0
    assert float(b.x[-1, 0]) == pytest.approx(-1.0, abs=1e-12)
    assert len(b.folds) == 1 and float(b.folds.values[0]) == pytest.approx(R_FOLD, abs=1e-8)


def test_no_retrace_between_tracks():
    s_curve_branch()  # compiled
    before = len(S_CURVE_TRACES)
    b = adlin.track(s_curve(), "r", 1.0, -1.0, guess={"x": 1.5}, step=0.03)
    assert len(S_CURVE_TRACES) == before
    # walking down from the upper branch meets the fold at -R_FOLD first
    assert float(b.folds.values[0]) == pytest.approx(-R_FOLD, abs=1e-8)


def test_generic_family_engine():
    """track_family on F(x, lam) = lam + x - x^3 (the same S-curve, Strogatz sec. 3.6)
    with poles from the derivative: same folds, and the crossings of lam = 0
    are the roots -1, 0, 1."""

    def residual(x, lam, args):
        return lam + x - x**3

    def poles(x, lam, args):
        return (1 - 3 * x**2).astype(jnp.complex128)

    b = track_family(residual, np.array([-1.3247179572447458]), -1.0, 1.0, poles=poles,
                     crossings=(0.0,), param="s")
    assert b.complete
    np.testing.assert_allclose(np.asarray(b.folds.values), [R_FOLD, -R_FOLD], atol=1e-8)
    np.testing.assert_allclose(np.sort(np.asarray(b.crossings.x)[:, 0]), [-1.0, 0.0, 1.0],
                               atol=1e-12)
    assert list(np.asarray(b.segments.stable)) == [True, False, True]


def test_fold_left_approximate_when_extended_system_is_cut_short():
    """With one locating iteration the extended system cannot converge: each
    fold is still reported, flagged approximate, with the reason in the notes,
    and lies within the bracketing samples (Strogatz sec. 3.6 for the values)."""
    b = adlin.track(s_curve(), "r", -1.0, 1.0, options=adlin.TrackOptions(max_locate_iterations=1))
    assert len(b.folds) == 2 and not np.any(np.asarray(b.folds.exact))
    assert len(b.notes) == 2 and all("not an exact fold" in n for n in b.notes)
    for k in range(2):
        i = int(b.folds.index[k])
        lo, hi = sorted((float(b.values[i]), float(b.values[i + 1])))
        assert lo - 0.05 <= float(b.folds.values[k]) <= hi + 0.05
    assert abs(float(b.folds.values[0]) - R_FOLD) < 0.05
    assert "(approximate)" in b.summary()


@functools.cache
def cubic_load_line() -> adlin.System:
    """Source v_s - R - node n; from n to ground a capacitor and a cubic
    negative-conductance element i = g (v^3 / (3 V0^2) - v).  With R g > 1 the
    load line cuts the cubic three times over a range of v_s: an S-curve in the
    source voltage, with folds where 1/R + di/dv = 0 (solved with sympy in the
    test)."""
    c = adlin.Circuit("cubic_load_line")
    c.input("v_s", -1.0, unit="V")
    c.voltage_source("V1", "in", "gnd", "v_s")
    c.resistor("R1", "in", "n", 1e3)
    c.capacitor("C1", "n", "gnd", 1e-9)
    c.two_terminal("D1", "n", "gnd", current=lambda v, p: p["g"] * (v**3 / (3 * p["V0"] ** 2) - v),
                   params={"g": 2e-3, "V0": 0.5})
    c.output("v_n", "n")
    return c.build()


def test_circuit_source_sweep_through_folds_matches_sympy():
    """Folds of (v - v_s)/R + g (v^3/(3 V0^2) - v) = 0 in v_s, from sympy's exact
    solution of the fold conditions; stable exactly where 1/R + di/dv > 0 (the
    node's one pole is -(1/R + di/dv)/C)."""
    import sympy as sp

    v, vs = sp.symbols("v v_s", real=True)
    R, g, V0 = sp.Integer(1000), sp.Rational(2, 1000), sp.Rational(1, 2)
    kcl = (v - vs) / R + g * (v**3 / (3 * V0**2) - v)
    folds = sp.solve([kcl, sp.diff(kcl, v)], [v, vs], dict=True)
    expect = sorted((float(f[vs]), float(f[v])) for f in folds)
    b = adlin.track(cubic_load_line(), "v_s", -1.0, 1.0)
    assert b.complete and len(b.folds) == 2 and np.all(np.asarray(b.folds.exact))
    got = sorted(zip(np.asarray(b.folds.values), b.folds.x[:, b.unknown_names.index("v_n")],
                     strict=True))
    np.testing.assert_allclose(np.asarray(got, dtype=float), np.asarray(expect), atol=1e-9)
    vn = b["v_n"]
    slope = 1 / 1e3 + 2e-3 * (vn**2 / 0.25 - 1)
    np.testing.assert_array_equal(np.asarray(b.stable), slope > 0)
    np.testing.assert_allclose(np.asarray(b.poles)[:, 0].real, -slope / 1e-9, rtol=1e-8)


# --- Hopf points --------------------------------------------------------------------------------


def test_van_der_pol_hopf_at_mu_zero():
    """Van der Pol: the origin's eigenvalues (mu +- sqrt(mu^2 - 4))/2 cross the
    imaginary axis at mu = 0 with frequency 1 rad/s (Strogatz 2nd ed. sec. 7.6
    and the linearization of sec. 6.3)."""
    b = adlin.track(van_der_pol(-0.5), "mu", -0.5, 0.5)
    assert b.complete and len(b.hopf) == 1 and bool(b.hopf.exact[0])
    assert float(b.hopf.values[0]) == pytest.approx(0.0, abs=1e-10)
    assert float(b.hopf.omega[0]) == pytest.approx(1.0, rel=1e-10)
    assert len(b.folds) == 0
    # poles at every sample against the closed form
    mu = np.asarray(b.values)
    expect = np.stack([(mu + np.sqrt((mu**2 - 4).astype(complex))) / 2,
                       (mu - np.sqrt((mu**2 - 4).astype(complex))) / 2], axis=1)
    got = np.sort_complex(np.asarray(b.poles))
    np.testing.assert_allclose(got, np.sort_complex(expect), atol=1e-12)
    np.testing.assert_array_equal(np.asarray(b.stable), mu < 0)
    assert [bool(s) for s in np.asarray(b.segments.stable)] == [True, False]
    assert float(b.segments.stop[0]) == pytest.approx(0.0, abs=1e-10)


def test_hopf_point_on_a_sample():
    """Fixed steps of 0.05 from mu = -0.5 put a sample on mu = 0 itself (up to
    rounding): the Hopf point is still reported once, exactly (Strogatz sec. 7.6)."""
    b = adlin.track(van_der_pol(-0.5), "mu", -0.5, 0.5, step=0.05, max_step=0.05)
    assert np.min(np.abs(np.asarray(b.values))) < 1e-12
    assert len(b.hopf) == 1 and bool(b.hopf.exact[0]) and not b.notes
    assert float(b.hopf.values[0]) == pytest.approx(0.0, abs=1e-12)
    assert float(b.hopf.omega[0]) == pytest.approx(1.0, rel=1e-12)


def test_wien_bridge_oscillates_at_gain_three():
    """Sedra & Smith, Microelectronic Circuits (7th ed., sec. 18.2, from memory):
    the poles cross the imaginary axis at K = 3 with omega = 1/(RC)."""
    R, C = 10e3, 10e-9
    b = adlin.track(wien_bridge(), "K", 2.0, 4.0)
    assert b.complete and len(b.hopf) == 1
    assert float(b.hopf.values[0]) == pytest.approx(3.0, abs=1e-9)
    assert float(b.hopf.omega[0]) == pytest.approx(1 / (R * C), rel=1e-9)
    # the poles at each sample are the roots of (sRC)^2 + (3 - K) sRC + 1
    for k, poles in zip(np.asarray(b.values), np.asarray(b.poles), strict=True):
        roots = np.roots([1.0, 3.0 - k, 1.0]) / (R * C)
        np.testing.assert_allclose(np.sort_complex(poles), np.sort_complex(roots),
                                   rtol=1e-9, atol=1e-9 / (R * C))
    assert b.stable_ranges() == [(2.0, pytest.approx(3.0, abs=1e-9))]


def test_lc_tank_with_negative_conductance():
    """Hopf at gn = G, omega = 1/sqrt(LC) (common practice)."""
    G, L, C = 1e-3, 1e-3, 1e-9
    b = adlin.track(lc_tank(), "gn", 0.2e-3, 3e-3)
    assert b.complete and len(b.hopf) == 1
    assert float(b.hopf.values[0]) == pytest.approx(G, rel=1e-9)
    assert float(b.hopf.omega[0]) == pytest.approx(1 / math.sqrt(L * C), rel=1e-9)
    # the steady state itself stays at zero volts and amperes
    np.testing.assert_allclose(np.asarray(b.x), 0.0, atol=1e-15)


# --- agreement with the core steady state --------------------------------------------------------


def test_input_sweep_agrees_with_steady_state_and_lambert_w():
    """Sweeping the source of the diode-resistor circuit: the branch at each
    requested value equals adlin.steady_state (plain Newton converges there)
    and the Lambert W closed form (Banwell & Jayakumar, Electronics Letters
    36(4), 2000)."""
    system = diode_resistor(0.0)
    levels = (0.3, 0.7, 1.0, 1.5)
    b = adlin.track(system, "v_s", 0.0, 2.0, crossings=levels)
    assert b.complete and len(b.folds) == 0 and len(b.hopf) == 0
    np.testing.assert_array_equal(np.asarray(b.crossings.values), levels)
    for v, x in zip(levels, np.asarray(b.crossings.x)[:, 0], strict=True):
        op = adlin.steady_state(system, inputs={"v_s": v}, strategy="newton")
        assert x == pytest.approx(float(op["v_a"]), rel=1e-10)
        assert x == pytest.approx(diode_resistor_exact(v, 1e3, 1e-14), rel=1e-10)
    # and at a few samples of the walk
    for i in range(0, len(b), max(1, len(b) // 4)):
        op = adlin.steady_state(system, inputs={"v_s": float(b.values[i])}, strategy="newton")
        assert float(b.x[i, 0]) == pytest.approx(float(op["v_a"]), rel=1e-10, abs=1e-13)


def test_parameter_sweep_agrees_with_steady_state():
    """S-curve samples on the outer branches equal adlin.steady_state started
    next to them (plain Newton converges there, Strogatz sec. 3.6)."""
    b = s_curve_branch()
    for i in range(0, len(b), 5):
        r, x = float(b.values[i]), float(b.x[i, 0])
        op = adlin.steady_state(s_curve(), params={"r": r}, guess={"x": x + 0.05},
                                strategy="newton")
        assert float(op["x"]) == pytest.approx(x, abs=1e-12)


# --- when tracking cannot continue ---------------------------------------------------------------


def test_non_finite_model_returns_branch_so_far_with_reason():
    b = adlin.track(defined_below_one(), "lam", 0.0, 2.0)
    assert not b.complete
    assert "step size underflow" in b.reason and "non-finite" in b.reason
    r = np.asarray(b.values)
    assert len(b) > 5 and r.max() <= 1.0 and r.max() > 0.999
    np.testing.assert_allclose(b["x"], r, atol=1e-12)  # x = lam where defined
    assert "Branch(" in repr(b) and "incomplete" in b.summary()


def test_max_points_stops_with_reason():
    b = adlin.track(s_curve(), "r", -1.0, 1.0, max_points=6)
    assert len(b) == 6 and not b.complete and "max_points=6" in b.reason


def test_no_steady_state_at_start_gives_empty_branch():
    """x' = r - x^2 has no equilibrium for r < 0 (Strogatz 2nd ed. sec. 3.1)."""
    system = adlin.System.from_ode(lambda x, u, p: jnp.stack([p["r"] - x[0] ** 2]),
                                   states=("x",), params={"r": -1.0}, name="saddle_node")
    b = adlin.track(system, "r", -1.0, 1.0, strategy="newton")
    assert len(b) == 0 and not b.complete
    assert "no steady state at the start r=-1" in b.reason
    assert "empty branch" in b.summary()


def test_bad_names_and_arguments():
    with pytest.raises(adlin.ParameterError, match="'mu'"):
        adlin.track(van_der_pol(-0.5), "mu_", -0.5, 0.5)
    with pytest.raises(adlin.AdlinError, match="two different values"):
        adlin.track(van_der_pol(-0.5), "mu", 0.5, 0.5)
    with pytest.raises(adlin.AdlinError, match="min_step"):
        adlin.track(van_der_pol(-0.5), "mu", -0.5, 0.5, step=-1.0)
    with pytest.raises(adlin.AdlinError, match="grow"):
        adlin.TrackOptions(grow=0.5)
    with pytest.raises(adlin.ParameterError, match="no column"):
        s_curve_branch()["y"]


# --- the result object ---------------------------------------------------------------------------


def test_branch_is_a_pytree_and_prints():
    b = s_curve_branch()
    doubled = jax.jit(lambda br: br.x * 2.0)(b)
    np.testing.assert_allclose(np.asarray(doubled), 2 * np.asarray(b.x))
    header, rows = b.rows()
    assert header == ("r", "x", "max Re(pole) [rad/s]", "stable")
    assert len(rows) == len(b) and rows[0][0] == -1.0
    text = b.summary()
    assert "fold at r = 0.3849001795" in text and "fold at r = -0.3849001795" in text


def test_progress_reports_fraction_done():
    calls = []
    adlin.track(van_der_pol(-0.5), "mu", -0.5, 0.5, progress=lambda f, k: calls.append((f, k)))
    fractions = [f for f, _ in calls]
    assert fractions == sorted(fractions) and fractions[-1] == 1.0
    assert [k for _, k in calls][-1] >= 3
