"""OperatingPoint: the steady state of a model, with how it was found."""

from __future__ import annotations

import equinox as eqx
import jax
import numpy as np
from jaxtyping import Array, Bool, Float, Int

from .._errors import ParameterError, did_you_mean
from .strategies.reasons import REASON_MESSAGES, STRATEGY_NAMES, describe


class OperatingPoint(eqx.Module):
    """Steady state x* with f(x*, u, p) = 0, and the solver's record.

    A pytree: it passes through jit and vmap (batched fields gain a leading
    axis), and `x` is differentiable with respect to inputs and parameters by
    the implicit function theorem.

    - `x`: unknowns (n,).  `u`: inputs.  `p`: parameters.  `y`: outputs.
    - `converged`: True when both the update and the scaled residual met the
      tolerances.  `status`: 0 converged, 1 iteration/step limit, 2 singular
      Jacobian, 3 non-finite model value, 4-7 continuation failures (see
      `message` and `adlin._steady.strategies.reasons`).
    - `iterations`: Newton iterations, plus the steps of the strategy that
      found x when it was not plain Newton.
    - `evaluations`: residual evaluations over everything tried (a Jacobian
      counts as n).
    - `residual_norm`: max |f_i| at the converged iterate, before the final
      Newton update that gives x, in the equations' units (A for nodes).
    - `strategy`: code of the strategy that produced x (see `method`; on
      failure, the first one tried).
    - `attempts`: one reason code per strategy (order of
      `adlin.strategies.STRATEGY_NAMES`), -1 where not tried, 0 where it
      converged; `attempt_evaluations`, `attempt_steps`, `attempt_progress`
      give what each cost and how far it got (see `history`).

    `op["v_out"]` reads an unknown, output, input or parameter by name.
    """

    x: Float[Array, " n"]
    u: Float[Array, " m"]
    p: Float[Array, " k"]
    y: Float[Array, " o"]
    converged: Bool[Array, ""]
    status: Int[Array, ""]
    iterations: Int[Array, ""]
    evaluations: Int[Array, ""]
    residual_norm: Float[Array, ""]
    strategy: Int[Array, ""]
    attempts: Int[Array, " s"]
    attempt_evaluations: Int[Array, " s"]
    attempt_steps: Int[Array, " s"]
    attempt_progress: Float[Array, " s"]
    unknown_names: tuple[str, ...] = eqx.field(static=True)
    input_names: tuple[str, ...] = eqx.field(static=True)
    output_names: tuple[str, ...] = eqx.field(static=True)
    param_names: tuple[str, ...] = eqx.field(static=True)

    def __getitem__(self, name: str):
        for names, values in (
            (self.unknown_names, self.x),
            (self.output_names, self.y),
            (self.input_names, self.u),
            (self.param_names, self.p),
        ):
            if name in names:
                if not isinstance(values, jax.core.Tracer):
                    return np.asarray(values)[..., names.index(name)]  # no device op
                return values[..., names.index(name)]
        valid = self.unknown_names + self.output_names + self.input_names + self.param_names
        raise ParameterError(
            f"operating point has no quantity {name!r}: {did_you_mean(name, valid)}.")

    def __contains__(self, name: str) -> bool:
        return name in (self.unknown_names + self.output_names + self.input_names
                        + self.param_names)

    @property
    def inputs(self) -> dict[str, jax.Array]:
        return {k: self[k] for k in self.input_names}

    @property
    def params(self) -> dict[str, jax.Array]:
        return {k: self[k] for k in self.param_names}

    def values(self) -> dict[str, float]:
        """Unknowns and outputs by name, as Python floats (un-batched results only)."""
        out = {k: float(v) for k, v in zip(self.unknown_names, np.asarray(self.x), strict=True)}
        out.update({k: float(v)
                    for k, v in zip(self.output_names, np.asarray(self.y), strict=True)})
        return out

    @property
    def method(self) -> str:
        """Name of the strategy that produced x ("newton", "source", ...).

        For a batch, the names in use joined by "/" (e.g. "newton/homotopy").
        """
        codes = np.unique(np.atleast_1d(np.asarray(self.strategy)))
        return "/".join(STRATEGY_NAMES[int(c)] for c in codes)

    @property
    def message(self) -> str:
        codes = np.atleast_1d(np.asarray(self.status))
        return "; ".join(sorted({REASON_MESSAGES.get(int(c), f"status {int(c)}")
                                 for c in codes}))

    @property
    def history(self) -> list[tuple[str, str, int]]:
        """What was tried, in the order of the strategy codes (un-batched results only).

        **Returns:** a list of (strategy name, outcome sentence, residual
        evaluations) for every strategy that ran.
        """
        attempts = np.asarray(self.attempts)
        if attempts.ndim != 1:
            raise ValueError("history is for one operating point; index the batch first "
                             "(jax.tree_util.tree_map(lambda a: a[i], ops)).")
        out = []
        for code, reason in enumerate(attempts.tolist()):
            if reason < 0:
                continue
            out.append((STRATEGY_NAMES[code],
                        describe(code, reason, float(np.asarray(self.attempt_progress)[code]),
                                 int(np.asarray(self.attempt_steps)[code])),
                        int(np.asarray(self.attempt_evaluations)[code])))
        return out

    @property
    def attempts_message(self) -> str:
        """One line per strategy tried: "source: step size underflow at source scale 0.37
        (412 evaluations)"."""
        return "; ".join(f"{name}: {what} ({ev} evaluations)" for name, what, ev in self.history)
