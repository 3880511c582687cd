"""Sets of targets: check them against a model, evaluate them, add their losses."""

from __future__ import annotations

import functools
from collections.abc import Sequence

import jax
import jax.numpy as jnp

from .._errors import ParameterError
from .._system import System
from .target_base import AbstractTarget, TargetResult


def as_targets(targets) -> tuple[AbstractTarget, ...]:
    """A tuple of targets from one target or a sequence of them."""
    if isinstance(targets, AbstractTarget):
        return (targets,)
    out = tuple(targets)
    for t in out:
        if not isinstance(t, AbstractTarget):
            raise ParameterError(f"targets must be adlin.targets objects (PolePair, MinDamping, "
                                 f"Bandwidth, DCGain, BiasLimit, ...), got {t!r}.")
    return out


def validate(targets: Sequence[AbstractTarget] | AbstractTarget, system: System) -> None:
    """Check every target's names against `system`.

    **Raises:** `ParameterError` naming the first target that refers to an
    output, input or quantity the model lacks, with the closest valid names.
    """
    for t in as_targets(targets):
        t.validate(system)


def evaluate(targets: Sequence[AbstractTarget] | AbstractTarget, op, model
             ) -> tuple[TargetResult, ...]:
    """Every target at one design point (pure JAX: jit, vmap and grad work).

    **Arguments:**

    - `targets`: target objects.
    - `op`: the `OperatingPoint`.
    - `model`: the `LinearModel` there (`adlin.linearize(system, op)`).

    **Returns:** one `TargetResult` (achieved, met, weighted loss) per target.
    """
    targets = as_targets(targets)
    leaves = jax.tree_util.tree_leaves((op, model))
    if any(isinstance(leaf, jax.core.Tracer) for leaf in leaves):
        return _evaluate(targets, op, model)
    # concrete values: one compiled program per target set instead of op-by-op dispatch
    return _compiled(targets)(op, model)


def _evaluate(targets, op, model):
    return tuple(t.evaluate(op, model) for t in targets)


@functools.lru_cache(maxsize=32)
def _compiled(targets: tuple[AbstractTarget, ...]):
    return jax.jit(functools.partial(_evaluate, targets))


def total_loss(targets: Sequence[AbstractTarget] | AbstractTarget, op, model):
    """Sum of the weighted losses: zero when every target is met exactly."""
    return sum((t.weight * t.loss(op, model) for t in as_targets(targets)), jnp.asarray(0.0))
