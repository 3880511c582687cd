"""adlin.monte_carlo and adlin.tolerances against probability theory and closed forms.

Statistics: the variance of a uniform law on [-a, a] is a^2/3; the standard
error of a sample mean is sigma/sqrt(n); the sample variance has variance
(mu4 - sigma^4)/n, so by the delta method the sample standard deviation has
standard error sqrt(mu4 - sigma^4) / (2 sigma sqrt(n)), which is
sigma/sqrt(2n) for a normal law (mu4 = 3 sigma^4) and a/sqrt(15 n) for a
uniform one (mu4 = a^4/5).  Source: Papoulis & Pillai, Probability, Random
Variables and Stochastic Processes, 4th ed., McGraw-Hill 2002, ch. 5
(moments of the uniform law) and ch. 8 (sample mean and variance); the
delta-method form quoted from memory.  Every statistical check allows 5
standard errors: with a fixed seed the test is deterministic, and a correct
implementation would fail a fresh seed with probability about 6e-7 per check.
"""

from __future__ import annotations

import functools
import math

import jax.numpy as jnp
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import adlin
from adlin.tolerances import Normal, Uniform, parse

N = 20_000
R, I1, I2, C = 1e3, 1e-3, 2e-3, 1e-6


@functools.cache
def two_sources() -> adlin.System:
    """Two current sources into R parallel to C: v = R (I1 + I2), linear in I1 and I2
    (Ohm's and Kirchhoff's laws); one pole at -1/(RC)."""

    def current(x, u, p):
        return jnp.stack([x[0] / p["R"] - p["I1"] - p["I2"]])

    def charge(x, p):
        return jnp.stack([p["C"] * x[0]])

    return adlin.System(current, charge, unknowns=("v",), units={"v": "V"},
                        params={"R": R, "I1": I1, "I2": I2, "C": C}, name="two sources")


@functools.cache
def square_root() -> adlin.System:
    """v^2 = a: the bias is sqrt(a) for a > 0 and does not exist for a < 0."""

    def current(x, u, p):
        return jnp.stack([x[0] ** 2 - p["a"]])

    def charge(x, p):
        return jnp.stack([1e-6 * x[0]])

    return adlin.System(current, charge, unknowns=("v",), params={"a": 1.0}, name="square root")


@functools.cache
def spread(seed: int = 3, chunk: int | None = None):
    return adlin.monte_carlo(two_sources(), {"I1": Uniform(rel=0.1), "I2": "5%:normal"}, n=N,
                             seed=seed, of=["v"], chunk=chunk)


def test_samples_follow_their_laws():
    r = spread()
    i1, i2 = r["I1"], r["I2"]
    a = 0.1 * I1
    assert np.all(np.abs(i1 - I1) <= a)  # uniform: never outside +-a
    # uniform on [I1 - a, I1 + a]: mean I1, sigma a/sqrt(3) (Papoulis & Pillai, ch. 5)
    assert abs(i1.mean() - I1) < 5 * (a / math.sqrt(3)) / math.sqrt(N)
    assert abs(i1.std(ddof=1) - a / math.sqrt(3)) < 5 * a / math.sqrt(15 * N)
    s2 = 0.05 * I2  # normal: mean I2, sigma s2; SE of the std s2/sqrt(2n)
    assert abs(i2.mean() - I2) < 5 * s2 / math.sqrt(N)
    assert abs(i2.std(ddof=1) - s2) < 5 * s2 / math.sqrt(2 * N)


