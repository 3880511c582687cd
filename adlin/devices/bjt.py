"""Bipolar junction transistor: transport-form Ebers-Moll law with Early effect."""

from __future__ import annotations

import math

from jax import Array
from jax.typing import ArrayLike

from ._junction import depletion_charge, limited_exp, limited_expm1
from ._polarity import check_polarity
from ._thermal import DEFAULT_TEMPERATURE, thermal_voltage


def _junction_exponentials(v_be, v_bc, emission_coefficient, temperature):
    # Exponent arguments v/(n V_T) of both junctions of the n-type device.
    nvt = emission_coefficient * thermal_voltage(temperature)
    return v_be / nvt, v_bc / nvt


def bjt_currents(
    v_c: ArrayLike,
    v_b: ArrayLike,
    v_e: ArrayLike,
    *,
    polarity: int = 1,
    saturation_current: ArrayLike = 1e-16,
    forward_beta: ArrayLike = 100.0,
    reverse_beta: ArrayLike = 1.0,
    early_voltage: ArrayLike = math.inf,
    emission_coefficient: ArrayLike = 1.0,
    temperature: ArrayLike = DEFAULT_TEMPERATURE,
) -> tuple[Array, Array, Array]:
    """Terminal currents of a bipolar transistor (transport-form Ebers-Moll law).

    For the npn device, with ``V_T = k T / q`` and ``n`` the emission coefficient,

        I_CC = I_S (exp(v_be / (n V_T)) - 1)        (forward transport)
        I_EC = I_S (exp(v_bc / (n V_T)) - 1)        (reverse transport)
        I_T  = (I_CC - I_EC) * (1 - v_bc / V_A)     (transport current, Early effect)
        i_c  = I_T - I_EC / beta_R
        i_b  = I_CC / beta_F + I_EC / beta_R
        i_e  = -(i_c + i_b).

    Early effect: the transport current is scaled by ``1 - v_bc / V_A``, the
    base-width modulation of the base-collector depletion layer as it appears
    in the transport (Gummel-Poon) form. In forward-active operation
    ``1 - v_bc/V_A = 1 + (v_ce - v_be)/V_A``, i.e. the textbook factor
    ``1 + v_ce/V_A`` (Sedra & Smith) with the Early voltage measured from
    ``v_ce = v_be`` instead of from ``v_ce = 0``; the two differ by
    ``v_be / V_A`` relative (0.7 % at ``V_A = 100 V``). The default
    ``early_voltage = inf`` switches the effect off. Junction exponentials
    use `limited_exp` (and ``expm1`` for ``exp - 1``), so currents and
    derivatives stay finite at any bias and accurate near zero bias.
    A pnp device (``polarity=-1``) is the npn law applied to the negated
    voltages, with negated currents; give its parameters as positive numbers.

    Ebers & Moll, "Large-signal behavior of junction transistors", Proc. IRE
    42(12), 1954; Early, "Effects of space-charge layer widening in junction
    transistors", Proc. IRE 40(11), 1952; Gummel & Poon, "An integral charge
    control model of bipolar transistors", Bell System Technical Journal 49,
    1970 (the ``1 - v_bc/V_A`` normalisation); Gray, Hurst, Lewis & Meyer,
    Analysis and Design of Analog Integrated Circuits, 5th ed., 2009, sec. 1.3
    (large-signal bipolar models, Early effect, Ebers-Moll; from memory).

    **Arguments:**

    - `v_c`, `v_b`, `v_e`: collector, base and emitter potentials in volts.
    - `polarity`: +1 for npn, -1 for pnp.
    - `saturation_current`: transport saturation current ``I_S`` in amperes.
    - `forward_beta`: ideal maximum forward current gain ``beta_F``.
    - `reverse_beta`: ideal maximum reverse current gain ``beta_R``.
    - `early_voltage`: forward Early voltage ``V_A`` in volts (> 0; ``inf``
      for none).
    - `emission_coefficient`: ideality factor ``n`` of both junctions.
    - `temperature`: device temperature in kelvin (default 300.15 K = 27 degC).

    **Returns:**

    ``(i_c, i_b, i_e)``: the currents in amperes flowing INTO the device at
    the collector, base and emitter. ``i_e`` is formed as ``-(i_c + i_b)``, so
    ``(i_c + i_b) + i_e == 0`` exactly in eager evaluation; inside a larger
    compiled program XLA may fuse and contract the arithmetic, and the sum is
    then zero to a few units in the last place of the largest current.
    """
    p = check_polarity(polarity)
    v_be = p * (v_b - v_e)
    v_bc = p * (v_b - v_c)
    x_be, x_bc = _junction_exponentials(v_be, v_bc, emission_coefficient, temperature)
    i_cc = saturation_current * limited_expm1(x_be)
    i_ec = saturation_current * limited_expm1(x_bc)
    # I_CC - I_EC formed from the exponentials, not from the two currents: in
    # cutoff both are ~ -I_S and their difference would cancel to zero.
    i_t = saturation_current * (limited_exp(x_be) - limited_exp(x_bc))
    i_t = i_t * (1.0 - v_bc / early_voltage)
    i_c = p * (i_t - i_ec / reverse_beta)
    i_b = p * (i_cc / forward_beta + i_ec / reverse_beta)
    return i_c, i_b, -(i_c + i_b)


