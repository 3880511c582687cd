"""OperatingPoint: the steady state of a model, with how it was found."""

from __future__ import annotations

import equinox as eqx
import jax
import numpy as np
from jaxtyping import Array, Bool, Float, Int

from .._errors import ParameterError, did_you_mean
from .newton import STATUS_MESSAGES


class OperatingPoint(eqx.Module):
    """Steady state x* with f(x*, u, p) = 0, and the solver's record.

    A pytree: it passes through jit and vmap (batched fields gain a leading
    axis), and `x` is differentiable with respect to inputs and parameters by
    the implicit function theorem.

    - `x`: unknowns (n,).  `u`: inputs.  `p`: parameters.  `y`: outputs.
    - `converged`: True when both the update and the scaled residual met the
      tolerances.  `status`: 0 converged, 1 iteration limit, 2 singular
      Jacobian, 3 non-finite model value (see `message`).
    - `iterations`, `evaluations`: Newton iterations and residual evaluations.
    - `residual_norm`: max |f_i| at the converged iterate, before the final
      Newton update that gives x, in the equations' units (A for nodes).
    - `method`: the strategy that produced x.

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
    unknown_names: tuple[str, ...] = eqx.field(static=True)
    input_names: tuple[str, ...] = eqx.field(static=True)
    output_names: tuple[str, ...] = eqx.field(static=True)
    param_names: tuple[str, ...] = eqx.field(static=True)
    method: str = eqx.field(static=True, default="newton")

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
        raise ParameterError(f"operating point has no quantity {name!r}: {did_you_mean(name, valid)}.")

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
        out.update({k: float(v) for k, v in zip(self.output_names, np.asarray(self.y), strict=True)})
        return out

    @property
    def message(self) -> str:
        codes = np.atleast_1d(np.asarray(self.status))
        return "; ".join(sorted({STATUS_MESSAGES[int(c)] for c in codes}))
