"""SteadyStates: several steady states of one model, with poles and classes."""

from __future__ import annotations

import equinox as eqx
import jax
import numpy as np

from .._errors import AnalysisError
from .._steady.operating_point import OperatingPoint
from .classify import is_stable, pole_counts


class SteadyStates(eqx.Module):
    """The distinct steady states found at one set of inputs and parameters.

    States are sorted by their unknowns (first unknown first, ties broken by
    the next), so the order does not depend on how they were found.

    - `states`: the `OperatingPoint`s (each polished by plain Newton on the
      undeflated model, so each is differentiable in the parameters).
    - `poles`: the finite poles of the small-signal model at each state
      (rad/s, complex, sorted by magnitude).
    - `labels`: the class of each state: ``"stable node"``, ``"stable
      focus"``, ``"saddle"``, ``"unstable node"``, ``"unstable focus"``,
      ``"marginal"``, ``"static"`` (no storage, no poles) or
      ``"unclassified"`` (no small-signal model there; see `notes`), see
      `adlin._equilibria.classify`.
    - `found_by`: how each state was found first: ``"source ramp"``,
      ``"newton from guess k"`` (plain Newton; k indexes the guesses tried,
      the user's first, then the all-zero guess), ``"deflation from guess
      k"`` or ``"deflation from state j"`` (deflated Newton restarted next to
      state j in the order found, not the sorted order).
    - `evaluations`: model residual evaluations spent by the Newton and
      deflated Newton solves (a Jacobian counts as n evaluations); the
      continuation steps of the source ramp are not counted.
    - `marginal_tol`: the tolerance the labels were made with.
    - `ramp_note`: how the source ramp ended ("reached the stop value", or
      why it stopped or was not run).
    - `notes`: remarks on single states (why one could not be classified).

    `len()`, iteration (over the operating points) and integer indexing work;
    `stable` is the subset of asymptotically stable states; `table()` gives
    plain rows for reports.
    """

    states: tuple[OperatingPoint, ...]
    poles: tuple[jax.Array, ...]
    labels: tuple[str, ...] = eqx.field(static=True)
    found_by: tuple[str, ...] = eqx.field(static=True)
    evaluations: int = eqx.field(static=True)
    marginal_tol: float = eqx.field(static=True, default=1e-6)
    ramp_note: str = eqx.field(static=True, default="not run")
    notes: tuple[str, ...] = eqx.field(static=True, default=())

    def __len__(self) -> int:
        return len(self.states)

    def __iter__(self):
        return iter(self.states)

    def __getitem__(self, index: int) -> OperatingPoint:
        if not isinstance(index, (int, np.integer)):
            raise AnalysisError(f"index SteadyStates with an integer (0 to {len(self) - 1}), "
                                f"got {index!r}; read a quantity with states[i][{index!r}].")
        if not -len(self) <= index < len(self):
            raise AnalysisError(f"state {index} does not exist: {len(self)} states were found.")
        return self.states[index]

    @property
    def x(self) -> np.ndarray:
        """The unknowns of every state, shape (len(self), n)."""
        if not self.states:
            return np.zeros((0, 0))
        return np.stack([np.asarray(op.x) for op in self.states])

    @property
    def stable_mask(self) -> tuple[bool, ...]:
        return tuple(is_stable(label) for label in self.labels)

    @property
    def stable(self) -> SteadyStates:
        """The asymptotically stable states (stable nodes and foci), same order."""
        keep = [i for i, s in enumerate(self.stable_mask) if s]
        return SteadyStates(
            states=tuple(self.states[i] for i in keep),
            poles=tuple(self.poles[i] for i in keep),
            labels=tuple(self.labels[i] for i in keep),
            found_by=tuple(self.found_by[i] for i in keep),
            evaluations=self.evaluations,
            marginal_tol=self.marginal_tol,
            ramp_note=self.ramp_note,
            notes=self.notes,
        )

    def table(self) -> list[dict]:
        """One plain row per state, for reports (no formatting here).

        Each row has ``index``, ``class``, ``stable`` (bool), ``found_by``,
        ``values`` (unknowns and outputs by name, floats), ``poles`` (complex
        list, rad/s), ``unstable_poles`` (count with positive real part),
        ``growth_rate_rad_s`` (the largest real part of a pole: negative is
        the decay rate of the slowest mode, positive the growth rate of the
        fastest unstable one; None without poles) and ``residual`` (max
        |f_i| at the state, in the equations' units).
        """
        rows = []
        for i, (op, poles, label, how) in enumerate(
            zip(self.states, self.poles, self.labels, self.found_by, strict=True)
        ):
            p = np.asarray(poles, dtype=complex)
            _, _, n_pos = pole_counts(p, self.marginal_tol)
            rows.append({
                "index": i,
                "class": label,
                "stable": is_stable(label),
                "found_by": how,
                "values": op.values(),
                "poles": [complex(v) for v in p],
                "unstable_poles": n_pos,
                "growth_rate_rad_s": float(p.real.max()) if p.size else None,
                "residual": float(op.residual_norm),
            })
        return rows

    def __repr__(self) -> str:
        kinds = ", ".join(self.labels) if self.labels else "none"
        return f"SteadyStates({len(self)} found: {kinds})"
