"""Quantities for `adlin.sensitivities(..., of=[...])`.

- `Bias(name)`: an unknown or output at the operating point (a plain name
  string means the same).
- `DCGain(output, input)`: the small-signal gain at DC.
- `TransferMagnitude(output, input, f_hz)`: |H(j 2 pi f)| at one frequency.
- `Pole(k)`, `PoleFrequency(k)`, `PoleDamping(k)`: the k-th row of the pole
  table at the nominal point (complex pole in rad/s, natural frequency in Hz,
  damping ratio), followed by nearness so the derivative is that pole's.
- `Expression(name, fn, unit_name)`: any JAX function fn(op, model) -> scalar.
"""

from ._design.quantities import (
    AbstractQuantity,
    Bias,
    DCGain,
    Expression,
    Pole,
    PoleDamping,
    PoleFrequency,
    TransferMagnitude,
)

__all__ = ["AbstractQuantity", "Bias", "DCGain", "Expression", "Pole", "PoleDamping",
           "PoleFrequency", "TransferMagnitude"]
