"""Pole and zero tables: rad/s, Hz, damping ratio, Q and time constant."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._units import si


@dataclass(frozen=True)
class Root:
    """One pole or zero (a complex pair is listed once, with its + imaginary part)."""

    value: complex  # rad/s
    pair: bool  # True: value and its conjugate

    @property
    def magnitude_rad_s(self) -> float:
        return abs(self.value)

    @property
    def frequency_hz(self) -> float:
        """Natural frequency |s| / 2 pi."""
        return abs(self.value) / (2 * math.pi)

    @property
    def damping(self) -> float:
        """Damping ratio -Re(s)/|s| (1 for a real left-half-plane root)."""
        mag = abs(self.value)
        return -self.value.real / mag if mag > 0 else float("nan")

    @property
    def q(self) -> float:
        """Quality factor 1/(2 zeta) of a complex pair; nan for real roots."""
        zeta = self.damping
        if not self.pair:
            return math.nan
        return 1.0 / (2.0 * zeta) if zeta != 0 else math.inf

    @property
    def time_constant_s(self) -> float:
        """-1/Re(s): envelope decay time (negative for growing modes; inf on the axis)."""
        re = self.value.real
        return -1.0 / re if re != 0 else math.inf

    def as_dict(self) -> dict:
        return {"real_rad_s": self.value.real, "imag_rad_s": self.value.imag, "pair": self.pair,
                "frequency_hz": self.frequency_hz, "damping": self.damping, "q": self.q,
                "time_constant_s": self.time_constant_s}


def group_roots(values, rtol: float = 1e-9) -> list[Root]:
    """Sort by magnitude and merge conjugate pairs."""
    vals = [complex(v) for v in np.asarray(values).ravel() if np.isfinite(v)]
    vals.sort(key=lambda v: (abs(v), -v.imag))
    out: list[Root] = []
    used = [False] * len(vals)
    for i, v in enumerate(vals):
        if used[i]:
            continue
        used[i] = True
        tol = rtol * max(abs(v), 1e-300)
        if abs(v.imag) > tol:
            for j in range(i + 1, len(vals)):
                if not used[j] and abs(vals[j] - v.conjugate()) <= 1e3 * tol:
                    used[j] = True
                    break
            out.append(Root(complex(v.real, abs(v.imag)), True))
        else:
            out.append(Root(complex(v.real, 0.0), False))
    return out


@dataclass(frozen=True)
class RootTable:
    """A table of poles or zeros with the quantities engineers read off them."""

    kind: str  # "pole" or "zero"
    roots: tuple[Root, ...]

    def rows(self) -> list[dict]:
        return [r.as_dict() for r in self.roots]

    def lines(self) -> list[str]:
        head = (f"{self.kind + 's':<7} {'s (rad/s)':>26} {'f (Hz)':>11} {'damping':>8} "
                f"{'Q':>8} {'tau':>10}")
        out = [head]
        for r in self.roots:
            s = (f"{r.value.real:.4g} ± j{r.value.imag:.4g}" if r.pair else f"{r.value.real:.4g}")
            q = f"{r.q:.3g}" if r.pair and math.isfinite(r.q) else "-"
            out.append(f"{'':<7} {s:>26} {si(r.frequency_hz, 'Hz'):>11} {r.damping:>8.3f} {q:>8} "
                       f"{si(r.time_constant_s, 's'):>10}")
        if not self.roots:
            out.append(f"{'':<7} (no finite {self.kind}s)")
        return out

    def __str__(self) -> str:
        return "\n".join(self.lines())
