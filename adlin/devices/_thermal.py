"""Thermal voltage k*T/q."""

from __future__ import annotations

import jax.numpy as jnp
import scipy.constants
from jax import Array
from jax.typing import ArrayLike

#: 27 degC, the customary reference temperature of device-model parameters.
DEFAULT_TEMPERATURE = 300.15

_BOLTZMANN = scipy.constants.k  # J/K, exact since the 2019 SI redefinition (CODATA)
_ELEMENTARY_CHARGE = scipy.constants.e  # C, exact (CODATA)


def thermal_voltage(temperature: ArrayLike = DEFAULT_TEMPERATURE) -> Array:
    """Thermal voltage ``k*T/q`` of a junction at absolute temperature ``temperature``.

    Uses the CODATA values of the Boltzmann constant and the elementary charge
    from `scipy.constants` (both exact in the 2019 SI). The default temperature
    is 300.15 K (27 degC), the usual reference temperature of device-model
    parameters; there ``k*T/q`` is about 25.86 mV (25.85 mV at 300 K).
    Sedra & Smith, Microelectronic Circuits, 7th ed., 2015, sec. 3.5 (thermal
    voltage in the junction law; from memory).

    **Arguments:**

    - `temperature`: absolute temperature in kelvin (a Python or JAX scalar or
      array; may be traced).

    **Returns:**

    The thermal voltage in volts (a JAX array with the shape of `temperature`).
    """
    return jnp.asarray(_BOLTZMANN * temperature / _ELEMENTARY_CHARGE)
