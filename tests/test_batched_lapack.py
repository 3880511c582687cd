"""Batched programs with independent LAPACK calls run to the end (no deadlock).

With jaxlib 0.10.2 on CPU, a vmapped Schur reduction (an LU solve and a
singular value decomposition that do not depend on each other) hung within
two executions on a two-core machine; `adlin._config` sets an XLA scheduler
flag against it (DEVELOPERS.md, "Hang of batched linear algebra").  The
program runs in a child process with a time limit, so a hang fails the test
instead of stopping the suite.
"""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap

import pytest

SCRIPT = textwrap.dedent(
    """
    import jax, jax.numpy as jnp
    import adlin
    from adlin._linear.reduce import reduce_descriptor
    B, n, r = 4000, 15, 8
    E = jax.random.normal(jax.random.PRNGKey(0), (B, n, n)).at[:, r:, :].set(0).at[:, :, r:].set(0)
    A = jax.random.normal(jax.random.PRNGKey(1), (B, n, n))
    Bm, C, D = jnp.zeros((B, n, 2)), jnp.zeros((B, 1, n)), jnp.zeros((B, 1, 2))
    f = jax.jit(jax.vmap(lambda E, A, Bm, C, D: reduce_descriptor(E, A, Bm, C, D, jnp.eye(n),
                                                                 jnp.eye(n), r)))
    for _ in range(10):
        jax.block_until_ready(f(E, A, Bm, C, D))
    print("finished")
    """
)


@pytest.mark.slow
def test_vmapped_reduction_with_independent_lapack_calls_finishes():
    env = {k: v for k, v in os.environ.items() if k != "XLA_FLAGS"}
    try:
        out = subprocess.run([sys.executable, "-c", SCRIPT], env=env, capture_output=True,
                             text=True, timeout=240)
    except subprocess.TimeoutExpired:
        pytest.fail("the batched reduction hung (independent batched LAPACK calls deadlocked)")
    assert out.returncode == 0, out.stderr[-2000:]
    assert "finished" in out.stdout