def test_linear_bias_mean_and_std_match_the_analytic_values():
    r = spread()
    v = r["v"]
    assert r.converged.all() and r.failures() == []
    # each sample: Ohm's law with the two sources summed (Kirchhoff's current law)
    np.testing.assert_allclose(v, R * (r["I1"] + r["I2"]), rtol=1e-12)
    # v = R (I1 + I2) with independent I1 ~ U(+-a), I2 ~ N(s): mean R (I1 + I2),
    # variance R^2 (a^2/3 + s^2) (variances of independent terms add; Papoulis & Pillai, ch. 6)
    a, s = 0.1 * I1, 0.05 * I2
    sigma = R * math.sqrt(a * a / 3 + s * s)
    assert abs(v.mean() - R * (I1 + I2)) < 5 * sigma / math.sqrt(N)
    # mu4 of the sum of independent zero-mean terms: mu4_U + 6 var_U var_N + mu4_N
    mu4 = R**4 * (a**4 / 5 + 6 * (a * a / 3) * s * s + 3 * s**4)
    se_std = math.sqrt(mu4 - sigma**4) / (2 * sigma * math.sqrt(N))
    assert abs(v.std(ddof=1) - sigma) < 5 * se_std
    row = next(x for x in r.summary() if x["name"] == "v")
    assert row["count"] == N and row["unit"] == "V"
    assert row["mean"] == pytest.approx(v.mean(), rel=1e-12)
    assert row["std"] == pytest.approx(v.std(ddof=1), rel=1e-12)
    assert row["min"] <= row["p1"] <= row["median"] <= row["p99"] <= row["max"]


def test_pole_is_minus_one_over_rc_in_every_sample():
    r = spread()
    # first-order RC: tau = RC (Alexander & Sadiku, Fundamentals of Electric Circuits, 5th ed., 7.2)
    np.testing.assert_allclose(np.asarray(r.poles)[:, 0], -1 / (R * C), rtol=1e-12)
    row = next(x for x in r.summary() if x["name"] == "pole 0 frequency")
    assert row["mean"] == pytest.approx(1 / (2 * math.pi * R * C), rel=1e-12)


def test_same_seed_same_arrays_other_seed_other_arrays():
    a, b = spread(3), adlin.monte_carlo(two_sources(), {"I1": Uniform(rel=0.1), "I2": "5%:normal"},
                                        n=N, seed=3, of=["v"])
    for field in ("varied", "x", "poles", "quantities", "status"):
        np.testing.assert_array_equal(np.asarray(getattr(a, field)), np.asarray(getattr(b, field)))
    c = spread(4)
    assert not np.array_equal(np.asarray(a.varied), np.asarray(c.varied))
    assert not np.array_equal(np.asarray(a.quantities), np.asarray(c.quantities))


def test_samples_are_the_documented_draws_bit_for_bit():
    """`draw_samples` draws in one compiled call; its values must be exactly
    those of its documented recipe run op by op: each name from
    jax.random.fold_in(PRNGKey(seed), its position among the parameters then
    inputs), value = nominal + scale * deviation."""
    import jax

    from adlin._design.monte_carlo import draw_samples

    system = two_sources()
    specs = {"I2": Normal(rel=0.05), "R": Uniform(rel=0.01), "I1": Uniform(abs=1e-5)}
    nominal = {"I2": I2, "R": R, "I1": I1}
    got = draw_samples(system, specs, nominal, 777, 11)
    root = jax.random.PRNGKey(11)
    for col, (name, tol) in enumerate(specs.items()):
        key = jax.random.fold_in(root, system.param_names.index(name))
        law = jax.random.normal if isinstance(tol, Normal) else functools.partial(
            jax.random.uniform, minval=-1.0, maxval=1.0)
        dev = np.asarray(law(key, (777,), jnp.float64))
        np.testing.assert_array_equal(got[:, col], nominal[name] + tol.scale(nominal[name]) * dev)


def test_chunk_size_does_not_change_the_results():
    a, b = spread(3), spread(3, chunk=96)  # 96 does not divide 20000: the last chunk is padded
    assert b.chunk == 96 and a.chunk != 96
    np.testing.assert_array_equal(np.asarray(a.varied), np.asarray(b.varied))
    # same samples; each sample's arithmetic does not depend on the batch it runs in
    np.testing.assert_allclose(np.asarray(a.quantities), np.asarray(b.quantities), rtol=1e-15)


def test_a_names_samples_do_not_depend_on_the_other_tolerances():
    one = adlin.monte_carlo(two_sources(), {"I2": "5%:normal"}, n=500, seed=9)
    two = adlin.monte_carlo(two_sources(), {"R": "1%", "I2": "5%:normal"}, n=500, seed=9)
    np.testing.assert_array_equal(one["I2"], two["I2"])


