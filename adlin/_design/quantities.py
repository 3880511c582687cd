"""Quantities whose sensitivities `adlin.sensitivities` computes.

Each quantity is a small immutable configuration object (an equinox Module
with static fields, so it is hashable and one compiled program serves every
set of values).  It turns the operating point and the small-signal model into
one number, as a pure JAX function:

- `Bias(name)`: an unknown or output at the operating point.
- `DCGain(output, input)`: the small-signal gain at DC.
- `TransferMagnitude(output, input, f_hz)`: |H(j 2 pi f)| at one frequency.
- `Pole(k)`, `PoleFrequency(k)`, `PoleDamping(k)`: the k-th pole of the
  pole table (sorted by magnitude, a complex pair listed once with its
  positive imaginary part), as a complex number (rad/s), its natural
  frequency |s|/2 pi (Hz) or its damping ratio -Re(s)/|s|.
- `Expression(name, fn)`: any JAX function of (operating point, model).

A plain string is short for `Bias` of that name.
"""

from __future__ import annotations

import abc
from collections.abc import Callable, Sequence
from typing import Any, ClassVar

import equinox as eqx
import jax
import jax.numpy as jnp

from .._errors import AnalysisError, ParameterError, did_you_mean
from .._system import System
from .._units import si
from .target_base import as_float, finite


def _check_name(kind: str, name: str, valid: Sequence[str]) -> None:
    if name not in valid:
        raise ParameterError(f"unknown {kind} {name!r}: {did_you_mean(name, valid)}.")


def _as_index(k):
    """Field converter: integral numbers (numpy ones too) become Python ints."""
    try:
        return int(k) if int(k) == k else k
    except (TypeError, ValueError):
        return k


class AbstractQuantity(eqx.Module):
    """One number computed from an operating point and its small-signal model.

    `value(op, model, ref)` is pure JAX; `ref` is the quantity's value at the
    nominal point (a complex scalar), which pole quantities use to keep
    following the same pole.
    """

    complex_valued: ClassVar[bool] = False
    tracks_pole: ClassVar[bool] = False

    @abc.abstractmethod
    def label(self) -> str:
        """The name shown in tables."""

    @abc.abstractmethod
    def unit(self, system: System) -> str:
        """Unit for reports ("" when dimensionless)."""

    @abc.abstractmethod
    def validate(self, system: System) -> None:
        """Raise `ParameterError` when a name does not belong to `system`."""

    @abc.abstractmethod
    def value(self, op, model, ref) -> jax.Array:
        """The quantity (a scalar, real unless `complex_valued`)."""


class Bias(AbstractQuantity):
    """An unknown or output of the model at the operating point.

    **Fields:** `name`: the unknown's or output's name.
    """

    name: str = eqx.field(static=True)

    def label(self) -> str:
        return self.name

    def unit(self, system: System) -> str:
        return system.unit(self.name)

    def validate(self, system: System) -> None:
        _check_name("unknown or output", self.name, system.unknowns + system.outputs)

    def value(self, op, model, ref) -> jax.Array:
        return op[self.name]


def _ratio_unit(system: System, output: str, input: str) -> str:
    uo, ui = system.unit(output), system.unit(input)
    return f"{uo}/{ui}" if uo and ui else ""


class DCGain(AbstractQuantity):
    """Small-signal gain at DC, D - C A^-1 B, from `input` to `output`.

    **Fields:** `output`, `input`: names in the model.
    """

    output: str = eqx.field(static=True)
    input: str = eqx.field(static=True)

    def label(self) -> str:
        return f"dc gain {self.output}/{self.input}"

    def unit(self, system: System) -> str:
        return _ratio_unit(system, self.output, self.input)

    def validate(self, system: System) -> None:
        _check_name("output", self.output, system.outputs)
        _check_name("input", self.input, system.inputs)

    def value(self, op, model, ref) -> jax.Array:
        i, o = model._pair(self.input, self.output)
        return model.dc_gain()[o, i]


class TransferMagnitude(AbstractQuantity):
    """|H(j 2 pi f)| from `input` to `output` at one frequency.

    **Fields:** `output`, `input`: names; `f_hz`: frequency in Hz (>= 0).
    """

    output: str = eqx.field(static=True)
    input: str = eqx.field(static=True)
    f_hz: float = eqx.field(static=True, converter=as_float)

    def __check_init__(self):
        if not (finite(self.f_hz) and self.f_hz >= 0):
            raise ParameterError(f"TransferMagnitude.f_hz must be a frequency >= 0 in Hz, got "
                                 f"{self.f_hz!r}.")

    def label(self) -> str:
        return f"|H {self.output}/{self.input}| at {si(self.f_hz, 'Hz')}"

    def unit(self, system: System) -> str:
        return _ratio_unit(system, self.output, self.input)

    def validate(self, system: System) -> None:
        _check_name("output", self.output, system.outputs)
        _check_name("input", self.input, system.inputs)

    def value(self, op, model, ref) -> jax.Array:
        i, o = model._pair(self.input, self.output)
        return jnp.abs(model.freq_response(float(self.f_hz))[o, i, 0])


def finite_poles(model) -> jax.Array:
    """Eigenvalues of the reduced model's A, unsorted (no sort in the traced path)."""
    A = model.reduce().A
    if A.shape[0] == 0:
        return jnp.zeros((0,), jnp.complex128)
    return jnp.linalg.eigvals(A)


