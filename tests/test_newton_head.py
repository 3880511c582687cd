"""Newton's first iterations as a scan (`newton_solve(head_steps=...)`, used by
the batch engine's fast path).

Reference: the diode-resistor operating point from the Lambert W closed form
(Banwell & Jayakumar, Electronics Letters 36(4), 2000), via `closed_forms`.
"""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np
import pytest
from closed_forms import diode_resistor, diode_resistor_exact

import adlin
from adlin._steady.newton import MAX_ITERATIONS, SUCCESS, newton_solve


def _solve(system, v_s, x0, head_steps, active=True):
    cs = adlin.compile(system)
    u = jnp.asarray([v_s])
    p = system.param_vector()
    return newton_solve(lambda x: system.f(x, u, p), x0, cs.junctions, cs.options,
                        active=active, head_steps=head_steps)


@pytest.mark.parametrize("v_s", [0.8, 5.0, 40.0])
def test_scan_head_reaches_the_closed_form_like_the_loop(v_s):
    """From 0 V (the junction limiting and the line search matter at 40 V) and
    from 0.6 V, with and without the head: the same point, the closed form's."""
    system = diode_resistor(v_s)
    exact = diode_resistor_exact(v_s, 1e3, 1e-14)
    for x0 in (0.0, 0.6):
        loop = _solve(system, v_s, jnp.asarray([x0]), 0)
        head = jax.jit(lambda x: _solve(system, v_s, x, 3))(jnp.asarray([x0]))
        assert int(head.status) == SUCCESS == int(loop.status)
        np.testing.assert_allclose(float(head.x[0]), exact, rtol=1e-9)
        np.testing.assert_allclose(float(head.x[0]), float(loop.x[0]), rtol=1e-12)
        # the scan's iterations count like the loop's
        assert int(head.iterations) <= int(loop.iterations) + 3


def test_inactive_lanes_take_no_step_with_a_head():
    system = diode_resistor(5.0)
    exact = diode_resistor_exact(5.0, 1e3, 1e-14)
    x0 = jnp.asarray([[exact], [0.0]])  # the first starts on the solution
    out = jax.vmap(lambda x: _solve(system, 5.0, x, 3, active=False))(x0)
    np.testing.assert_array_equal(np.asarray(out.status), [MAX_ITERATIONS] * 2)
    np.testing.assert_array_equal(np.asarray(out.iterations), [0, 0])
    np.testing.assert_array_equal(np.asarray(out.x), np.asarray(x0))
