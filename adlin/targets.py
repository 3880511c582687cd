"""Design targets: goals on the poles, the response and the bias point.

Each target is an immutable configuration object with a smooth loss (zero when
met exactly, positive otherwise, dimensionless so different targets add up),
an achieved value and a met flag, all pure JAX functions of the operating
point and its small-signal model (jit, vmap and grad work):

- `PolePair(f_hz, zeta)`: a pole pair at a natural frequency and damping.
- `RealPole(f_hz)`: a real pole at a frequency.
- `MinDamping(zeta_min)`: every pole damped at least this much.
- `StabilityMargin(max_real_rad_s)`: every pole's real part below a bound.
- `Bandwidth(output, input, min_hz=..., max_hz=...)`: -3 dB bandwidth.
- `DCGain(output, input, value=... | low=..., high=...)`: small-signal DC gain.
- `BiasLimit(quantity, low=..., high=...)`: a bias-point quantity (a name or
  a JAX function of the operating point) inside a window.

`evaluate(targets, op, model)` gives a `TargetResult` per target;
`total_loss(targets, op, model)` their weighted sum; `validate(targets,
system)` checks the names.  Pole placement losses are ratios of
characteristic polynomials, never individual eigenvalues, so they stay smooth
when poles coalesce or change order (see `adlin._design.pole_targets`).
"""

from ._design.bias_targets import BiasLimit
from ._design.pole_targets import MinDamping, PolePair, RealPole, StabilityMargin
from ._design.response_targets import Bandwidth, DCGain
from ._design.target_base import AbstractTarget, TargetResult
from ._design.targets import evaluate, total_loss, validate

__all__ = ["AbstractTarget", "Bandwidth", "BiasLimit", "DCGain", "MinDamping", "PolePair",
           "RealPole", "StabilityMargin", "TargetResult", "evaluate", "total_loss", "validate"]