class _AbstractPoleQuantity(AbstractQuantity):
    """A quantity of the k-th pole of the pole table at the nominal point.

    The pole is followed by nearness to its nominal value `ref` (the choice of
    eigenvalue depends on values only, so the derivative is that of one
    eigenvalue; a sort-based index would jump where poles cross).
    """

    index: eqx.AbstractVar[int]
    tracks_pole: ClassVar[bool] = True

    def __check_init__(self):
        if int(self.index) != self.index or self.index < 0:
            raise ParameterError(f"{type(self).__name__} takes a pole number >= 0 (its row in "
                                 f"the pole table), got {self.index!r}.")

    def validate(self, system: System) -> None:
        pass  # the index is checked against the pole table at the nominal point

    def pole(self, model, ref) -> jax.Array:
        poles = finite_poles(model)
        if poles.shape[0] == 0:
            raise AnalysisError(f"{self.label()}: the model has no finite poles (no storage).")
        k = jnp.argmin(jnp.abs(jax.lax.stop_gradient(poles) - ref))
        return poles[k]


class Pole(_AbstractPoleQuantity):
    """The k-th pole (rad/s, complex) of the pole table at the nominal point.

    **Fields:** `index`: row of `LinearModel.pole_table()` (0 = the smallest
    magnitude; a complex pair is one row, its member with positive imaginary
    part).
    """

    index: int = eqx.field(static=True, converter=_as_index)
    complex_valued: ClassVar[bool] = True

    def label(self) -> str:
        return f"pole {self.index}"

    def unit(self, system: System) -> str:
        return "rad/s"

    def value(self, op, model, ref) -> jax.Array:
        return self.pole(model, ref)


class PoleFrequency(_AbstractPoleQuantity):
    """Natural frequency |s|/2 pi (Hz) of the k-th pole of the pole table.

    **Fields:** `index`: row of `LinearModel.pole_table()`.
    """

    index: int = eqx.field(static=True, converter=_as_index)

    def label(self) -> str:
        return f"pole {self.index} frequency"

    def unit(self, system: System) -> str:
        return "Hz"

    def value(self, op, model, ref) -> jax.Array:
        return jnp.abs(self.pole(model, ref)) / (2 * jnp.pi)


class PoleDamping(_AbstractPoleQuantity):
    """Damping ratio -Re(s)/|s| of the k-th pole of the pole table.

    **Fields:** `index`: row of `LinearModel.pole_table()`.
    """

    index: int = eqx.field(static=True, converter=_as_index)

    def label(self) -> str:
        return f"pole {self.index} damping"

    def unit(self, system: System) -> str:
        return ""

    def value(self, op, model, ref) -> jax.Array:
        s = self.pole(model, ref)
        return -jnp.real(s) / jnp.abs(s)


class Expression(AbstractQuantity):
    """Any scalar JAX function of the operating point and the small-signal model.

    **Fields:**

    - `name`: label for tables.
    - `fn`: ``fn(op, model) -> scalar`` (e.g. ``lambda op, m: op["i_vdd"] * 3.3``
      for the power drawn from a 3.3 V supply).  Give the same function object
      each call so the compiled program is reused.
    - `unit_name`: unit for reports.
    """

    name: str = eqx.field(static=True)
    fn: Callable[[Any, Any], Any] = eqx.field(static=True)
    unit_name: str = eqx.field(static=True, default="")

    def __check_init__(self):
        if not callable(self.fn):
            raise ParameterError(f"Expression {self.name!r} needs fn(op, model) -> scalar, got "
                                 f"{self.fn!r}.")

    def label(self) -> str:
        return self.name

    def unit(self, system: System) -> str:
        return self.unit_name

    def validate(self, system: System) -> None:
        pass

    def value(self, op, model, ref) -> jax.Array:
        v = jnp.asarray(self.fn(op, model))
        if v.shape != ():
            raise AnalysisError(f"Expression {self.name!r} must return a scalar, got shape "
                                f"{v.shape}.")
        return v


def as_quantity(q) -> AbstractQuantity:
    """A quantity from a quantity object or a name (short for `Bias(name)`)."""
    if isinstance(q, AbstractQuantity):
        return q
    if isinstance(q, str):
        return Bias(q)
    raise ParameterError(f"of=[...] takes quantities (adlin.sensitivities quantities such as "
                         f"Bias, DCGain, Pole) or names of unknowns/outputs, got {q!r}.")


def resolve_quantities(of, system: System) -> tuple[AbstractQuantity, ...]:
    """The `of=[...]` argument as checked quantity objects (one, or a sequence).

    **Raises:** `ParameterError` for an entry that is not a quantity or a name,
    or a name the model lacks; `AnalysisError` for a quantity listed twice.
    """
    if isinstance(of, (str, AbstractQuantity)):
        of = (of,)
    quantities = tuple(as_quantity(q) for q in of)
    labels = [q.label() for q in quantities]
    dup = sorted({x for x in labels if labels.count(x) > 1})
    if dup:
        raise AnalysisError(f"of=[...] lists {dup[0]!r} twice; give each quantity once.")
    for q in quantities:
        q.validate(system)
    return quantities
