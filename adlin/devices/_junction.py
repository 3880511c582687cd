"""Building blocks of pn-junction laws: the limited exponential and the depletion charge."""

from __future__ import annotations

import math

import jax
import jax.numpy as jnp
from jax import Array
from jax.typing import ArrayLike

#: Argument above which `limited_exp` continues linearly instead of exponentially.
EXP_LIMIT = 80.0
_EXP_AT_LIMIT = math.exp(EXP_LIMIT)


def limited_exp(x: ArrayLike) -> Array:
    """``exp(x)`` for ``x <= 80``, continued by its tangent line above.

    ``limited_exp(x) = exp(80) * (1 + (x - 80))`` for ``x > 80``. Value and
    slope match at the joint, so the function is continuously differentiable
    and its derivative is positive and continuous everywhere.

    Why: a Newton iteration on a circuit may step a junction to several volts
    (``v / V_T`` in the hundreds) before it converges. The plain exponential
    overflows float64 at ``x ~ 709.8`` (about 18 V across an ideal junction),
    after which currents, Jacobians and residual norms become ``inf``/``nan``
    and the solver cannot recover. With the tangent continuation a junction at
    10 V or 100 V still yields finite currents and derivatives that point
    Newton back towards the physical region. The threshold 80 (about 2.07 V
    for an ideal junction at 300 K) lies far above any physical operating
    point, so the exact law is used wherever a real device can operate, while
    ``exp(80) ~ 5.5e34`` leaves more than 200 decades of headroom, so products
    of currents and derivatives (squared residuals, ``J^T J``) stay finite too.
    The same safeguard is the ``limexp`` operator of the Verilog-AMS Language
    Reference Manual (Accellera, v2.4, 2014; from memory) and a standard step
    of device evaluation in circuit simulation (McCalla, Fundamentals of
    Computer-Aided Circuit Simulation, Kluwer, 1988, ch. 3; from memory).

    **Arguments:**

    - `x`: exponent (dimensionless); may be traced.

    **Returns:**

    ``exp(x)`` below the threshold, its linear continuation above, same shape as `x`.
    """
    x = jnp.asarray(x)
    above = x > EXP_LIMIT
    # Feed the exponential a clipped argument so neither branch overflows: the
    # gradient of the unused branch of `where` must stay finite, or it poisons
    # the gradient of the used one (0 * inf = nan).
    x_safe = jnp.where(above, EXP_LIMIT, x)
    return jnp.where(above, _EXP_AT_LIMIT * (1.0 + (x - EXP_LIMIT)), jnp.exp(x_safe))


@jax.custom_jvp
def limited_expm1(x: ArrayLike) -> Array:
    """``limited_exp(x) - 1``, accurate near ``x = 0`` (``expm1`` below the threshold).

    A junction current ``I_S (exp(x) - 1)`` computed as ``exp(x) - 1`` loses
    all its digits for ``|x| << 1`` and in reverse bias below ``exp(x) ~ 1e-16``;
    ``expm1`` keeps full relative accuracy there. Above ``x = 80`` it
    continues linearly exactly like `limited_exp`. Its derivative is that of
    `limited_exp`, evaluated so that it keeps full relative accuracy in deep
    reverse bias too.

    **Arguments:**

    - `x`: exponent (dimensionless); may be traced.

    **Returns:**

    ``expm1(x)`` below the threshold, ``limited_exp(x) - 1`` above, same shape as `x`.
    """
    x = jnp.asarray(x)
    above = x > EXP_LIMIT
    x_safe = jnp.where(above, EXP_LIMIT, x)
    return jnp.where(above, _EXP_AT_LIMIT * (1.0 + (x - EXP_LIMIT)) - 1.0, jnp.expm1(x_safe))


@limited_expm1.defjvp
def _limited_expm1_jvp(primals, tangents):
    # JAX differentiates expm1 as expm1(x) + 1, which rounds to 0 below
    # x ~ -37: a reverse-biased junction would lose its (tiny but exact)
    # conductance. The derivative of limited_exp is exp(min(x, 80)) exactly.
    (x,), (dx,) = primals, tangents
    x = jnp.asarray(x)
    slope = jnp.exp(jnp.where(x > EXP_LIMIT, EXP_LIMIT, x))
    return limited_expm1(x), slope * dx


def depletion_charge(
    v: ArrayLike,
    *,
    zero_bias_capacitance: ArrayLike,
    built_in_potential: ArrayLike,
    grading_coefficient: ArrayLike,
    forward_fraction: ArrayLike,
) -> Array:
    """Charge stored in the depletion layer of a pn junction at forward voltage `v`.

    Below ``v_f = forward_fraction * built_in_potential`` the charge is the
    integral of the graded-junction capacitance
    ``C(v) = C_j0 / (1 - v/V_j)**m``:

        Q(v) = C_j0 V_j / (1 - m) * (1 - (1 - v/V_j)**(1 - m)).

    ``C(v)`` diverges at ``v = V_j``, where the depletion approximation fails
    anyway, so above ``v_f`` the capacitance is continued by its tangent line
    in ``v``,

        C(v) = C_j0 / (1 - F)**(1 + m) * (1 - F (1 + m) + m v / V_j),

    and the charge by its integral. Charge and capacitance are continuous at
    ``v_f`` (the charge is C1), and the charge stays finite (quadratic) for any
    forward voltage. Massobrio & Antognetti, Semiconductor Device Modeling,
    2nd ed., McGraw-Hill, 1993, ch. 1 (junction capacitance with the
    forward-bias linearisation coefficient; from memory); Gray, Hurst, Lewis &
    Meyer, Analysis and Design of Analog Integrated Circuits, 5th ed., 2009,
    sec. 1.2 (depletion capacitance of a graded junction; from memory).

    **Arguments:**

    - `v`: junction voltage, anode (p side) minus cathode (n side), in volts.
    - `zero_bias_capacitance`: ``C_j0``, capacitance at ``v = 0`` in farads.
    - `built_in_potential`: ``V_j`` in volts (> 0).
    - `grading_coefficient`: ``m``, 1/2 for an abrupt and 1/3 for a linearly
      graded junction; must satisfy ``0 <= m < 1``.
    - `forward_fraction`: ``F``, fraction of ``V_j`` above which the
      capacitance is linearised; ``0 <= F < 1``.

    **Returns:**

    The depletion charge in coulombs (zero at ``v = 0``), same shape as `v`.
    """
    v = jnp.asarray(v)
    c0, vj, m, f = (
        zero_bias_capacitance,
        built_in_potential,
        grading_coefficient,
        forward_fraction,
    )
    v_edge = f * vj
    below = v < v_edge
    # Only evaluate the power law where it is defined, so that its gradient in
    # the unused branch is finite (see `limited_exp`).
    v_low = jnp.where(below, v, v_edge)
    q_low = c0 * vj / (1.0 - m) * (1.0 - (1.0 - v_low / vj) ** (1.0 - m))
    q_edge = c0 * vj / (1.0 - m) * (1.0 - (1.0 - f) ** (1.0 - m))
    q_high = q_edge + c0 / (1.0 - f) ** (1.0 + m) * (
        (1.0 - f * (1.0 + m)) * (v - v_edge) + m / (2.0 * vj) * (v**2 - v_edge**2)
    )
    return jnp.where(below, q_low, q_high)
