"""Points on the branch between two samples, and roots of a scalar along it.

Every located point (fold fallback, Hopf point, crossing of a parameter
value, the end point) is found on the stretch of branch between sample i and
sample i+1, parametrized by the arclength s in [0, h_i] measured from sample
i along its tangent.  A corrector run with the arclength constraint at s
gives the branch point there, so a root of any smooth scalar g along the
branch is found by regula falsi on s with the Illinois modification
(Dowell & Jarratt, BIT 11, 1971), which keeps the bracket and converges
superlinearly.  Staying on the walked stretch means the located point cannot
jump to another branch.
"""

from __future__ import annotations

import functools
from collections.abc import Callable
from dataclasses import dataclass

import jax
import numpy as np

from .corrector import CONVERGED, Engine


@dataclass(frozen=True)
class Point:
    """One corrected point, on the host."""

    y: np.ndarray  # (n + 1,): x and lam
    tangent: np.ndarray  # (n + 1,), (x, lam) coordinates
    status: int
    iterations: int
    residual: float
    poles: np.ndarray
    outputs: np.ndarray

    @property
    def ok(self) -> bool:
        return self.status == CONVERGED

    @property
    def lam(self) -> float:
        return float(self.y[-1])


def unit(t: np.ndarray, w: np.ndarray) -> np.ndarray:
    """t scaled to unit length in the weighted norm ||w * t||."""
    return t / np.linalg.norm(t * w)


@dataclass
class Solver:
    """The engine bound to one family's arguments and tolerances (host side)."""

    engine: Engine
    args: object
    tol: tuple
    max_iter: int

    def correct(self, y0, w, c, d, t_prev) -> Point:
        f64 = functools.partial(np.asarray, dtype=np.float64)  # host arrays: no device op
        out = self.engine.correct(f64(y0), f64(w), f64(c), f64(d), f64(t_prev),
                                  self.args, self.tol, self.max_iter)
        out = jax.device_get(out)
        return Point(y=np.array(out.y), tangent=np.array(out.tangent),
                     status=int(out.status), iterations=int(out.iterations),
                     residual=float(out.residual), poles=np.asarray(out.poles),
                     outputs=np.asarray(out.outputs))

    def on_arc(self, y, t, w, s: float) -> Point:
        """The branch point at weighted arclength s from y along the unit tangent t."""
        tz = t * w
        return self.correct(y + s * t, w, tz, float(tz @ (y * w)) + s, t)

    def at_lam(self, y, t, w, lam: float) -> Point:
        """Newton at fixed lam from y (used to put a located point exactly on lam)."""
        n = y.shape[0] - 1
        c = np.zeros(n + 1)
        c[n] = 1.0
        return self.correct(y, w, c, lam * w[n], t)


def illinois(point_at: Callable[[float], Point], g: Callable[[float, Point], float],
             h: float, ga: float, gb: float, *, ftol: float, stol: float,
             max_iter: int) -> tuple[Point | None, bool]:
    """Root of g(s, point_at(s)) on [0, h], given g(0) = ga and g(h) = gb of opposite signs.

    **Returns:** (point, converged); the point is the last one evaluated
    (None if the corrector failed at the first trial).
    """
    if ga == 0 or gb == 0:  # a sample is the root itself
        s = 0.0 if ga == 0 else h
        pt = point_at(s)
        return (pt, True) if pt.ok and g(s, pt) == 0 else (None, False)
    a, b, fa, fb = 0.0, h, ga, gb
    best: Point | None = None
    for _ in range(max_iter):
        s = b - fb * (b - a) / (fb - fa)
        lo, hi = min(a, b), max(a, b)
        if not (lo < s < hi):
            s = 0.5 * (a + b)
        pt = point_at(s)
        if not pt.ok:
            return best, False
        fs = g(s, pt)
        if not np.isfinite(fs):
            return best, False
        best = pt
        if abs(fs) <= ftol or abs(b - a) <= stol:
            return pt, True
        if fs * fb < 0:
            a, fa = b, fb
        else:
            fa *= 0.5
        b, fb = s, fs
    return best, False
