"""Device laws: pn junction, bipolar and MOS transistors as plain JAX functions.

Every law takes terminal potentials in volts and keyword-only parameters in
SI units, returns JAX arrays (currents in amperes flowing INTO the device,
charges in coulombs), and works under ``jax.jit``, ``jax.vmap`` and
``jax.grad`` with respect to voltages and parameters. Junction exponentials
are limited so that a Newton iterate far in forward bias still gives finite
values and derivatives. The ``*_small_signal`` helpers name the small-signal
parameters of a law at a bias point by exact forward-mode differentiation.
"""

from .. import _config  # noqa: F401  (float64 policy, before any array exists)
from ._junction import depletion_charge as depletion_charge
from ._junction import limited_exp as limited_exp
from ._junction import limited_expm1 as limited_expm1
from ._small_signal import bjt_small_signal as bjt_small_signal
from ._small_signal import diode_small_signal as diode_small_signal
from ._small_signal import mosfet_small_signal as mosfet_small_signal
from ._thermal import thermal_voltage as thermal_voltage
from .bjt import bjt_charges as bjt_charges
from .bjt import bjt_currents as bjt_currents
from .diode import diode_charge as diode_charge
from .diode import diode_current as diode_current
from .mosfet import ekv_currents as ekv_currents
from .mosfet import mosfet_charges as mosfet_charges
from .mosfet import square_law_currents as square_law_currents

__all__ = [
    "bjt_charges",
    "bjt_currents",
    "bjt_small_signal",
    "depletion_charge",
    "diode_charge",
    "diode_current",
    "diode_small_signal",
    "ekv_currents",
    "limited_exp",
    "limited_expm1",
    "mosfet_charges",
    "mosfet_small_signal",
    "square_law_currents",
    "thermal_voltage",
]
