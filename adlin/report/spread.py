"""A tolerance (Monte Carlo) run as a report: spreads, yield, failed samples.

`summarize_spread` turns an `adlin.MonteCarloResult` into plain Python and
NumPy values (no JAX arrays), shared by the text, JSON and figure writers:
the tolerances applied, one summary row per quantity and per pole frequency
(mean, standard deviation, extremes and percentiles, over the samples that
converged), the yield against the targets, the first failed samples with
their reasons, and the arrays the figures need (every sample's poles, the
quantities, the dominant pole frequency).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from . import SAFETY_NOTE

# Failed samples listed in the terminal report (all are counted; JSON lists them all).
MAX_FAILURES_SHOWN = 5
STAT_KEYS = ("mean", "std", "min", "p1", "median", "p99", "max")


@dataclass(frozen=True)
class ToleranceRow:
    """A varied parameter or input: nominal value and its tolerance in words."""

    name: str
    unit: str
    nominal: float
    tolerance: str


@dataclass(frozen=True)
class StatRow:
    """Distribution of one quantity over the converged samples."""

    name: str
    unit: str
    count: int
    mean: float
    std: float
    min: float
    p1: float
    median: float
    p99: float
    max: float


@dataclass(frozen=True)
class FailureRow:
    """A sample that gave no result: its index, the reason, its varied values."""

    index: int
    reason: str
    values: dict[str, float]


@dataclass(frozen=True)
class SpreadSummary:
    """Everything a tolerance report shows, as plain numbers.

    - `name`: model name; `n`: samples; `seed`; `n_devices`: devices the batch
      was spread over; `tolerances`: `ToleranceRow` per varied name.
    - `rows`: `StatRow` per quantity and per pole frequency.
    - `targets`: target descriptions; `yield_fraction` (None without targets);
      `target_yield`: fraction meeting each target.
    - `failed`: number of failed samples; `failures`: every `FailureRow`.
    - `poles`: (n_ok, r) complex poles of the converged samples (rad/s);
      `quantity_names`, `quantity_units`, `quantities` (n_ok, q);
      `dominant_hz`: the slowest pole's frequency |p| / 2 pi per converged sample.
    """

    name: str
    n: int
    seed: int
    n_devices: int
    tolerances: list[ToleranceRow]
    rows: list[StatRow]
    targets: list[str]
    yield_fraction: float | None
    target_yield: list[float]
    failed: int
    failures: list[FailureRow]
    poles: np.ndarray
    quantity_names: list[str]
    quantity_units: list[str]
    quantities: np.ndarray
    dominant_hz: np.ndarray
    notes: list[str] = field(default_factory=list)
    safety_note: str = SAFETY_NOTE


def _row_from(d: dict) -> StatRow:
    """A row of `MonteCarloResult.summary()` (statistics None when no sample converged)."""
    stats = [math.nan if d.get(k) is None else float(d[k]) for k in STAT_KEYS]
    return StatRow(str(d["name"]), str(d.get("unit", "")), int(d.get("count", 0)), *stats)


def dominant_frequency_hz(poles: np.ndarray) -> np.ndarray:
    """The smallest |p| / 2 pi of each row's finite poles (NaN for a row with none)."""
    p = np.asarray(poles, dtype=complex)
    if p.ndim != 2 or p.shape[1] == 0:
        return np.full(p.shape[0] if p.ndim else 0, np.nan)
    mag = np.where(np.isfinite(p), np.abs(p), np.inf)
    low = mag.min(axis=1)
    return np.where(np.isfinite(low), low / (2 * math.pi), np.nan)


def summarize_spread(system, result, *, notes=()) -> SpreadSummary:
    """Collect a `MonteCarloResult`'s report values.

    **Arguments:**

    - `system`: the System that was sampled (units, name).
    - `result`: the `adlin.MonteCarloResult` (its seed, nominal values and
      tolerance descriptions are reported as well).
    - `notes`: extra lines to print under the tables.

    **Returns:** a `SpreadSummary`.
    """
    names = list(result.varied_names)
    nominal = np.asarray(result.nominal, dtype=float).reshape(-1)
    described = dict(result.tolerances)
    tol_rows = [ToleranceRow(name, system.unit(name), float(nominal[k]),
                             described.get(name, "")) for k, name in enumerate(names)]
    ok = np.asarray(result.converged, dtype=bool).reshape(-1)
    poles = np.asarray(result.poles, dtype=complex)
    q_names = list(result.quantity_names)
    units = list(result.quantity_units)
    quantities = np.asarray(result.quantities)
    quantities = (np.real(quantities.reshape(len(ok), -1)[ok]).astype(float) if quantities.size
                  else np.zeros((int(ok.sum()), 0)))
    rows = [_row_from(d) for d in result.summary()]
    target_names = list(result.target_names)
    met = np.asarray(result.target_met, dtype=bool).reshape(len(ok), -1)
    target_yield = [float(met[:, j].mean()) for j in range(met.shape[1])] if len(ok) else []
    failures = [FailureRow(int(f["index"]), str(f["reason"]),
                           {k: float(v) for k, v in dict(f.get("values", {})).items()})
                for f in result.failures()]
    good_poles = poles[ok] if poles.ndim == 2 else np.zeros((0, 0), complex)
    return SpreadSummary(
        name=system.name, n=len(ok), seed=int(result.seed), n_devices=int(result.n_devices),
        tolerances=tol_rows, rows=rows, targets=target_names,
        yield_fraction=float(result.yield_fraction()) if target_names else None,
        target_yield=target_yield, failed=int((~ok).sum()), failures=failures,
        poles=good_poles, quantity_names=q_names, quantity_units=units, quantities=quantities,
        dominant_hz=dominant_frequency_hz(good_poles), notes=list(notes))


def _num(v) -> float | None:
    v = float(v)
    return v if math.isfinite(v) else None


def spread_to_dict(s: SpreadSummary) -> dict[str, Any]:
    """The tolerance report as JSON-ready data (non-finite numbers become None)."""
    return {
        "model": s.name,
        "samples": s.n,
        "seed": s.seed,
        "devices": s.n_devices,
        "tolerances": [{"name": t.name, "unit": t.unit, "nominal": _num(t.nominal),
                        "tolerance": t.tolerance} for t in s.tolerances],
        "summary": [{"name": r.name, "unit": r.unit, "count": r.count,
                     **{k: _num(getattr(r, k)) for k in STAT_KEYS}} for r in s.rows],
        "targets": [{"target": t, "yield": _num(y)}
                    for t, y in zip(s.targets, s.target_yield, strict=False)],
        "yield": None if s.yield_fraction is None else _num(s.yield_fraction),
        "failed": s.failed,
        "failures": [{"index": f.index, "reason": f.reason,
                      "values": {k: _num(v) for k, v in f.values.items()}} for f in s.failures],
        "notes": list(s.notes),
        "safety_note": s.safety_note,
    }
