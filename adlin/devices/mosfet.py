"""MOS transistor: square law, EKV all-region law, constant-capacitance charges."""

from __future__ import annotations

import jax.numpy as jnp
from jax import Array
from jax.typing import ArrayLike

from ._polarity import check_polarity
from ._thermal import DEFAULT_TEMPERATURE, thermal_voltage


def _terminal_currents(p, i_ds):
    # A drain-to-source channel current; gate and bulk draw nothing.
    i_d = p * i_ds
    zero = jnp.zeros_like(i_d)
    return i_d, zero, -i_d, zero


def square_law_currents(
    v_d: ArrayLike,
    v_g: ArrayLike,
    v_s: ArrayLike,
    v_b: ArrayLike,
    *,
    polarity: int = 1,
    transconductance_parameter: ArrayLike = 2e-4,
    threshold_voltage: ArrayLike = 0.5,
    channel_length_modulation: ArrayLike = 0.0,
) -> tuple[Array, Array, Array, Array]:
    """Terminal currents of a MOSFET by the long-channel square law.

    For the n-channel device with ``v_ds >= 0``, overdrive
    ``v_ov = v_gs - V_t`` and ``k = mu C_ox W / L``:

        cutoff      v_ov <= 0:            i_ds = 0
        triode      0 <= v_ds < v_ov:     i_ds = k (v_ov v_ds - v_ds**2 / 2) (1 + lambda v_ds)
        saturation  v_ds >= v_ov > 0:     i_ds = k / 2 v_ov**2 (1 + lambda v_ds)

    The factor ``1 + lambda v_ds`` multiplies both regions, as in Shichman &
    Hodges, so the current and its first derivatives are continuous at the
    triode/saturation edge and at the cutoff edge (the law is C1). The
    device is symmetric: for ``v_ds < 0`` drain and source swap roles and
    the current reverses. The threshold is constant (no body effect), so
    the bulk terminal only takes part through its zero current; use
    `ekv_currents` for a bulk-referenced law. A p-channel device
    (``polarity=-1``) is the n-channel law applied to the negated voltages,
    with negated currents; give its threshold as a positive number for an
    enhancement device.

    Shichman & Hodges, "Modeling and simulation of insulated-gate
    field-effect transistor switching circuits", IEEE Journal of Solid-State
    Circuits SC-3(3), 1968; Sedra & Smith, Microelectronic Circuits, 7th ed.,
    2015, sec. 5.2 (current-voltage characteristics, channel-length
    modulation; from memory).

    **Arguments:**

    - `v_d`, `v_g`, `v_s`, `v_b`: drain, gate, source and bulk potentials in volts.
    - `polarity`: +1 for n-channel, -1 for p-channel.
    - `transconductance_parameter`: ``k = mu C_ox W / L`` in A/V^2.
    - `threshold_voltage`: ``V_t`` in volts.
    - `channel_length_modulation`: ``lambda`` in 1/V.

    **Returns:**

    ``(i_d, i_g, i_s, i_b)``: the currents in amperes flowing INTO the
    device at drain, gate, source and bulk (``i_s = -i_d``, ``i_g = i_b = 0``).
    """
    p = check_polarity(polarity)
    vd, vg, vs = p * jnp.asarray(v_d), p * jnp.asarray(v_g), p * jnp.asarray(v_s)
    del v_b  # no body effect in this law
    # The source is the lower of the two channel ends (n-channel convention).
    # A sign instead of abs(): abs has zero slope at v_ds = 0, which would
    # lose the channel conductance exactly where the device sits unbiased.
    sign = jnp.where(vd < vs, -1.0, 1.0)
    v_ds = sign * (vd - vs)
    v_source = jnp.where(vd < vs, vd, vs)
    v_ov = vg - v_source - threshold_voltage
    k = transconductance_parameter
    i_triode = k * (v_ov * v_ds - 0.5 * v_ds**2)
    i_sat = 0.5 * k * v_ov**2
    i = jnp.where(v_ov <= 0.0, 0.0, jnp.where(v_ds < v_ov, i_triode, i_sat))
    i = i * (1.0 + channel_length_modulation * v_ds)
    return _terminal_currents(p, sign * i)


def _softplus(x):
    """ln(1 + exp(x)) as max(x, 0) + log1p(exp(-|x|)): no overflow for large x, full
    accuracy for very negative x, and plain primitives (jax.nn.softplus is a
    nested jitted function whose per-call tracing cost showed in CLI start-up)."""
    return jnp.maximum(x, 0.0) + jnp.log1p(jnp.exp(-jnp.abs(x)))


