"""The model: named unknowns, inputs, outputs, parameters and three functions.

Every model in adlin has one form (DESIGN.md):

    d/dt q(x, p) + f(x, u, p) = 0,        y = g(x, u, p)

with n unknowns x, m inputs u and parameters p (a dict of scalars).  The
functions are plain JAX and never see adlin types.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any

import equinox as eqx
import jax
import jax.numpy as jnp
import numpy as np

from . import _config  # noqa: F401  (float64 policy, before any array exists)
from ._errors import ModelError, ParameterError, did_you_mean

CurrentFn = Callable[[Any, Any, Mapping[str, Any]], Any]
ChargeFn = Callable[[Any, Mapping[str, Any]], Any]
OutputFn = Callable[[Any, Any, Mapping[str, Any]], Any]


class Junction(eqx.Module):
    """A pn junction between two unknowns, for Newton step limiting.

    The solver keeps the voltage ``x[anode] - x[cathode]`` from jumping by more
    than the logarithmic step the exponential law can take (junction-voltage
    limiting; Vlach & Singhal, Computer Methods for Circuit Analysis and Design,
    2nd ed., 1994, sec. on Newton-Raphson for diodes; from memory).
    ``None`` for a terminal means ground.
    """

    anode: str | None = eqx.field(static=True)
    cathode: str | None = eqx.field(static=True)
    thermal_voltage: float = eqx.field(static=True, default=0.025852)
    critical_voltage: float = eqx.field(static=True, default=0.6)
    label: str = eqx.field(static=True, default="")


def _names(kind: str, names: Sequence[str] | Mapping[str, Any] | None) -> tuple[str, ...]:
    if names is None:
        return ()
    if isinstance(names, str):
        raise ModelError(f"{kind} must be a sequence of names, not the single string {names!r}; "
                         f"write ({names!r},) instead.")
    out = tuple(names)
    for name in out:
        if not isinstance(name, str) or not name:
            raise ModelError(f"{kind} must be non-empty strings; got {name!r}.")
    dup = sorted({n for n in out if out.count(n) > 1})
    if dup:
        raise ModelError(f"{kind} has duplicate names {dup}; every name must be unique.")
    return out


def _values(kind: str, names: Sequence[str] | Mapping[str, Any] | None) -> tuple[float, ...]:
    if not isinstance(names, Mapping):
        return tuple(0.0 for _ in _names(kind, names))
    vals = []
    for k, v in names.items():
        try:
            vals.append(float(v))
        except (TypeError, ValueError):
            raise ModelError(f"{kind} default for {k!r} must be a number, got {v!r}.") from None
    return tuple(vals)


class System(eqx.Module):
    """A nonlinear model in charge/current form.

    ``d/dt q(x, p) + f(x, u, p) = 0`` and ``y = g(x, u, p)``.

    **Arguments:**

    - `current`: f(x, u, p) -> array (n,). Static part of each equation: for a
      circuit, the current leaving each node (A); for an ODE, ``-h``.
    - `charge`: q(x, p) -> array (n,). Storage part (C, Wb); ``None`` for a
      purely static model.
    - `output`: g(x, u, p) -> array (len(outputs),). ``None`` makes the outputs
      the unknowns listed in `outputs` (or all unknowns if `outputs` is empty).
    - `unknowns`: names of the n unknowns, in the order of x.
    - `inputs`: names of the inputs, or a dict name -> default value.
    - `outputs`: names of the outputs.
    - `params`: dict name -> default value (SI units).
    - `units`: optional dict name -> unit string, used in reports.
    - `junctions`: optional pn junctions for Newton step limiting.
    - `name`: a label for reports.
    """

    current: CurrentFn = eqx.field(static=True)
    charge: ChargeFn | None = eqx.field(static=True)
    output: OutputFn | None = eqx.field(static=True)
    unknowns: tuple[str, ...] = eqx.field(static=True)
    inputs: tuple[str, ...] = eqx.field(static=True)
    outputs: tuple[str, ...] = eqx.field(static=True)
    param_items: tuple[tuple[str, float], ...] = eqx.field(static=True)
    input_defaults: tuple[float, ...] = eqx.field(static=True)
    unit_items: tuple[tuple[str, str], ...] = eqx.field(static=True)
    junctions: tuple[Junction, ...] = eqx.field(static=True)
    name: str = eqx.field(static=True)

    def __init__(
        self,
        current: CurrentFn,
        charge: ChargeFn | None = None,
        output: OutputFn | None = None,
        *,
        unknowns: Sequence[str],
        inputs: Sequence[str] | Mapping[str, float] | None = None,
        outputs: Sequence[str] | None = None,
        params: Mapping[str, float] | None = None,
        units: Mapping[str, str] | None = None,
        junctions: Sequence[Junction] = (),
        name: str = "model",
    ):
        if not callable(current):
            raise ModelError("System needs current=f, a function f(x, u, p) returning one value "
                             "per unknown.")
        for label, fn in (("charge", charge), ("output", output)):
            if fn is not None and not callable(fn):
                raise ModelError(f"System {label}= must be a function or None, got {fn!r}.")
        self.current = current
        self.charge = charge
        self.output = output
        self.unknowns = _names("unknowns", unknowns)
        if not self.unknowns:
            raise ModelError("System needs at least one unknown.")
        self.inputs = _names("inputs", inputs)
        self.input_defaults = _values("inputs", inputs)
        outs = _names("outputs", outputs)
        if output is None:
            outs = outs or self.unknowns
            missing = [o for o in outs if o not in self.unknowns]
            if missing:
                raise ModelError(
                    f"output {missing[0]!r} is not an unknown and no output function was given; "
                    "pass output=g or choose among the unknowns "
                    f"({did_you_mean(missing[0], self.unknowns)})."
                )
        elif not outs:
            raise ModelError("an output function was given but no output names; "
                             "pass outputs=(...).")
        self.outputs = outs
        params = dict(params or {})
        self.param_items = tuple(zip(params.keys(), _values("params", params), strict=True))
        clash = set(self.param_names) & (set(self.unknowns) | set(self.inputs))
        if clash:
            raise ModelError(f"name {sorted(clash)[0]!r} is used both as a parameter and as an "
                             "unknown or input; rename one of them.")
        clash = set(self.unknowns) & set(self.inputs)
        if clash:
            raise ModelError(f"name {sorted(clash)[0]!r} is both an unknown and an input; "
                             "rename one.")
        self.unit_items = tuple((str(k), str(v)) for k, v in (units or {}).items())
        for j in junctions:
            for t in (j.anode, j.cathode):
                if t is not None and t not in self.unknowns:
                    raise ModelError(f"junction {j.label or ''} terminal {t!r} is not an unknown "
                                     f"({did_you_mean(t, self.unknowns)}).")
        self.junctions = tuple(junctions)
        self.name = str(name)

    # -- names and defaults -------------------------------------------------
    @property
    def params(self) -> dict[str, float]:
        """Default parameter values, a fresh dict."""
        return dict(self.param_items)

    @property
    def param_names(self) -> tuple[str, ...]:
        return tuple(k for k, _ in self.param_items)

    @property
    def input_values(self) -> dict[str, float]:
        """Default input values (zero unless given), a fresh dict."""
        return dict(zip(self.inputs, self.input_defaults, strict=True))

    @property
    def units(self) -> dict[str, str]:
        return dict(self.unit_items)

    def unit(self, name: str) -> str:
        """Unit of a named quantity; guessed from the name's prefix if not given."""
        given = self.units.get(name)
        if given is not None:
            return given
        return {"v": "V", "i": "A", "q": "C"}.get(name.split("_", 1)[0].lower(), "")

    @property
    def n(self) -> int:
        return len(self.unknowns)

    # -- resolution of user dicts into vectors ------------------------------
    def param_vector(self, params: Mapping[str, Any] | None = None):
        """Parameter values as a float64 vector, in `param_names` order."""
        return _merge("parameter", self.param_names, self.param_items, params)

    def input_vector(self, inputs: Mapping[str, Any] | None = None):
        """Input values as a float64 vector, in `inputs` order."""
        return _merge("input", self.inputs, tuple(zip(self.inputs, self.input_defaults,
                                                      strict=True)), inputs)

    def param_dict(self, pvec) -> dict[str, Any]:
        return {k: pvec[i] for i, k in enumerate(self.param_names)}

    # -- the three functions on vectors -----------------------------------
    def f(self, x, u, pvec):
        return jnp.asarray(self.current(x, u, self.param_dict(pvec)))

    def q(self, x, pvec):
        if self.charge is None:
            return jnp.zeros_like(x)
        return jnp.asarray(self.charge(x, self.param_dict(pvec)))

    def g(self, x, u, pvec):
        if self.output is None:
            return x[jnp.asarray([self.unknowns.index(o) for o in self.outputs], dtype=int)]
        return jnp.atleast_1d(jnp.asarray(self.output(x, u, self.param_dict(pvec))))

    # -- construction from an ODE ------------------------------------------
    @classmethod
    def from_ode(
        cls,
        h: Callable[[Any, Any, Mapping[str, Any]], Any],
        *,
        states: Sequence[str],
        inputs: Sequence[str] | Mapping[str, float] | None = None,
        outputs: Sequence[str] | None = None,
        params: Mapping[str, float] | None = None,
        output: OutputFn | None = None,
        units: Mapping[str, str] | None = None,
        name: str = "ode",
    ) -> System:
        """A System from ``dx/dt = h(x, u, p)``: q = x and f = -h."""
        if not callable(h):
            raise ModelError("System.from_ode needs h, a function h(x, u, p) returning dx/dt.")
        return cls(
            current=_NegatedField(h),
            charge=_identity_charge,
            output=output,
            unknowns=states,
            inputs=inputs,
            outputs=outputs,
            params=params,
            units=units,
            name=name,
        )

    def __repr__(self) -> str:
        return (f"System({self.name!r}: {self.n} unknowns, {len(self.inputs)} inputs, "
                f"{len(self.outputs)} outputs, {len(self.param_items)} params)")


