"""Pseudo-arclength continuation: tangent predictor, bordered corrector, step control.

The branch {(x, lam): F(x, lam) = 0} is followed as a curve in its arclength,
not in lam, so it passes through folds where lam turns back (Keller,
"Numerical solution of bifurcation and nonlinear eigenvalue problems", in
Applications of Bifurcation Theory, Academic Press 1977; Allgower & Georg,
Numerical Continuation Methods, Springer 1990, ch. 2 and 6).  Each step:

1. predictor: y_pred = y_i + h t_i along the unit tangent t_i;
2. corrector: Newton on F = 0 with the pseudo-arclength constraint
   t_i . (z - z_i) = h (`corrector.py`);
3. checks: the corrector converged, the new tangent turned by less than
   `max_turn_deg`, and the correction moved less than h (a longer move
   means the corrector fell onto another part of the solution set);
4. step control: a failed step is retried `shrink` times shorter; an easy
   one (few corrector iterations) makes the next `grow` times longer, up
   to `max_step`; below `min_step` the walk stops and says where and why.

Weighted norm.  Unknowns in volts and amperes and a parameter in ohms or
volts have very different sizes, so lengths are measured in
z = w * (x, lam) with w_lam = 1 / |stop - start| and
w_i = 1 / max(largest |x_i| met so far on the branch, floor_i), the floor
being `voltage_scale` for unknowns in V, `current_scale` for A, 1 otherwise.
A step of h (parameter units, as the user gives it) is a weighted length of
h * w_lam, so the parameter never moves by more than h in one step.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from .corrector import STATUS_CAUSES
from .options import TrackOptions
from .segment import Point, Solver, illinois, unit


@dataclass
class Walk:
    """The samples of a walk along the branch, on the host.

    `ws[i]` are the weights used for the step leaving sample i and `hs[i]` its
    weighted length, so the stretch i -> i+1 can be re-walked exactly.
    """

    points: list[Point] = field(default_factory=list)
    ws: list[np.ndarray] = field(default_factory=list)
    hs: list[float] = field(default_factory=list)
    complete: bool = False
    reason: str = ""

    def tangent(self, i: int) -> np.ndarray:
        return unit(self.points[i].tangent, self.ws[i])

    def on_segment(self, solver: Solver, i: int, s: float) -> Point:
        p = self.points[i]
        return solver.on_arc(p.y, self.tangent(i), self.ws[i], s)

    def locate(self, solver: Solver, i: int, g: Callable[[float, Point], float], ga: float,
               gb: float, ftol: float, opts: TrackOptions) -> tuple[Point | None, bool]:
        """A root of g along the stretch from sample i to i+1 (see `segment.illinois`)."""
        h = self.hs[i]
        return illinois(lambda s: self.on_segment(solver, i, s), g, h, ga, gb, ftol=ftol,
                        stol=1e-14 * h, max_iter=opts.max_locate_iterations)


def _end_on_value(solver: Solver, y, t, w, h, target, lam_new, opts, span):
    """The branch point with lam == target on the step of length h from y (lam_new at h)."""

    def g(s, pt):
        return pt.lam - target

    pt, _ = illinois(lambda s: solver.on_arc(y, t, w, s), g, h, y[-1] - target,
                     lam_new - target, ftol=1e-13 * span, stol=1e-14 * h,
                     max_iter=opts.max_locate_iterations)
    if pt is None:
        return None
    exact = solver.at_lam(pt.y, pt.tangent, w, target)
    if exact.ok:
        exact.y[-1] = target  # within an ulp already; make the end value exact
        return exact
    return pt


def follow(
    solver: Solver,
    x0: np.ndarray,
    start: float,
    stop: float,
    floors: np.ndarray,
    *,
    step: float,
    min_step: float,
    max_step: float,
    max_points: int,
    opts: TrackOptions,
    label: str,
    progress: Callable[[float, int], None] | None = None,
) -> Walk:
    """Walk the branch from (x0, start) towards lam = stop.

    The first point is x0 corrected at lam = start.  The walk ends when lam
    reaches `stop` (that point is solved exactly at `stop`, and the walk is
    complete), when the branch turns back past `start` (the point at `start`
    is added), after `max_points` points, or when the step size falls below
    `min_step`; the reason is recorded and the points so far are kept.
    """
    n = x0.shape[0]
    span = abs(stop - start)
    direction = 1.0 if stop > start else -1.0
    scale = np.maximum(np.abs(x0), floors)
    w = np.concatenate([1.0 / scale, [1.0 / span]])
    walk = Walk()
    axis = np.zeros(n + 1)
    axis[n] = direction
    first = solver.at_lam(np.concatenate([x0, [start]]), axis, w, start)
    if not first.ok:
        walk.reason = (f"the start point is not a steady state at {label}={start:.6g} "
                       f"({STATUS_CAUSES[first.status]})")
        return walk
    first.y[-1] = start
    walk.points.append(first)
    walk.ws.append(w)
    wl = w[n]
    h, h_min, h_max = step * wl, min_step * wl, max_step * wl
    cos_max = math.cos(math.radians(opts.max_turn_deg))
    reached = 0.0
    while True:
        if len(walk.points) >= max_points:
            walk.reason = (f"stopped after max_points={max_points} points at "
                           f"{label}={walk.points[-1].lam:.6g}; raise max_points or the step")
            break
        here = walk.points[-1]
        t = walk.tangent(len(walk.points) - 1)
        y = here.y
        new = solver.on_arc(y, t, w, h)
        cause = STATUS_CAUSES.get(new.status, "")
        ok = new.ok
        if ok and float(unit(new.tangent, w) * w @ (t * w)) < cos_max:
            ok, cause = False, f"the tangent turned by more than {opts.max_turn_deg:g} degrees"
        if ok and np.linalg.norm((new.y - (y + h * t)) * w) > h:
            ok, cause = False, "the corrector moved farther than the step"
        if not ok:
            h *= opts.shrink
            if h < h_min:
                walk.reason = (f"step size underflow at {label}={here.lam:.6g}: {cause} "
                               f"for every step down to min_step={min_step:.3g}")
                break
            continue
        if (new.lam - stop) * direction >= 0 or (new.lam - start) * direction < 0:
            target = stop if (new.lam - stop) * direction >= 0 else start
            end = _end_on_value(solver, y, t, w, h, target, new.lam, opts, span)
            if end is not None:
                walk.points.append(end)
                walk.hs.append(float((t * w) @ ((end.y - y) * w)))  # arclength along t
                walk.ws.append(w)
            if target == stop:
                walk.complete = end is not None
                walk.reason = ("reached the stop value" if end is not None else
                               f"could not place the end point at {label}={stop:.6g}")
            else:
                walk.reason = (f"the branch turned back and left the range at "
                               f"{label}={start:.6g}")
            break
        walk.points.append(new)
        walk.hs.append(h)
        scale = np.maximum(scale, np.abs(new.y[:n]))
        w = np.concatenate([1.0 / scale, [wl]])
        walk.ws.append(w)
        if new.iterations <= opts.easy_iterations:
            h = min(h * opts.grow, h_max)
        if progress is not None:
            reached = max(reached, min(1.0, abs(new.lam - start) / span))
            progress(reached, len(walk.points))
    if progress is not None and walk.complete:
        progress(1.0, len(walk.points))
    return walk