def ekv_currents(
    v_d: ArrayLike,
    v_g: ArrayLike,
    v_s: ArrayLike,
    v_b: ArrayLike,
    *,
    polarity: int = 1,
    transconductance_parameter: ArrayLike = 2e-4,
    threshold_voltage: ArrayLike = 0.5,
    slope_factor: ArrayLike = 1.3,
    channel_length_modulation: ArrayLike = 0.0,
    temperature: ArrayLike = DEFAULT_TEMPERATURE,
) -> tuple[Array, Array, Array, Array]:
    """Terminal currents of a MOSFET by the EKV law, valid from weak to strong inversion.

    With all voltages referred to the bulk, ``U_T = k T / q`` and
    ``beta = mu C_ox W / L``:

        v_p  = (v_gb - V_T0) / n                          (pinch-off voltage)
        i_f  = ln(1 + exp((v_p - v_sb) / (2 U_T)))**2     (forward, normalised)
        i_r  = ln(1 + exp((v_p - v_db) / (2 U_T)))**2     (reverse, normalised)
        I_S  = 2 n beta U_T**2                            (specific current)
        i_ds = I_S (i_f - i_r) (1 + lambda |v_ds|).

    In strong inversion and saturation this tends to
    ``beta / (2 n) (v_gb - V_T0 - n v_sb)**2``, the square law when ``n = 1``
    and the source is at the bulk; in weak inversion
    ``i_ds ~ I_S exp((v_p - v_sb) / U_T)``, so ``g_m / i_ds = 1 / (n U_T)``.
    The law is smooth (infinitely differentiable apart from ``|v_ds|`` at
    ``v_ds = 0``, where the current vanishes) and symmetric in drain and
    source. ``ln(1 + exp(x))`` is evaluated as a softplus that neither
    overflows nor loses accuracy for large ``|x|``. The factor
    ``1 + lambda |v_ds|`` is a simple channel-length-modulation term in the
    spirit of the square law, not the paper's own model of that effect. The
    pinch-off voltage uses the paper's constant-slope simplification (no
    body-effect parameter). A p-channel device (``polarity=-1``) is the
    n-channel law applied to the negated voltages, with negated currents.

    Enz, Krummenacher & Vittoz, "An analytical MOS transistor model valid in
    all regions of operation and dedicated to low-voltage and low-current
    applications", Analog Integrated Circuits and Signal Processing 8, 1995,
    sec. 2-3 (static model, interpolation function and specific current;
    from memory).

    **Arguments:**

    - `v_d`, `v_g`, `v_s`, `v_b`: drain, gate, source and bulk potentials in volts.
    - `polarity`: +1 for n-channel, -1 for p-channel.
    - `transconductance_parameter`: ``beta = mu C_ox W / L`` in A/V^2.
    - `threshold_voltage`: ``V_T0``, gate-to-bulk threshold at zero source
      bias, in volts.
    - `slope_factor`: ``n`` (dimensionless, > 1 in practice).
    - `channel_length_modulation`: ``lambda`` in 1/V.
    - `temperature`: device temperature in kelvin (default 300.15 K = 27 degC).

    **Returns:**

    ``(i_d, i_g, i_s, i_b)``: the currents in amperes flowing INTO the
    device at drain, gate, source and bulk (``i_s = -i_d``, ``i_g = i_b = 0``).
    """
    p = check_polarity(polarity)
    vd, vg, vs, vb = (p * jnp.asarray(v) for v in (v_d, v_g, v_s, v_b))
    n = slope_factor
    ut = thermal_voltage(temperature)
    v_p = (vg - vb - threshold_voltage) / n
    i_f = _softplus((v_p - (vs - vb)) / (2.0 * ut)) ** 2
    i_r = _softplus((v_p - (vd - vb)) / (2.0 * ut)) ** 2
    i_spec = 2.0 * n * transconductance_parameter * ut**2
    i = i_spec * (i_f - i_r) * (1.0 + channel_length_modulation * jnp.abs(vd - vs))
    return _terminal_currents(p, i)


def mosfet_charges(
    v_d: ArrayLike,
    v_g: ArrayLike,
    v_s: ArrayLike,
    v_b: ArrayLike,
    *,
    polarity: int = 1,
    gate_source_capacitance: ArrayLike = 0.0,
    gate_drain_capacitance: ArrayLike = 0.0,
    gate_bulk_capacitance: ArrayLike = 0.0,
    drain_bulk_capacitance: ArrayLike = 0.0,
    source_bulk_capacitance: ArrayLike = 0.0,
) -> tuple[Array, Array, Array, Array]:
    """Terminal charges of a MOSFET with constant capacitances.

    A simple constant-capacitance charge model: five linear capacitors
    (gate-source, gate-drain, gate-bulk, drain-bulk, source-bulk), each
    holding ``Q = C (v_a - v_b)``, standing for overlap and fixed junction
    capacitances. It ignores the bias dependence of the intrinsic channel
    charge; the terminal charges are the sums of the capacitor charges at
    each terminal, so they sum to zero and ``-dq_i/dv_j`` equals the
    capacitance between terminals ``i`` and ``j``. Being linear, the model is
    the same for both polarities (`polarity` is accepted so that one
    parameter set serves the current and charge laws). Tsividis, Operation
    and Modeling of the MOS Transistor, 2nd ed., 1999, ch. 8-9 (terminal
    charges and the capacitance matrix ``C_ij = -dq_i/dv_j``; from memory);
    Sedra & Smith, Microelectronic Circuits, 7th ed., 2015, sec. 10.2 (MOSFET
    internal capacitances; from memory).

    **Arguments:**

    - `v_d`, `v_g`, `v_s`, `v_b`: drain, gate, source and bulk potentials in volts.
    - `polarity`: +1 for n-channel, -1 for p-channel (no effect on this linear model).
    - `gate_source_capacitance`, `gate_drain_capacitance`,
      `gate_bulk_capacitance`, `drain_bulk_capacitance`,
      `source_bulk_capacitance`: the five capacitances in farads.

    **Returns:**

    ``(q_d, q_g, q_s, q_b)``: the charges in coulombs stored at drain, gate,
    source and bulk; they sum to zero.
    """
    check_polarity(polarity)
    q_gs = gate_source_capacitance * (v_g - v_s)
    q_gd = gate_drain_capacitance * (v_g - v_d)
    q_gb = gate_bulk_capacitance * (v_g - v_b)
    q_db = drain_bulk_capacitance * (v_d - v_b)
    q_sb = source_bulk_capacitance * (v_s - v_b)
    return (
        jnp.asarray(q_db - q_gd),
        jnp.asarray(q_gs + q_gd + q_gb),
        jnp.asarray(q_sb - q_gs),
        jnp.asarray(-(q_gb + q_db + q_sb)),
    )
