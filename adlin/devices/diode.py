"""Shockley junction diode: current and stored charge."""

from __future__ import annotations

from jax import Array
from jax.typing import ArrayLike

from ._junction import depletion_charge, limited_expm1
from ._thermal import DEFAULT_TEMPERATURE, thermal_voltage


def diode_current(
    v: ArrayLike,
    *,
    saturation_current: ArrayLike = 1e-14,
    emission_coefficient: ArrayLike = 1.0,
    temperature: ArrayLike = DEFAULT_TEMPERATURE,
) -> Array:
    """Current of an ideal (Shockley) junction diode.

        i = I_S * (exp(v / (n V_T)) - 1),     V_T = k T / q,

    with the exponential continued linearly for ``v / (n V_T) > 80``
    (`limited_exp`), so that a Newton solver stepping to 10 V or 100 V sees
    finite currents and derivatives; ``exp - 1`` is evaluated as ``expm1`` so
    the current keeps full relative accuracy near zero and in reverse bias.
    The saturation current is taken as given at `temperature` (no
    temperature scaling of ``I_S``). Shockley, "The theory
    of p-n junctions in semiconductors and p-n junction transistors", Bell
    System Technical Journal 28, 1949; Sedra & Smith, Microelectronic Circuits,
    7th ed., 2015, sec. 4.2 (from memory).

    **Arguments:**

    - `v`: anode-to-cathode voltage in volts.
    - `saturation_current`: ``I_S`` in amperes.
    - `emission_coefficient`: ideality factor ``n`` (dimensionless, 1..2).
    - `temperature`: junction temperature in kelvin (default 300.15 K = 27 degC).

    **Returns:**

    The current flowing from anode to cathode through the diode, in amperes.
    """
    vt = thermal_voltage(temperature)
    return saturation_current * limited_expm1(v / (emission_coefficient * vt))


def diode_charge(
    v: ArrayLike,
    *,
    saturation_current: ArrayLike = 1e-14,
    emission_coefficient: ArrayLike = 1.0,
    temperature: ArrayLike = DEFAULT_TEMPERATURE,
    zero_bias_capacitance: ArrayLike = 0.0,
    built_in_potential: ArrayLike = 0.7,
    grading_coefficient: ArrayLike = 0.5,
    forward_fraction: ArrayLike = 0.5,
    transit_time: ArrayLike = 0.0,
) -> Array:
    """Charge stored in a junction diode: depletion plus diffusion charge.

        q = Q_dep(v) + transit_time * diode_current(v).

    The depletion charge integrates ``C_j0 / (1 - v/V_j)**m`` and is continued
    with a linearised capacitance above ``forward_fraction * V_j`` so that it
    stays finite at any forward voltage (see
    `adlin.devices._junction.depletion_charge`); the diffusion (minority
    carrier) charge is the transit time times the diode current. The
    capacitance is ``dq/dv``. Sedra & Smith, Microelectronic Circuits, 7th ed.,
    2015, sec. 3.6 (depletion and diffusion capacitance; from memory);
    Massobrio & Antognetti, Semiconductor Device Modeling, 2nd ed., 1993, ch. 1
    (forward-bias linearisation of the depletion capacitance; from memory).

    **Arguments:**

    - `v`: anode-to-cathode voltage in volts.
    - `saturation_current`, `emission_coefficient`, `temperature`: as for
      `diode_current` (they set the diffusion charge).
    - `zero_bias_capacitance`: depletion capacitance at zero bias, in farads.
    - `built_in_potential`: junction built-in potential in volts (> 0).
    - `grading_coefficient`: junction grading exponent ``m``, ``0 <= m < 1``
      (1/2 abrupt, 1/3 linearly graded).
    - `forward_fraction`: fraction of the built-in potential above which the
      depletion capacitance is linearised, ``0 <= F < 1``.
    - `transit_time`: forward transit time in seconds.

    **Returns:**

    The charge on the anode in coulombs (the cathode holds its negative);
    zero at ``v = 0``.
    """
    q_dep = depletion_charge(
        v,
        zero_bias_capacitance=zero_bias_capacitance,
        built_in_potential=built_in_potential,
        grading_coefficient=grading_coefficient,
        forward_fraction=forward_fraction,
    )
    i = diode_current(
        v,
        saturation_current=saturation_current,
        emission_coefficient=emission_coefficient,
        temperature=temperature,
    )
    return q_dep + transit_time * i
