"""Several steady states in a report: which exist, their class, and which one is used.

`summarize_states` matches the operating point the report is built on to
one of the states `adlin.steady_states` found, so the reader sees at once
whether the bias point is the only one, and if not, which one adlin used.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

# Columns of the watched quantities shown per state.
MAX_COLUMNS = 4


@dataclass(frozen=True)
class StateRow:
    """One steady state: class, how it was found, watched values, slowest/fastest growth."""

    index: int
    label: str
    stable: bool
    found_by: str
    values: dict[str, float]
    growth_rate: float | None
    used: bool


@dataclass(frozen=True)
class StatesSummary:
    """The states found at the report's inputs and parameters.

    - `rows`: one per state (sorted as `adlin.SteadyStates` sorts them).
    - `columns`: the quantities shown (outputs first, then unknowns), with units.
    - `used`: index of the state the report is built on.
    - `ramp_note`: how the source ramp ended.
    - `notes`: remarks from the search (e.g. why a state is unclassified).
    """

    rows: list[StateRow]
    columns: list[tuple[str, str]]
    used: int
    ramp_note: str
    notes: tuple[str, ...] = ()

    @property
    def several(self) -> bool:
        return len(self.rows) > 1

    def message(self) -> str:
        """A sentence for the reader: how many states, which one is used."""
        used = self.rows[self.used]
        if not self.several:
            return (f"only one steady state found (source ramp and deflation searched); it is "
                    f"a {used.label}.")
        n_stable = sum(r.stable for r in self.rows)
        return (f"{len(self.rows)} steady states exist at these values ({n_stable} stable); "
                f"this report uses state {used.index} ({used.label}, found by "
                f"{used.found_by}); choose another with --guess NAME=VALUE.")


def _distance(a: np.ndarray, b: np.ndarray) -> float:
    scale = np.maximum(np.maximum(np.abs(a), np.abs(b)), 1e-6)
    return float(np.max(np.abs(a - b) / scale))


def summarize_states(system, states, op) -> StatesSummary:
    """Rows for `states` (an `adlin.SteadyStates`), marking the one nearest to `op`.

    If `op` is not among them (the search missed it), it is not invented
    here: the nearest state is marked and the distance shows in the values.
    """
    names = list(system.outputs) + [u for u in system.unknowns if u not in system.outputs]
    columns = [(k, system.unit(k)) for k in names[:MAX_COLUMNS]]
    x_used = np.asarray(op.x, dtype=float)
    dists = [_distance(np.asarray(s.x, dtype=float), x_used) for s in states]
    used = int(np.argmin(dists)) if dists else 0
    rows = []
    for row in states.table():
        rows.append(StateRow(
            index=row["index"], label=row["class"], stable=row["stable"],
            found_by=row["found_by"],
            values={k: float(row["values"][k]) for k, _ in columns},
            growth_rate=row["growth_rate_rad_s"], used=row["index"] == used))
    return StatesSummary(rows=rows, columns=columns, used=used, ramp_note=states.ramp_note,
                         notes=tuple(states.notes))


def states_to_dict(s: StatesSummary) -> dict:
    return {
        "count": len(s.rows),
        "used": s.used,
        "message": s.message(),
        "ramp": s.ramp_note,
        "notes": list(s.notes),
        "states": [{"index": r.index, "class": r.label, "stable": r.stable,
                    "found_by": r.found_by, "values": r.values,
                    "growth_rate_rad_s": r.growth_rate, "used": r.used} for r in s.rows],
    }
