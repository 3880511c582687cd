"""Engineering notation for reports: 4.7e-6 F -> '4.7 uF'."""

from __future__ import annotations

import math

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
    for scale, prefix in _PREFIXES:
        if mag >= scale * 0.9995:
            break
    else:
        scale, prefix = _PREFIXES[-1]
    return f"{v / scale:.{digits}g} {prefix}{unit}"