def test_failed_samples_are_listed_with_their_reason_and_count_against_the_yield():
    target = adlin.targets.BiasLimit("v", low=0.5)
    r = adlin.monte_carlo(square_root(), {"a": Normal(abs=1.0)}, n=400, seed=5, of=["v"],
                          targets=[target])
    a = r["a"]
    failed = {f["index"]: f for f in r.failures()}
    # v^2 = a has no real root for a < 0 (so Newton cannot converge there)
    assert set(np.flatnonzero(a < 0)) <= set(failed)
    assert all(a[i] < 1e-3 for i in failed)
    assert len(failed) > 20  # about 16 % of N(1, 1) samples are negative
    for i, f in failed.items():
        assert f["values"] == {"a": pytest.approx(a[i])}
        assert f["status"] != 0 and isinstance(f["reason"], str) and f["reason"]
        assert np.isnan(np.asarray(r.quantities)[i]).all()
    ok = np.asarray(r.converged)
    np.testing.assert_allclose(r["v"][ok], np.sqrt(a[ok]), rtol=1e-12)
    # v >= 0.5 exactly when a >= 0.25; failed samples count as not met
    assert r.yield_fraction() == pytest.approx(np.mean(ok & (a >= 0.25)))
    assert r.yield_fraction() < np.mean(a >= 0.25) + 1e-12
    row = next(x for x in r.summary() if x["name"] == "v")
    assert row["count"] == ok.sum() and math.isfinite(row["mean"]) and math.isfinite(row["std"])


def test_errors_name_the_culprit():
    s = two_sources()
    with pytest.raises(adlin.ParameterError, match="'I3'.*closest valid.*'I1'"):
        adlin.monte_carlo(s, {"I3": "1%"}, n=10)
    with pytest.raises(adlin.ParameterError, match="n >= 1"):
        adlin.monte_carlo(s, {"I1": "1%"}, n=0)
    with pytest.raises(adlin.ParameterError, match="below 100 %"):
        adlin.monte_carlo(s, {"I1": "150%"}, n=10)
    with pytest.raises(adlin.ParameterError, match="needs tolerances"):
        adlin.monte_carlo(s, {}, n=10)
    with pytest.raises(adlin.ParameterError, match="'I1'.*Uniform"):
        adlin.monte_carlo(s, {"I1": 0.01}, n=10)
    with pytest.raises(adlin.ParameterError, match="'I1' is 0.*absolute"):
        adlin.monte_carlo(s, {"I1": "1%"}, n=10, params={"I1": 0.0})
    with pytest.raises(adlin.ParameterError, match="unknown parameter 'Rx'"):
        adlin.monte_carlo(s, {"I1": "1%"}, n=10, params={"Rx": 1.0})


@pytest.mark.parametrize(("text", "expected"), [
    ("1%", Uniform(rel=0.01)), ("0.5%:normal", Normal(rel=0.005)), ("2m", Uniform(abs=2e-3)),
    ("2m:normal", Normal(abs=2e-3)), ("3k:uniform", Uniform(abs=3e3)), ("1e-2", Uniform(abs=0.01)),
])
def test_parse(text, expected):
    assert parse(text) == expected


@pytest.mark.parametrize("text", ["", "x", "-1%", "0%", "1%:gauss", "2q", "inf", "100%"])
def test_parse_refuses_bad_text_and_names_it(text):
    with pytest.raises(adlin.ParameterError, match=f"tolerance {text!r}"):
        parse(text)


@settings(max_examples=30, deadline=None)
@given(st.floats(min_value=1e-4, max_value=99.0), st.sampled_from(["", ":normal", ":uniform"]))
def test_parse_percent_is_relative(pct, law):
    tol = parse(f"{pct!r}%{law}")
    assert type(tol) is (Normal if law == ":normal" else Uniform)
    assert tol.rel == pytest.approx(pct / 100, rel=1e-15) and tol.abs is None


def test_tolerance_objects_validate_their_fields():
    for bad in (dict(), dict(rel=0.1, abs=1.0), dict(rel=-0.1), dict(abs=float("nan")),
                dict(rel=0.0)):
        with pytest.raises(adlin.ParameterError):
            Normal(**bad)
    with pytest.raises(adlin.ParameterError, match="zero or changes the sign"):
        Uniform(rel=1.0)
    assert Normal(rel=2.0).std(1.0) == 2.0  # a normal law may be wide; only uniform is refused
    assert Uniform(abs=3.0).std(10.0) == pytest.approx(math.sqrt(3.0))  # a / sqrt(3)
