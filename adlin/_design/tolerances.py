"""Component tolerances for `adlin.monte_carlo`: uniform or normal, relative or absolute.

- `Uniform(rel=0.01)`: the value is uniform in nominal * (1 +- 0.01);
  `Uniform(abs=2e-3)`: uniform in nominal +- 2 mV (or whatever the unit is).
- `Normal(rel=0.01)`: normal about the nominal value with standard deviation
  1 % of it; `Normal(abs=...)`: with that standard deviation.
- `parse("1%")`, `parse("0.5%:normal")`, `parse("2m")`, `parse("2m:normal")`:
  the same from command-line text.

Each is an immutable configuration object (an equinox Module with static,
validated fields), so equal tolerances compare and hash equal.
"""

from __future__ import annotations

import abc
import math

import equinox as eqx
import jax
import jax.numpy as jnp

from .._errors import ParameterError
from .._units import parse_number
from .target_base import as_float


class AbstractTolerance(eqx.Module):
    """How one parameter or input spreads about its nominal value.

    Exactly one of `rel` (a fraction of the nominal value's magnitude) and
    `abs` (in the quantity's own unit) is given; it must be positive and finite.
    """

    rel: eqx.AbstractVar[float | None]
    abs: eqx.AbstractVar[float | None]

    def __check_init__(self):
        kind = type(self).__name__
        given = [(k, v) for k, v in (("rel", self.rel), ("abs", self.abs)) if v is not None]
        if len(given) != 1:
            raise ParameterError(f"{kind} takes exactly one of rel=... (a fraction, 0.01 for 1 %) "
                                 f"and abs=... (in the value's unit), got "
                                 f"{'both' if given else 'neither'}.")
        k, v = given[0]
        if not (isinstance(v, float) and math.isfinite(v) and v > 0):
            raise ParameterError(f"{kind}.{k} must be a positive finite number, got {v!r}.")

    def scale(self, nominal: float) -> float:
        """The spread in the value's unit: rel * |nominal| or abs."""
        return self.rel * abs(nominal) if self.rel is not None else self.abs

    @abc.abstractmethod
    def draw(self, key, n: int) -> jax.Array:
        """n standardized deviations (float64): value = nominal + scale * deviation."""

    @abc.abstractmethod
    def std(self, nominal: float) -> float:
        """Standard deviation of the value about `nominal`."""

    @abc.abstractmethod
    def describe(self) -> str:
        """The tolerance in words ("+-1 % uniform")."""

    def check_nominal(self, name: str, nominal: float) -> None:
        """Raise `ParameterError` when the tolerance cannot apply to this nominal value."""
        if self.rel is not None and nominal == 0:
            raise ParameterError(f"{name!r} is 0, so a relative tolerance ({self.describe()}) "
                                 "does not spread it; give an absolute one, e.g. "
                                 f"{type(self).__name__}(abs=...).")

    def _amount(self) -> str:
        return f"{self.rel * 100:g} %" if self.rel is not None else f"{self.abs:g}"


class Uniform(AbstractTolerance):
    """Uniform in [nominal - a, nominal + a], a = rel * |nominal| or abs.

    Its standard deviation is a / sqrt(3) (the variance of a uniform law on
    an interval of width 2a is (2a)^2 / 12).  A relative width of 100 % or
    more is refused: it would put zero, or values of the other sign, inside
    the range of a part value.
    """

    rel: float | None = eqx.field(static=True, default=None, converter=as_float)
    abs: float | None = eqx.field(static=True, default=None, converter=as_float)

    def __check_init__(self):
        if isinstance(self.rel, float) and self.rel >= 1:
            raise ParameterError(
                f"Uniform(rel={self.rel:g}) spans +-{self.rel * 100:g} %, which reaches zero or "
                "changes the sign of the value; a relative tolerance must be below 100 % (use "
                "abs=... if the value really may change sign).")

    def draw(self, key, n: int) -> jax.Array:
        return jax.random.uniform(key, (n,), jnp.float64, minval=-1.0, maxval=1.0)

    def std(self, nominal: float) -> float:
        return self.scale(nominal) / math.sqrt(3.0)

    def describe(self) -> str:
        return f"+-{self._amount()} uniform"


class Normal(AbstractTolerance):
    """Normal about the nominal value with standard deviation rel * |nominal| or abs.

    Not truncated: a wide relative tolerance can give values of the other sign
    (with rel = 0.2 the chance is about 3e-7 per sample); such samples usually
    fail to converge and are listed by `failures()`.
    """

    rel: float | None = eqx.field(static=True, default=None, converter=as_float)
    abs: float | None = eqx.field(static=True, default=None, converter=as_float)

    def draw(self, key, n: int) -> jax.Array:
        return jax.random.normal(key, (n,), jnp.float64)

    def std(self, nominal: float) -> float:
        return self.scale(nominal)

    def describe(self) -> str:
        return f"{self._amount()} normal (one standard deviation)"


def parse(text: str) -> AbstractTolerance:
    """A tolerance from text: "1%" (uniform +-1 %), "0.5%:normal" (sigma 0.5 %),
    "2m" (uniform +-2e-3), "2m:normal" (sigma 2e-3), ":uniform" may be written out.

    **Arguments:** `text`: a positive number with "%" (relative) or an optional
    SI prefix T G M k m u n p f (absolute, in the value's unit), then
    optionally ":normal" or ":uniform" (the default).

    **Returns:** `Uniform` or `Normal`.

    **Raises:** `ParameterError` naming the text when it does not read as a tolerance.
    """
    body, _, law = str(text).partition(":")
    law = law.strip().lower() or "uniform"
    body = body.strip()
    try:
        if law not in ("uniform", "normal"):
            raise ValueError(law)
        relative = body.endswith("%")
        value = parse_number(body[:-1] if relative else body)
    except ValueError:
        raise ParameterError(f"tolerance {text!r} is not understood; write a relative one like "
                             "'1%' or '0.5%:normal', or an absolute one like '2m' or "
                             "'2m:normal' (SI prefixes T G M k m u n p f).") from None
    cls = Normal if law == "normal" else Uniform
    try:
        return cls(rel=value / 100.0) if relative else cls(abs=value)
    except ParameterError as err:
        raise ParameterError(f"tolerance {text!r}: {err}") from None


def as_tolerance(name: str, spec) -> AbstractTolerance:
    """A tolerance object from a tolerance or its text (see `parse`)."""
    if isinstance(spec, AbstractTolerance):
        return spec
    if isinstance(spec, str):
        return parse(spec)
    raise ParameterError(f"the tolerance of {name!r} must be adlin.tolerances.Uniform(...), "
                         f"Normal(...) or text such as '1%' or '2m:normal', got {spec!r}.")
