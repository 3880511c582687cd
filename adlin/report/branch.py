"""A followed branch as a report: special points, stable ranges, sampled table.

`summarize_branch` turns an `adlin.Branch` into plain Python values (the
column the engineer chose to watch, its value at every fold and Hopf point,
the stable and unstable ranges), which the text, JSON and figure writers
share.  It evaluates the model's outputs at the located points, because a
fold found by the extended system lies between samples.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._errors import ParameterError, did_you_mean
from . import SAFETY_NOTE

# Sample rows shown in the terminal table; the located points are always shown.
MAX_TABLE_ROWS = 24


@dataclass(frozen=True)
class SpecialPoint:
    """A fold or Hopf point: `kind`, parameter `value`, watched `level`, `omega` (rad/s)."""

    kind: str
    value: float
    level: float
    omega: float | None = None
    exact: bool = True


@dataclass(frozen=True)
class Run:
    """A run of samples with one stability: parameter `start`..`stop`, sample indices."""

    stable: bool
    start: float
    stop: float
    first: int
    last: int


@dataclass(frozen=True)
class BranchSummary:
    """Everything a branch report shows, as plain numbers.

    - `name`: model name; `param`, `param_unit`; `show`, `show_unit`: the
      watched column.
    - `values`, `levels`: the parameter and the watched column per sample;
      `max_real`: largest real part of the poles per sample (rad/s);
      `stable`: per sample.
    - `points`: folds and Hopf points in walk order; `runs`: stable and
      unstable runs.
    - `complete`, `reason`, `notes`: how the walk ended.
    """

    name: str
    param: str
    param_unit: str
    show: str
    show_unit: str
    start: float
    stop: float
    values: np.ndarray
    levels: np.ndarray
    max_real: np.ndarray
    stable: np.ndarray
    points: list[SpecialPoint]
    runs: list[Run]
    complete: bool
    reason: str
    notes: tuple[str, ...] = ()
    safety_note: str = field(default=SAFETY_NOTE)

    def table_indices(self, limit: int = MAX_TABLE_ROWS) -> list[int]:
        """Evenly spread sample indices (first and last included), at most `limit`."""
        k = len(self.values)
        if k <= limit:
            return list(range(k))
        return sorted({int(round(i)) for i in np.linspace(0, k - 1, limit)})


def default_column(system) -> str:
    """The first output, else the first unknown: what a branch diagram plots by default."""
    return system.outputs[0] if system.outputs else system.unknowns[0]


def check_column(system, name: str) -> None:
    """**Raises:** `ParameterError` when `name` is neither an unknown nor an output."""
    valid = system.unknowns + system.outputs
    if name not in valid:
        raise ParameterError(
            f"--show {name}: {system.name!r} has no unknown or output {name!r}; "
            f"{did_you_mean(name, valid)}.")


def _level_at(system, name: str, x: np.ndarray, param: str, value: float,
              inputs: Mapping[str, Any], params: Mapping[str, Any]) -> float:
    """The watched column at a located point (unknowns x, parameter at `value`)."""
    if name in system.unknowns:
        return float(x[system.unknowns.index(name)])
    inputs, params = dict(inputs), dict(params)
    (inputs if param in system.inputs else params)[param] = value
    y = system.g(np.asarray(x), system.input_vector(inputs), system.param_vector(params))
    return float(np.asarray(y)[system.outputs.index(name)])


def summarize_branch(system, branch, show: str | None = None, *,
                     inputs: Mapping[str, Any] | None = None,
                     params: Mapping[str, Any] | None = None,
                     start: float | None = None, stop: float | None = None) -> BranchSummary:
    """Collect a Branch's report values.

    **Arguments:**

    - `system`: the System the branch was followed on.
    - `branch`: the `adlin.Branch` from `adlin.track`.
    - `show`: the unknown or output to watch (default `default_column`).
    - `inputs`, `params`: the other values the branch was followed with.
    - `start`, `stop`: the requested range (default the branch's ends).

    **Raises:** `ParameterError` for an unknown `show`.
    """
    show = show or default_column(system)
    check_column(system, show)
    inputs, params = dict(inputs or {}), dict(params or {})
    values = np.asarray(branch.values, dtype=float)
    levels = np.asarray(branch[show], dtype=float) if len(values) else np.zeros(0)
    points: list[SpecialPoint] = []
    for k in range(len(branch.folds)):
        v = float(branch.folds.values[k])
        x = np.asarray(branch.folds.x[k])
        points.append(SpecialPoint("fold", v, _level_at(system, show, x, branch.param, v,
                                                        inputs, params),
                                   exact=bool(branch.folds.exact[k])))
    for k in range(len(branch.hopf)):
        v = float(branch.hopf.values[k])
        x = np.asarray(branch.hopf.x[k])
        points.append(SpecialPoint("Hopf", v, _level_at(system, show, x, branch.param, v,
                                                        inputs, params),
                                   omega=float(branch.hopf.omega[k]),
                                   exact=bool(branch.hopf.exact[k])))
    # walk order: by the sample interval each point lies in
    order = [int(i) for i in np.asarray(branch.folds.index)] + [
        int(i) for i in np.asarray(branch.hopf.index)]
    points = [p for _, p in sorted(zip(order, points, strict=True), key=lambda t: t[0])]
    s = branch.segments
    runs = [Run(bool(s.stable[k]), float(s.start[k]), float(s.stop[k]), int(s.first[k]),
                int(s.last[k])) for k in range(len(s))]
    return BranchSummary(
        name=system.name, param=branch.param, param_unit=system.unit(branch.param),
        show=show, show_unit=system.unit(show),
        start=float(values[0]) if start is None and len(values) else float(start or 0.0),
        stop=float(values[-1]) if stop is None and len(values) else float(stop or 0.0),
        values=values, levels=levels, max_real=np.asarray(branch.max_real_pole, dtype=float),
        stable=np.asarray(branch.stable, dtype=bool), points=points, runs=runs,
        complete=bool(branch.complete), reason=str(branch.reason), notes=tuple(branch.notes))


def branch_to_dict(summary: BranchSummary) -> dict[str, Any]:
    """The branch report as JSON-ready data (non-finite numbers become None)."""

    def num(v):
        v = float(v)
        return v if np.isfinite(v) else None

    return {
        "model": summary.name,
        "parameter": {"name": summary.param, "unit": summary.param_unit,
                      "start": summary.start, "stop": summary.stop},
        "watched": {"name": summary.show, "unit": summary.show_unit},
        "complete": summary.complete,
        "reason": summary.reason,
        "notes": list(summary.notes),
        "special_points": [{"kind": p.kind, "value": p.value, "level": num(p.level),
                            "omega_rad_s": None if p.omega is None else num(p.omega),
                            "exact": p.exact} for p in summary.points],
        "runs": [{"stable": r.stable, "start": r.start, "stop": r.stop,
                  "first_sample": r.first, "last_sample": r.last} for r in summary.runs],
        "samples": [{"value": num(v), "level": num(y), "max_real_pole_rad_s": num(m),
                     "stable": bool(s)} for v, y, m, s in
                    zip(summary.values, summary.levels, summary.max_real, summary.stable,
                        strict=True)],
        "safety_note": summary.safety_note,
    }
