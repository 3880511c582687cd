"""Transient: the waveforms of a nonlinear simulation, with how they were found."""

from __future__ import annotations

import equinox as eqx
import jax
import numpy as np
from jaxtyping import Array, Float, Int

from .._errors import ParameterError, did_you_mean

# status codes
SUCCESS = 0
STEP_BUDGET = 1
FAILED = 2

STATUS_MESSAGES = {
    SUCCESS: "reached the end time",
    STEP_BUDGET: "the step budget (max_steps) ran out before the end time",
    FAILED: "the integrator stopped before the end time",
}


class Transient(eqx.Module):
    """Waveforms of a nonlinear transient on an output grid.

    A pytree: it passes through jit and vmap.

    - `t`: output times (s), shape (k,).
    - `x`: unknowns (k, n).  `y`: outputs (k, o).  `u`: inputs (k, m), absolute
      (operating-point value plus the stimulus deviation).  At an edge time the
      values are those just after the edge.
    - `status`: 0 reached `t_end`, 1 step budget exhausted, 2 other failure
      (see `message`).  Samples after `reached` are NaN when the run stopped early.
    - `reached`: the last output time with a valid sample (s).
    - `steps`, `accepted_steps`, `rejected_steps`: integrator step counts.
    - `max_steps`: the step budget used.
    - names of unknowns, inputs, outputs; `n_dynamic`: number of ODE states
      (the rest are algebraic unknowns solved inside the vector field).

    `transient["v_out"]` gives the column of an output, unknown or input by name.
    """

    t: Float[Array, " k"]
    x: Float[Array, "k n"]
    y: Float[Array, "k o"]
    u: Float[Array, "k m"]
    status: Int[Array, ""]
    reached: Float[Array, ""]
    steps: Int[Array, ""]
    accepted_steps: Int[Array, ""]
    rejected_steps: Int[Array, ""]
    max_steps: int = eqx.field(static=True)
    unknown_names: tuple[str, ...] = eqx.field(static=True)
    input_names: tuple[str, ...] = eqx.field(static=True)
    output_names: tuple[str, ...] = eqx.field(static=True)
    n_dynamic: int = eqx.field(static=True)

    @property
    def succeeded(self):
        return self.status == SUCCESS

    @property
    def message(self) -> str:
        """One sentence on how the run ended (needs concrete values)."""
        code = int(np.asarray(self.status))
        text = STATUS_MESSAGES.get(code, f"unknown status {code}")
        if code == SUCCESS:
            return (f"{text} in {int(self.steps)} steps ({int(self.rejected_steps)} rejected).")
        return (f"{text}: valid up to t = {float(self.reached):.6g} s after {int(self.steps)} "
                f"steps ({int(self.rejected_steps)} rejected, budget {self.max_steps}).")

    @property
    def stats(self) -> dict[str, int]:
        """Integrator statistics as plain ints (needs concrete values)."""
        return {"steps": int(self.steps), "accepted_steps": int(self.accepted_steps),
                "rejected_steps": int(self.rejected_steps), "max_steps": self.max_steps,
                "ode_states": self.n_dynamic,
                "algebraic_unknowns": len(self.unknown_names) - self.n_dynamic}

    def __getitem__(self, name: str) -> jax.Array:
        if name in self.output_names:
            return self.y[..., self.output_names.index(name)]
        if name in self.unknown_names:
            return self.x[..., self.unknown_names.index(name)]
        if name in self.input_names:
            return self.u[..., self.input_names.index(name)]
        valid = self.output_names + tuple(n for n in self.unknown_names
                                          if n not in self.output_names) + self.input_names
        raise ParameterError(f"no waveform named {name!r} in this transient: "
                             f"{did_you_mean(name, valid)}.")
