"""The steady-state problem a strategy searches, and the candidate it returns."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, replace

import equinox as eqx
import jax
import jax.numpy as jnp
import numpy as np
from jaxtyping import Array, Bool, Float, Int

from ..newton import JunctionTable, NewtonOptions
from .reasons import N_STRATEGIES, NOT_TRIED


@dataclass(frozen=True, eq=False)
class Problem:
    """f(x, u, p) = 0 for one set of (u, p), with what the strategies need to know.

    Built inside the traced solve, so `u` and `p` may be tracers; the solve
    passes them through `stop_gradient` (derivatives come from the implicit
    function theorem at the end, never from the search path).

    - `f`: the model's static part, f(x, u, p) on vectors.
    - `q`: the model's storage part, q(x, p) on vectors.
    - `u`, `p`: inputs and parameters (vectors).
    - `node_mask`: unknowns that are node voltages (conductance stepping).
    - `input_names`, `param_names`: names, for source selection.
    - `junctions`: pn junctions for Newton step limiting.
    - `options`: the Newton settings (tolerances; the final polish uses them).
    """

    f: Callable
    q: Callable
    u: jax.Array
    p: jax.Array
    node_mask: np.ndarray
    input_names: tuple[str, ...]
    param_names: tuple[str, ...]
    junctions: JunctionTable
    options: NewtonOptions

    @property
    def n(self) -> int:
        return int(self.node_mask.shape[0])

    def residual(self, x):
        return self.f(x, self.u, self.p)

    def corrector_options(self, max_iterations: int, rtol: float = 1e-6) -> NewtonOptions:
        """Newton settings for an intermediate point of a path: looser, fewer iterations.

        Points along a path only have to be close enough for the next step;
        the final polish applies the user's tolerances.
        """
        o = self.options
        return replace(o, rtol=max(o.rtol, rtol), max_iterations=max_iterations)


class Candidate(eqx.Module):
    """What a search returns: a point, why it stopped, and what it cost.

    - `x`: the end point (on success, a point where the search's own
      convergence test passed; it is then polished by Newton).
    - `reason`: a code from `reasons` (0 = the search believes it converged).
    - `evaluations`: residual evaluations (a Jacobian counts as n).
    - `steps`: steps (continuation) or iterations (Newton) taken.
    - `progress`: how far along its path it got (quoted in messages).
    - `code`: the strategy that produced `x` (a code from `reasons`).
    - `polished`: True when `x` already passed the Newton test and `jacobian`
      is df/dx there, so no polish is needed.
    - `attempts`, `attempt_evaluations`, `attempt_steps`, `attempt_progress`:
      one slot per strategy code, -1 / 0 for strategies not tried.
    """

    x: Float[Array, " n"]
    reason: Int[Array, ""]
    evaluations: Int[Array, ""]
    steps: Int[Array, ""]
    progress: Float[Array, ""]
    code: Int[Array, ""]
    polished: Bool[Array, ""]
    jacobian: Float[Array, "n n"]
    attempts: Int[Array, " s"]
    attempt_evaluations: Int[Array, " s"]
    attempt_steps: Int[Array, " s"]
    attempt_progress: Float[Array, " s"]


def single_attempt(code: int, x, reason, evaluations, steps, progress, *, polished=False,
                   jacobian=None, active=True) -> Candidate:
    """A Candidate for one strategy, its record filled in its own slot only.

    With `active` False (a lane already solved earlier in a chain) the slot
    stays "not tried".
    """
    n = x.shape[0]
    slot = jnp.arange(N_STRATEGIES) == code
    reason = jnp.asarray(reason)
    evaluations = jnp.asarray(evaluations)
    steps = jnp.asarray(steps)
    progress = jnp.asarray(progress, dtype=x.dtype)
    tried = slot & active
    return Candidate(
        x=x,
        reason=reason,
        evaluations=evaluations,
        steps=steps,
        progress=progress,
        code=jnp.asarray(code),
        polished=jnp.asarray(polished) & (reason == 0),
        jacobian=jnp.zeros((n, n), x.dtype) if jacobian is None else jacobian,
        attempts=jnp.where(tried, reason, NOT_TRIED),
        attempt_evaluations=jnp.where(tried, evaluations, 0),
        attempt_steps=jnp.where(tried, steps, 0),
        attempt_progress=jnp.where(tried, progress, 0.0),
    )
