"""Preferred numbers for component values: the E12, E24 and E96 series of IEC 60063.

A series EN has N values per decade, roughly equal steps of 10**(1/N) in
ratio.  E96 (three significant figures) is exactly 10**(i/96) rounded to three
figures.  E12 and E24 (two figures) are older than the rule and keep eight
historical values that differ from round(10**(i/24), 1) by one unit in the
last place: 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7 (the rule gives 2.6, 2.9, 3.2,
3.5, 3.8, 4.2, 4.6) and 8.2 (the rule gives 8.3); E12 is every other E24
value, so it shares 2.7, 3.3, 3.9, 4.7 and 8.2.  The lists below are quoted
from memory; the tests check E96 against the rule and E12 against E24.
"""

from __future__ import annotations

import math

import numpy as np

from .._errors import ParameterError

# One decade each, as integers in the last significant figure (exact decimals).
_E24 = (10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30,
        33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91)
_E96 = (100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130,
        133, 137, 140, 143, 147, 150, 154, 158, 162, 165, 169, 174,
        178, 182, 187, 191, 196, 200, 205, 210, 215, 221, 226, 232,
        237, 243, 249, 255, 261, 267, 274, 280, 287, 294, 301, 309,
        316, 324, 332, 340, 348, 357, 365, 374, 383, 392, 402, 412,
        422, 432, 442, 453, 464, 475, 487, 499, 511, 523, 536, 549,
        562, 576, 590, 604, 619, 634, 649, 665, 681, 698, 715, 732,
        750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953, 976)

# series name -> (mantissas as integers, their scale: value = mantissa / scale)
_SERIES: dict[str, tuple[tuple[int, ...], int]] = {
    "E12": (_E24[::2], 10),
    "E24": (_E24, 10),
    "E96": (_E96, 100),
}
SERIES_NAMES: tuple[str, ...] = tuple(_SERIES)


def _series(series: str) -> tuple[tuple[int, ...], int]:
    key = series.upper() if isinstance(series, str) else series
    if key not in _SERIES:
        raise ParameterError(f"unknown preferred-number series {series!r}: the valid ones are "
                             f"{', '.join(repr(s) for s in SERIES_NAMES)}.")
    return _SERIES[key]


def preferred_values(series: str) -> np.ndarray:
    """One decade of a preferred-number series, from 1 up to (not including) 10.

    **Arguments:**

    - `series`: "E12", "E24" or "E96" (case does not matter).

    **Returns:** a float array, e.g. [1.0, 1.1, 1.2, ..., 9.1] for E24.

    **Raises:** `ParameterError` for another series name, listing the valid ones.
    """
    mantissas, scale = _series(series)
    return np.array([m / scale for m in mantissas])


def _one(x, series: str, low: float | None, high: float | None) -> float:
    try:
        v = float(x)
    except (TypeError, ValueError):
        raise ParameterError(f"round_to_series needs a number, got {x!r}.") from None
    if not (math.isfinite(v) and v > 0):
        raise ParameterError(f"round_to_series needs a positive finite value (preferred numbers "
                             f"are component magnitudes), got {x!r}.")
    mantissas, scale = _series(series)
    digits = len(str(scale)) - 1
    decade = math.floor(math.log10(v))
    # Neighbouring decades too: 9.6 is nearer to 10 (E24) than to 9.1.
    candidates = [float(f"{m}e{d - digits}") for d in (decade - 1, decade, decade + 1)
                  for m in mantissas]
    inside = [c for c in candidates
              if (low is None or c >= low) and (high is None or c <= high)]
    pool = inside or candidates
    return min(pool, key=lambda c: (abs(math.log(c / v)), c))


def round_to_series(x, series: str, *, low: float | None = None, high: float | None = None):
    """The preferred value nearest to `x` in log distance (ratio), in any decade.

    **Arguments:**

    - `x`: a positive number (or an array of them).
    - `series`: "E12", "E24" or "E96".
    - `low`, `high`: optional bounds: the nearest preferred value inside
      [low, high] is chosen when there is one (a bound itself need not be a
      preferred value); otherwise the nearest overall.

    **Returns:** a float (an array of floats for an array `x`), an exact
    decimal such as 4700.0 or 1.02e-06.

    **Raises:** `ParameterError` for an unknown series or a value that is not
    positive and finite.
    """
    if np.ndim(x) == 0:
        return _one(x, series, low, high)
    arr = np.asarray(x, dtype=float)
    return np.array([_one(v, series, low, high) for v in arr.ravel()]).reshape(arr.shape)
