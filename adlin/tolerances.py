"""Tolerances for `adlin.monte_carlo(system, tolerances={name: spec, ...})`.

- `Uniform(rel=0.01)`: uniform within +-1 % of the nominal value;
  `Uniform(abs=2e-3)`: within +-2e-3 of it (in the value's own unit).
- `Normal(rel=0.01)`: normal with a standard deviation of 1 % of the nominal
  value; `Normal(abs=2e-3)`: with standard deviation 2e-3.
- `parse(text)`: the same from text, as the command line writes it: "1%",
  "0.5%:normal", "2m", "2m:normal".

A plain string given as a spec is read by `parse`.
"""

from ._design.tolerances import AbstractTolerance, Normal, Uniform, parse

__all__ = ["AbstractTolerance", "Normal", "Uniform", "parse"]
