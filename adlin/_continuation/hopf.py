"""Hopf points: a complex pole pair crossing the imaginary axis along the branch.

Between two samples, a pole of the upper half-plane whose real part changes
sign (paired with its nearest pole at the other sample, both ways) marks a
Hopf point (Kuznetsov, Elements of Applied Bifurcation Theory, 3rd ed.,
Springer 2004, sec. 3.4; Govaerts 2000, ch. 4).  Its position is located
precisely by a regula-falsi search on the pair's real part along the
stretch of branch between the samples, each trial being a corrected branch
point (see `segment.py`); the frequency is the pair's imaginary part there,
in rad/s.  A real pole crossing zero is a fold or branch point, not a Hopf
point, and is not reported here.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

# A pole counts as complex when |Im| exceeds this fraction of its magnitude.
COMPLEX_FRACTION = 1e-8


@dataclass(frozen=True)
class FoundHopf:
    index: int
    y: np.ndarray
    omega: float  # rad/s
    exact: bool
    note: str


def upper(poles: np.ndarray) -> np.ndarray:
    """The poles of the open upper half-plane (one of each complex pair)."""
    p = np.asarray(poles)
    return p[p.imag > COMPLEX_FRACTION * np.maximum(np.abs(p), 1e-300)]


def nearest(poles: np.ndarray, target: complex) -> complex | None:
    if poles.size == 0:
        return None
    return complex(poles[np.argmin(np.abs(poles - target))])


def find_hopf(walk, solver, opts, label: str) -> list[FoundHopf]:
    """Hopf points between successive samples of a walked branch."""
    found = []
    pts = walk.points
    for i in range(len(pts) - 1):
        ua, ub = upper(pts[i].poles), upper(pts[i + 1].poles)
        for pa in ua:
            pa = complex(pa)
            pb = nearest(ub, pa)
            if pb is None or nearest(ua, pb) != pa:
                continue
            if (pa.real < 0) == (pb.real < 0):
                continue
            h = walk.hs[i]

            last: dict[str, complex | None] = {}

            def crossing(s, pt, pa=pa, pb=pb, h=h, last=last):
                p = nearest(upper(pt.poles), pa + (pb - pa) * s / h)
                last["pole"] = p
                return np.nan if p is None else p.real

            ftol = 1e-13 * max(abs(pa), abs(pb))
            pt, ok = walk.locate(solver, i, crossing, pa.real, pb.real, ftol, opts)
            if pt is None or last.get("pole") is None:
                frac = pa.real / (pa.real - pb.real)
                y = pts[i].y + frac * (pts[i + 1].y - pts[i].y)
                omega = abs((pa + frac * (pb - pa)).imag)
                found.append(FoundHopf(i, y, omega, False, (
                    f"Hopf point near {label}={y[-1]:.6g}: the pole pair could not be followed "
                    "between the samples; the position is interpolated")))
                continue
            found.append(FoundHopf(i, pt.y, abs(last["pole"].imag), ok, "" if ok else (
                f"Hopf point near {label}={pt.lam:.6g}: the search did not converge")))
    return found
