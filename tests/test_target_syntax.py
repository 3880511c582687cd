"""`--target SPEC` text -> `adlin.targets` objects (adlin/cli/target_syntax.py).

The forms are our own syntax, so the checks are that each form builds the
target the module documents, with SI prefixes read as the IEC/SI prefixes
(SI Brochure, 9th edition, 2019, table 7: k = 1e3, M = 1e6, p = 1e-12), and
that every malformed spec is refused with one sentence naming it.
"""

from __future__ import annotations

import math

import jax.numpy as jnp
import pytest
from hypothesis import given
from hypothesis import strategies as st

import adlin
from adlin import targets as T
from adlin.cli.options import CommandError
from adlin.cli.target_syntax import FORMS, parse_range, parse_target, parse_targets


def _rc_system():
    # one RC low-pass, only for name checks (no solve, no compile)
    return adlin.System(
        lambda x, u, p: jnp.array([(x[0] - u[0]) / p["R"]]),
        lambda x, p: jnp.array([p["C"] * x[0]]),
        unknowns=("v_c",), inputs=("v_in",), params={"R": 1e3, "C": 1e-9}, name="rc")


@pytest.mark.parametrize(("spec", "expected"), [
    ("damping>=0.6", T.MinDamping(0.6)),
    ("pair=12k,0.707", T.PolePair(12e3, 0.707)),
    ("pair = 1.5M , 0.5", T.PolePair(1.5e6, 0.5)),
    ("pole=1k", T.RealPole(1e3)),
    ("margin<=-100", T.StabilityMargin(-100.0)),
    ("bandwidth:v_out/v_in>=1M", T.Bandwidth("v_out", "v_in", min_hz=1e6)),
    ("bandwidth:v_out/v_in<=20k", T.Bandwidth("v_out", "v_in", max_hz=20e3)),
    ("bandwidth:v_out/v_in=1k..2k", T.Bandwidth("v_out", "v_in", min_hz=1e3, max_hz=2e3)),
    ("gain:v_out/v_in=10", T.DCGain("v_out", "v_in", value=10.0)),
    ("gain:v_out/v_in=-4.7", T.DCGain("v_out", "v_in", value=-4.7)),
    ("gain:v_out/v_in>=10", T.DCGain("v_out", "v_in", low=10.0)),
    ("gain:v_out/v_in=9..11", T.DCGain("v_out", "v_in", low=9.0, high=11.0)),
    ("bias:v_out=1.1..1.3", T.BiasLimit("v_out", low=1.1, high=1.3)),
    ("bias:i_supply<=10m", T.BiasLimit("i_supply", high=10e-3)),
])
def test_each_form_builds_its_target(spec, expected):
    assert parse_target(spec) == expected


def test_si_prefixes_scale_the_numbers():
    # SI Brochure, 9th ed., table 7
    assert parse_target("pole=10p").f_hz == pytest.approx(10e-12, rel=1e-15)
    assert parse_target("pair=2.2M,0.3").f_hz == pytest.approx(2.2e6, rel=1e-15)
    assert parse_target("margin<=-3k").max_real_rad_s == pytest.approx(-3e3, rel=1e-15)


@given(st.floats(1e-3, 1e9), st.floats(0.0, 5.0))
def test_pair_reads_back_any_printed_value(f_hz, zeta):
    t = parse_target(f"pair={f_hz!r},{zeta!r}")
    assert t.f_hz == f_hz and t.zeta == zeta


@pytest.mark.parametrize(("spec", "why"), [
    ("damping<=0.6", "lower bound"),
    ("damping>=2", "damping ratio"),            # the target's own range check, kept
    ("pair=12k", "pair=FREQ_HZ,ZETA"),
    ("pair=12k,abc", "not a number"),
    ("pole=-1k", "positive"),
    ("pole>=1k", "pole=FREQ_HZ"),
    ("margin>=-100", "upper bound"),
    ("bandwidth>=1M", "OUTPUT/INPUT"),
    ("bandwidth:v_out>=1M", "OUTPUT/INPUT"),
    ("bandwidth:v_out/v_in=1M", "LOW..HIGH"),
    ("gain:v_out/v_in=11..9", "LOW <= HIGH"),
    ("bias=1..2", "bias:NAME"),
    ("slew>=1M", "unknown kind"),
    ("damping", ""),
    ("", ""),
    ("damping:v_out>=0.5", "takes no"),
])
def test_malformed_specs_are_refused_in_one_sentence(spec, why):
    with pytest.raises(CommandError) as info:
        parse_target(spec)
    text = str(info.value)
    assert repr(spec) in text and why in text and FORMS in text
    assert "\n" not in text and text.endswith(".")


def test_names_are_checked_against_the_model():
    system = _rc_system()
    assert parse_targets(["bias:v_c<=1", "pole=1k"], system)[1] == T.RealPole(1e3)
    with pytest.raises(adlin.ParameterError, match="v_cc"):
        parse_targets(["bias:v_cc<=1"], system)
    with pytest.raises(adlin.ParameterError, match="v_ot"):
        parse_targets(["gain:v_ot/v_in=2"], system)


def test_ranges():
    assert parse_range("1k..100k") == (1e3, 1e5)
    assert parse_range(" 10p .. 1n ") == (pytest.approx(1e-11), pytest.approx(1e-9))
    for bad in ("1k", "2..1", "a..b", "1..inf"):
        with pytest.raises(ValueError):
            parse_range(bad)
    assert math.isfinite(parse_range("-1..1")[0])
