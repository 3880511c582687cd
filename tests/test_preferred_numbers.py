"""Preferred numbers of IEC 60063 (E12, E24, E96) and rounding to them.

Sources: IEC 60063:2015, "Preferred number series for resistors and
capacitors".  The E24 list in adlin is quoted from memory; E12 is checked as
every other E24 value and E96 against the rule that defines it (10**(i/96)
rounded to three significant figures), both properties of the standard.
"""

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import adlin

# IEC 60063 E24, quoted from memory.
E24_QUOTED = [1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
              3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1]


def test_e24_matches_the_quoted_list():
    assert adlin.preferred_values("E24").tolist() == E24_QUOTED


def test_e12_is_every_other_e24_value():
    # IEC 60063: each series E(N/2) takes every other value of EN.
    assert adlin.preferred_values("E12").tolist() == E24_QUOTED[::2]


def test_e96_follows_its_defining_rule():
    # IEC 60063: E96 values are 10**(i/96) rounded to three significant figures.
    vals = adlin.preferred_values("E96")
    assert len(vals) == 96
    rule = [round(10 ** (i / 96), 2) for i in range(96)]
    np.testing.assert_allclose(vals, rule, rtol=0, atol=1e-12)


def test_e24_historical_exceptions():
    # The two-figure series predate the rule: eight E24 values differ from
    # round(10**(i/24), 1) by one unit (IEC 60063; a well-known feature of the series).
    vals = adlin.preferred_values("E24")
    rule = np.array([round(10 ** (i / 24), 1) for i in range(24)])
    differ = vals[np.abs(vals - rule) > 1e-9]
    assert differ.tolist() == [2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2]
    assert np.all(np.abs(vals - rule) <= 0.1 + 1e-9)


def test_series_name_is_case_insensitive_and_unknown_names_are_listed():
    assert adlin.preferred_values("e96")[1] == 1.02
    with pytest.raises(adlin.ParameterError, match=r"'E48'.*'E12', 'E24', 'E96'"):
        adlin.preferred_values("E48")
    with pytest.raises(adlin.ParameterError, match="E6"):
        adlin.round_to_series(100.0, "E6")


@pytest.mark.parametrize("bad", [0.0, -4.7e3, math.inf, math.nan])
def test_round_to_series_rejects_non_positive_values(bad):
    with pytest.raises(adlin.ParameterError, match="positive"):
        adlin.round_to_series(bad, "E24")


def test_round_to_series_examples():
    # Hand-checked nearest values (log distance): 4650 lies between 4.3k and 4.7k.
    assert adlin.round_to_series(4650.0, "E24") == 4700.0
    assert adlin.round_to_series(9.6e-9, "E24") == 1.0e-8     # across the decade
    assert adlin.round_to_series(1.0e-6, "E12") == 1.0e-6     # already preferred
    assert adlin.round_to_series(44.71, "E96") == 44.2
    np.testing.assert_array_equal(adlin.round_to_series([1.04, 2.5e3], "E12"), [1.0, 2.7e3])


def test_round_to_series_respects_bounds():
    # 44.71 rounds to 43 in E24; with the value at least 44 required, 47 is the choice.
    assert adlin.round_to_series(44.71, "E24") == 43.0
    assert adlin.round_to_series(44.71, "E24", low=44.0) == 47.0


@given(st.floats(min_value=1e-13, max_value=1e13, allow_nan=False),
       st.sampled_from(["E12", "E24", "E96"]))
def test_round_to_series_is_the_nearest_in_ratio(x, series):
    # Law: the result is a member of the series (in some decade) and no member of
    # the series in the neighbouring decades is nearer in log distance.
    r = adlin.round_to_series(x, series)
    mantissa = r / 10 ** math.floor(math.log10(r) + 1e-12)
    assert np.min(np.abs(adlin.preferred_values(series) - mantissa)) < 1e-9
    d = math.floor(math.log10(x))
    members = [v * 10.0 ** k for k in (d - 1, d, d + 1) for v in adlin.preferred_values(series)]
    best = min(abs(math.log(m / x)) for m in members)
    assert abs(math.log(r / x)) <= best + 1e-12
