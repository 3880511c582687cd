"""SizingResult: what `adlin.size` found, how it got there, and which targets hold."""

from __future__ import annotations

import equinox as eqx
import numpy as np
from jaxtyping import Array, Bool, Complex, Float, Int

from .target_base import TargetResult


class SizingResult(eqx.Module):
    """The outcome of `adlin.size`.

    - `free_names`: the sized parameters, in the order of every array below.
    - `values`: the best design (SI units), shape (k,).
    - `low`, `high`: the bounds searched, (k,).
    - `start_values`: where each start began, (s, k); start 0 is the nominal
      design clipped into the bounds, the others are drawn log-uniformly.
    - `final_losses`: the total target loss each start ended at, (s,)
      (inf for a start whose steady state was never found).
    - `best`: index of the start that gave `values`.
    - `loss_history`: loss at the start point and after every optimizer
      iteration, per start, (s, m), padded with each start's last value;
      `history_length` (s,) says how many entries are real.
    - `value_history`: the best start's parameter values per iteration (m, k),
      padded like `loss_history`.
    - `pole_history`: the best start's finite poles (rad/s) per iteration
      (m, r), padded the same way; for the pole-movement figure.
    - `targets`: one `TargetResult` per target at `values`; `met` whether all
      of them hold.
    - `series`: the preferred-number series rounded to ("E12", "E24", "E96")
      or None; then `rounded_values` (k,), `rounded_targets` and
      `rounded_met` give the design after rounding, re-checked (rounding may
      break a tight target: read `rounded_met`).
    - `evaluations`: loss-and-gradient evaluations over all starts;
      `failed_evaluations`: those at which the steady state was not found
      (the optimizer saw a steep bowl there and backed off).
    - `message`: the optimizer's stop reason for the best start;
      `start_messages` the reason of every start.
    """

    free_names: tuple[str, ...] = eqx.field(static=True)
    values: Float[Array, " k"]
    low: Float[Array, " k"]
    high: Float[Array, " k"]
    start_values: Float[Array, "s k"]
    final_losses: Float[Array, " s"]
    best: int = eqx.field(static=True)
    loss_history: Float[Array, "s m"]
    history_length: Int[Array, " s"]
    value_history: Float[Array, "m k"]
    pole_history: Complex[Array, "m r"]
    targets: tuple[TargetResult, ...]
    met: Bool[Array, ""]
    series: str | None = eqx.field(static=True)
    rounded_values: Float[Array, " k"] | None
    rounded_targets: tuple[TargetResult, ...] | None
    rounded_met: Bool[Array, ""] | None
    evaluations: int = eqx.field(static=True)
    failed_evaluations: int = eqx.field(static=True)
    message: str = eqx.field(static=True)
    start_messages: tuple[str, ...] = eqx.field(static=True)

    @property
    def loss(self) -> float:
        """The best start's final total loss."""
        return float(np.asarray(self.final_losses)[self.best])

    def as_dict(self) -> dict[str, float]:
        """The design by parameter name: the rounded values when rounded, else the best."""
        vals = self.values if self.rounded_values is None else self.rounded_values
        return {k: float(v) for k, v in zip(self.free_names, np.asarray(vals), strict=True)}

    def table(self) -> list[dict]:
        """One row per target: description, achieved value (text), met; after rounding
        also `rounded_achieved_text` and `rounded_met`.  Concrete results only."""
        rows = []
        for i, t in enumerate(self.targets):
            r = t.row()
            row = {"target": r["target"], "achieved": r["achieved"],
                   "achieved_text": r["achieved_text"], "met": r["met"], "loss": r["loss"]}
            if self.rounded_targets is not None:
                rr = self.rounded_targets[i].row()
                row.update(rounded_achieved=rr["achieved"],
                           rounded_achieved_text=rr["achieved_text"], rounded_met=rr["met"])
            rows.append(row)
        return rows

    def __repr__(self) -> str:
        vals = ", ".join(f"{k}={v:.4g}" for k, v in self.as_dict().items())
        state = "met" if bool(self.met) else "not met"
        if self.rounded_met is not None:
            state += f" ({self.series}: {'met' if bool(self.rounded_met) else 'not met'})"
        return (f"SizingResult({vals}; targets {state}; loss {self.loss:.3g}; "
                f"{self.evaluations} evaluations)")
