"""Engineering notation both ways: 4.7e-6 F -> '4.7 uF' for reports, '4.7u' -> 4.7e-6 for input."""

from __future__ import annotations

import math
import re

_PREFIXES = [(1e12, "T"), (1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"),
             (1e-6, "u"), (1e-9, "n"), (1e-12, "p"), (1e-15, "f"), (1e-18, "a")]


def si(value: float, unit: str = "", digits: int = 4) -> str:
    """Format a value with an SI prefix and `digits` significant digits."""
    v = float(value)
    if math.isnan(v):
        return "nan"
    if math.isinf(v):
        return ("-" if v < 0 else "") + "inf" + (f" {unit}" if unit else "")
    if v == 0.0:
        return f"0 {unit}".rstrip()
    if not unit or unit in ("1", "-"):
        return f"{v:.{digits}g}"
    mag = abs(v)
    if mag < 0.9995e-18 or mag >= 1e15:
        return f"{v:.{digits}g} {unit}"  # beyond the prefixes: plain scientific notation
    for scale, prefix in _PREFIXES:  # noqa: B007 (both are read after the loop)
        if mag >= scale * 0.9995:
            break
    else:
        scale, prefix = _PREFIXES[-1]
    return f"{v / scale:.{digits}g} {prefix}{unit}"


_PREFIX_VALUES = {"T": 1e12, "G": 1e9, "M": 1e6, "k": 1e3, "m": 1e-3, "u": 1e-6, "µ": 1e-6,
                  "n": 1e-9, "p": 1e-12, "f": 1e-15}
_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([TGMkmuµnpf]?)\s*$")


def parse_number(text: str) -> float:
    """A float, optionally with an SI prefix: '4.7u' -> 4.7e-6, '10k' -> 1e4.

    **Raises:** `ValueError` for anything else (including 'inf' and 'nan').
    """
    m = _NUMBER.match(text)
    if not m:
        raise ValueError(text)
    value = float(m.group(1)) * _PREFIX_VALUES.get(m.group(2), 1.0)
    if not math.isfinite(value):
        raise ValueError(text)
    return value
