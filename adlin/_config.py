"""Precision policy.

adlin works in float64 throughout: bias points of exponential devices and
pole locations spread over many decades lose their meaning in float32.
Importing adlin therefore switches JAX's global ``jax_enable_x64`` flag on,
once, at import time, before adlin creates any array.  This is a process-wide
JAX setting: code that imports adlin and also uses JAX elsewhere gets float64
defaults there too (``jnp.ones(3).dtype == float64``).  Set the environment
variable ``ADLIN_NO_X64=1`` before importing adlin to leave the flag alone; adlin
then refuses to run its solvers in float32 and says so (see ``require_x64``).
"""

from __future__ import annotations

import os

import jax

from ._errors import AdlinError

if os.environ.get("ADLIN_NO_X64", "") not in ("1", "true", "yes"):
    jax.config.update("jax_enable_x64", True)


def require_x64() -> None:
    """Raise if float64 is off, rather than computing silently in float32."""
    if not jax.config.jax_enable_x64:
        raise AdlinError(
            "adlin needs float64 but jax_enable_x64 is off; unset ADLIN_NO_X64 or call "
            "jax.config.update('jax_enable_x64', True) before using adlin."
        )
