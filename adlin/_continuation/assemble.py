"""Turn a walked branch into a `Branch`: stability, folds, Hopf points, crossings, runs."""

from __future__ import annotations

import jax
import numpy as np

from .arclength import Walk
from .branch import Branch, Crossings, Folds, HopfPoints, Segments
from .fold import find_folds
from .hopf import find_hopf
from .options import TrackOptions
from .segment import Solver


def _dev(a):
    # device_put, not jnp.asarray: no small compiled program per shape
    return jax.device_put(np.asarray(a))


# A pole counts as in the left half-plane when Re < -STABLE_FRACTION * (largest |pole|).
STABLE_FRACTION = 1e-12


def stability(poles: np.ndarray) -> np.ndarray:
    """Per sample: every pole strictly in the left half-plane (True with no poles)."""
    if poles.shape[1] == 0:
        return np.ones(poles.shape[0], dtype=bool)
    size = np.max(np.abs(poles), axis=1)
    return np.all(poles.real < -STABLE_FRACTION * size[:, None], axis=1)


def find_crossings(walk: Walk, solver: Solver, targets, opts: TrackOptions, span: float):
    """Every place the branch crosses each target value, located exactly on the stretch."""
    out = []
    pts = walk.points
    lam = np.array([p.lam for p in pts])
    for c in targets:
        c = float(c)
        if lam.size and lam[0] == c:
            out.append((0, c, pts[0].y))
        for i in range(len(pts) - 1):
            a, b = lam[i] - c, lam[i + 1] - c
            if b == 0:
                out.append((i + 1, c, pts[i + 1].y))
                continue
            if a * b >= 0:
                continue
            pt, _ = walk.locate(solver, i, lambda s, p, c=c: p.lam - c, a, b, 1e-13 * span, opts)
            if pt is None:
                continue
            exact = solver.at_lam(pt.y, pt.tangent, walk.ws[i], c)
            y = exact.y if exact.ok else pt.y
            out.append((i, c, y))
    out.sort(key=lambda r: r[0])
    return out


def _segments(values, stable, events) -> Segments:
    """Runs of equal stability; a boundary at a located event takes the event's value."""
    k = len(values)
    first, last, start, stop, flag = [], [], [], [], []
    i = 0
    while i < k:
        j = i
        while j + 1 < k and stable[j + 1] == stable[i]:
            j += 1
        first.append(i)
        last.append(j)
        start.append(events.get(i - 1, values[i]) if i > 0 else values[i])
        stop.append(events.get(j, values[j]) if j < k - 1 else values[j])
        flag.append(bool(stable[i]))
        i = j + 1
    return Segments(first=_dev(np.array(first, dtype=int)),
                    last=_dev(np.array(last, dtype=int)),
                    start=_dev(np.array(start, dtype=float)),
                    stop=_dev(np.array(stop, dtype=float)),
                    stable=_dev(np.array(flag, dtype=bool)))


def assemble(walk: Walk, solver: Solver, n: int, n_poles: int, n_out: int, *,
             param: str, unknown_names, output_names, crossings, opts: TrackOptions,
             span: float) -> Branch:
    pts = walk.points
    k = len(pts)
    values = np.array([p.lam for p in pts], dtype=float)
    x = np.array([p.y[:n] for p in pts], dtype=float).reshape(k, n)
    y = np.array([p.outputs for p in pts], dtype=float).reshape(k, n_out)
    poles = np.array([p.poles for p in pts], dtype=complex).reshape(k, n_poles)
    stable = stability(poles)
    residual = np.array([p.residual for p in pts], dtype=float)
    arclength = np.concatenate([[0.0], np.cumsum(walk.hs[: max(k - 1, 0)])])[:k]
    failures: list[str] = []

    def guarded(what, find, *a):
        # the walked samples are the result; a failure while locating special
        # points must not lose them, so it becomes a note instead
        try:
            return find(*a)
        except Exception as err:  # noqa: BLE001
            failures.append(f"{what} could not be located: {type(err).__name__}: {err}")
            return []

    folds = guarded("folds", find_folds, walk, solver, opts, param)
    hopf = guarded("Hopf points", find_hopf, walk, solver, opts, param) if n_poles else []
    cross = guarded("crossings", find_crossings, walk, solver, crossings, opts, span)
    events = {f.index: float(f.y[n]) for f in folds}
    events.update({h.index: float(h.y[n]) for h in hopf})
    notes = (tuple(f.note for f in folds if f.note) + tuple(h.note for h in hopf if h.note)
             + tuple(failures))

    def arr(rows, width=None, dtype=float):
        a = np.array(rows, dtype=dtype)
        return _dev(a.reshape(len(rows), width) if width is not None else a)

    return Branch(
        values=_dev(values), x=_dev(x), y=_dev(y),
        poles=_dev(poles), stable=_dev(stable), residual=_dev(residual),
        arclength=_dev(arclength),
        folds=Folds(values=arr([f.y[n] for f in folds]), x=arr([f.y[:n] for f in folds], n),
                    index=arr([f.index for f in folds], dtype=int),
                    exact=arr([f.exact for f in folds], dtype=bool)),
        hopf=HopfPoints(values=arr([h.y[n] for h in hopf]), x=arr([h.y[:n] for h in hopf], n),
                        omega=arr([h.omega for h in hopf]),
                        index=arr([h.index for h in hopf], dtype=int),
                        exact=arr([h.exact for h in hopf], dtype=bool)),
        segments=_segments(values, stable, events),
        crossings=Crossings(values=arr([c[1] for c in cross]), x=arr([c[2][:n] for c in cross], n),
                            index=arr([c[0] for c in cross], dtype=int)),
        param=param, unknown_names=tuple(unknown_names), output_names=tuple(output_names),
        complete=walk.complete, reason=walk.reason, notes=notes,
    )