class _NegatedField:
    """f = -h, as a hashable callable so Systems compare by their model function."""

    def __init__(self, h):
        self.h = h

    def __call__(self, x, u, p):
        return -jnp.asarray(self.h(x, u, p))

    def __eq__(self, other):
        return isinstance(other, _NegatedField) and other.h is self.h

    def __hash__(self):
        return hash(("neg", id(self.h)))


def _identity_charge(x, p):
    return x


def _merge(kind: str, names: tuple[str, ...], defaults, given: Mapping[str, Any] | None):
    """Overlay a user dict on the defaults, refusing names that do not exist."""
    values = dict(defaults)
    if given is not None:
        if not isinstance(given, Mapping):
            raise ParameterError(f"{kind} values must be a dict name -> value, "
                                 f"got {type(given).__name__}.")
        for k, v in given.items():
            if k not in values:
                raise ParameterError(f"unknown {kind} {k!r}: {did_you_mean(k, names)}.")
            values[k] = v
    vals = [values[k] for k in names]
    if not any(isinstance(v, jax.core.Tracer) for v in vals):
        # concrete values: one host array, no per-value device operations
        try:
            return jax.device_put(np.array([np.asarray(v, dtype=np.float64) for v in vals],
                                        dtype=np.float64).reshape(len(names)))
        except (TypeError, ValueError):
            bad = next(k for k in names if np.asarray(values[k]).size != 1)
            raise ParameterError(f"{kind} {bad!r} must be a scalar, got {values[bad]!r}.") from None
    return jnp.stack([jnp.asarray(v, dtype=jnp.float64) for v in vals])