def bjt_charges(
    v_c: ArrayLike,
    v_b: ArrayLike,
    v_e: ArrayLike,
    *,
    polarity: int = 1,
    saturation_current: ArrayLike = 1e-16,
    emission_coefficient: ArrayLike = 1.0,
    temperature: ArrayLike = DEFAULT_TEMPERATURE,
    base_emitter_capacitance: ArrayLike = 0.0,
    base_collector_capacitance: ArrayLike = 0.0,
    forward_transit_time: ArrayLike = 0.0,
    reverse_transit_time: ArrayLike = 0.0,
    built_in_potential: ArrayLike = 0.75,
    grading_coefficient: ArrayLike = 0.33,
    forward_fraction: ArrayLike = 0.5,
) -> tuple[Array, Array, Array]:
    """Charges stored in a bipolar transistor (charge-control form of Ebers-Moll).

    For the npn device each junction stores a depletion charge and a
    diffusion charge proportional to its transport current:

        Q_BE = Q_dep(v_be; C_je) + tau_F * I_CC
        Q_BC = Q_dep(v_bc; C_jc) + tau_R * I_EC
        q_c = -Q_BC,   q_b = Q_BE + Q_BC,   q_e = -Q_BE,

    with ``I_CC``, ``I_EC`` the transport currents of `bjt_currents` (without
    the Early factor) and ``Q_dep`` the graded-junction depletion charge,
    linearised above ``forward_fraction * built_in_potential`` (see
    `adlin.devices._junction.depletion_charge`). Both junctions share the
    built-in potential and grading coefficient. ``-dq_e/dv_be`` is the
    small-signal ``C_pi`` and ``-dq_c/dv_bc`` is ``C_mu``. A pnp device
    (``polarity=-1``) negates voltages and charges.

    Ebers & Moll, Proc. IRE 42(12), 1954 (charge-control extension as in
    Gummel & Poon, Bell System Technical Journal 49, 1970); Gray, Hurst,
    Lewis & Meyer, Analysis and Design of Analog Integrated Circuits, 5th ed.,
    2009, sec. 1.2 (depletion capacitance) and sec. 1.4 (base charging
    capacitance ``tau_F g_m``; from memory).

    **Arguments:**

    - `v_c`, `v_b`, `v_e`: collector, base and emitter potentials in volts.
    - `polarity`: +1 for npn, -1 for pnp.
    - `saturation_current`, `emission_coefficient`, `temperature`: as for
      `bjt_currents` (they set the diffusion charges).
    - `base_emitter_capacitance`: zero-bias base-emitter depletion
      capacitance ``C_je`` in farads.
    - `base_collector_capacitance`: zero-bias base-collector depletion
      capacitance ``C_jc`` in farads.
    - `forward_transit_time`: ``tau_F`` in seconds.
    - `reverse_transit_time`: ``tau_R`` in seconds.
    - `built_in_potential`: junction built-in potential in volts (> 0).
    - `grading_coefficient`: junction grading exponent, ``0 <= m < 1``.
    - `forward_fraction`: fraction of the built-in potential above which the
      depletion capacitance is linearised, ``0 <= F < 1``.

    **Returns:**

    ``(q_c, q_b, q_e)``: the charges in coulombs stored at the collector,
    base and emitter; they sum to zero.
    """
    p = check_polarity(polarity)
    v_be = p * (v_b - v_e)
    v_bc = p * (v_b - v_c)
    x_be, x_bc = _junction_exponentials(v_be, v_bc, emission_coefficient, temperature)
    i_cc = saturation_current * limited_expm1(x_be)
    i_ec = saturation_current * limited_expm1(x_bc)
    shape = dict(
        built_in_potential=built_in_potential,
        grading_coefficient=grading_coefficient,
        forward_fraction=forward_fraction,
    )
    q_be = depletion_charge(v_be, zero_bias_capacitance=base_emitter_capacitance, **shape)
    q_bc = depletion_charge(v_bc, zero_bias_capacitance=base_collector_capacitance, **shape)
    q_be = p * (q_be + forward_transit_time * i_cc)
    q_bc = p * (q_bc + reverse_transit_time * i_ec)
    return -q_bc, q_be + q_bc, -q_be
