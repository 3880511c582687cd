"""Precision policy.

adlin works in float64 throughout: bias points of exponential devices and
pole locations spread over many decades lose their meaning in float32.
Importing adlin therefore switches JAX's global ``jax_enable_x64`` flag on,
once, at import time, before adlin creates any array.  This is a process-wide
JAX setting: code that imports adlin and also uses JAX elsewhere gets float64
defaults there too (``jnp.ones(3).dtype == float64``).  Set the environment
variable ``ADLIN_NO_X64=1`` before importing adlin to leave the flag alone; adlin
then refuses to run its solvers in float32 and says so (see ``require_x64``).

Importing adlin also adds ``--xla_cpu_enable_concurrency_optimized_scheduler=false``
to ``XLA_FLAGS`` unless that flag is already there.  With jaxlib 0.10.2 on CPU,
two independent batched LAPACK calls (say an LU solve and a singular value
decomposition inside one ``jit(vmap(...))``) that run at the same time can
deadlock the two-thread intra-op pool (see DEVELOPERS.md); XLA's other
scheduler kept such programs running in our tests, at no measurable cost.  It
takes effect only if JAX has not created its CPU backend yet (no array made
before ``import adlin``); set the flag to ``true`` yourself to keep XLA's default.
"""

from __future__ import annotations

import os

import jax

from ._errors import AdlinError

if os.environ.get("ADLIN_NO_X64", "") not in ("1", "true", "yes"):
    jax.config.update("jax_enable_x64", True)

_SCHEDULER_FLAG = "xla_cpu_enable_concurrency_optimized_scheduler"
if _SCHEDULER_FLAG not in os.environ.get("XLA_FLAGS", ""):
    os.environ["XLA_FLAGS"] = f"{os.environ.get('XLA_FLAGS', '')} --{_SCHEDULER_FLAG}=false".strip()


def require_x64() -> None:
    """Raise if float64 is off, rather than computing silently in float32."""
    if not jax.config.jax_enable_x64:
        raise AdlinError(
            "adlin needs float64 but jax_enable_x64 is off; unset ADLIN_NO_X64 or call "
            "jax.config.update('jax_enable_x64', True) before using adlin."
        )
