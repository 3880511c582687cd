"""Nonlinear elements given by user (or `adlin.devices`) laws.

`TwoTerminal` takes a current law ``i(v, p)`` and/or a charge law ``q(v, p)``
of the branch voltage ``v = v_a - v_b``; the current flows from a through the
element to b and the charge sits on a (its negative on b).

`Device` takes laws of several terminals: ``currents(v, p)`` and
``charges(v, p)`` receive a dict terminal -> voltage and return a dict
terminal -> current INTO the device at that terminal (or charge on it);
terminals left out contribute zero.  The current into the device at a
terminal is the current leaving the node it is connected to, so it goes into
that node's row of f unchanged.

In both, ``p`` is a dict of the element's own parameters under their local
names (``p["saturation_current"]``), whatever circuit parameter each one is
bound to.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Mapping
from typing import Any

import jax
import jax.numpy as jnp

from .._errors import ModelError
from .assembly import Bias
from .elements import AbstractElement, _pair
from .small_signal import Quantities, generic_summary
from .values import Ref

Summary = Callable[[tuple[str, ...], Any, Any, Any, Any], Quantities]


def _scalar(owner: AbstractElement, what: str, value):
    value = jnp.asarray(value)
    if value.shape != ():
        raise ModelError(
            f"{owner.describe()} {what} has shape {value.shape}; the law must "
            "return one scalar per terminal (write float(...) or x[0] as needed)."
        )
    return value


@dataclasses.dataclass(frozen=True, eq=False)
class TwoTerminal(AbstractElement):
    """A nonlinear two-terminal element (diode, nonlinear resistor or capacitor)."""

    name: str
    a: str
    b: str
    current_law: Callable[[Any, Mapping[str, Any]], Any] | None
    charge_law: Callable[[Any, Mapping[str, Any]], Any] | None
    params: Mapping[str, Ref]
    junction: bool = False
    quantity_names: tuple[str, str, str] = ("i", "g", "c")
    kind: str = "two-terminal element"  # type: ignore[misc]

    @property
    def stores_charge(self):
        return self.charge_law is not None

    def nodes(self):
        return (self.a, self.b)

    def refs(self):
        return dict(self.params)

    def junction_pairs(self):
        return ((self.a, self.b, self.name),) if self.junction else ()

    def currents(self, at: Bias):
        if self.current_law is None:
            return []
        i = self.current_law(at.v(self.a) - at.v(self.b), at.local(self.params))
        return _pair(at, self.a, self.b, _scalar(self, "current", i))

    def charges(self, at: Bias):
        q = self.charge_law(at.v(self.a) - at.v(self.b), at.local(self.params))
        return _pair(at, self.a, self.b, _scalar(self, "charge", q))

    def small_signal(self, at: Bias) -> Quantities:
        v0 = at.v(self.a) - at.v(self.b)
        p = at.local(self.params)
        i_name, g_name, c_name = self.quantity_names
        zero = jnp.zeros_like(v0)
        out: Quantities = {}
        if self.current_law is not None:
            law = self.current_law
            out[i_name] = (law(v0, p), "A")
            out[g_name] = (jax.jacfwd(lambda v: law(v, p))(v0), "S")
        else:
            out[i_name], out[g_name] = (zero, "A"), (zero, "S")
        if self.charge_law is not None:
            charge = self.charge_law
            out[c_name] = (jax.jacfwd(lambda v: charge(v, p))(v0), "F")
        else:
            out[c_name] = (zero, "F")
        return out


@dataclasses.dataclass(frozen=True, eq=False)
class Device(AbstractElement):
    """A nonlinear element with named terminals (transistor, user model)."""

    name: str
    terminals: tuple[tuple[str, str], ...]  # (terminal, node)
    current_law: Callable[[dict[str, Any], Mapping[str, Any]], Mapping[str, Any]] | None
    charge_law: Callable[[dict[str, Any], Mapping[str, Any]], Mapping[str, Any]] | None
    params: Mapping[str, Ref]
    junctions: tuple[tuple[str, str], ...] = ()  # (anode terminal, cathode terminal)
    summary: Summary = generic_summary
    kind: str = "device"  # type: ignore[misc]

    @property
    def stores_charge(self):
        return self.charge_law is not None

    @property
    def terminal_names(self) -> tuple[str, ...]:
        return tuple(t for t, _ in self.terminals)

    def node_of(self, terminal: str) -> str:
        return dict(self.terminals)[terminal]

    def nodes(self):
        return tuple(dict.fromkeys(node for _, node in self.terminals))

    def refs(self):
        return dict(self.params)

    def junction_pairs(self):
        return tuple(
            (self.node_of(a), self.node_of(k), f"{self.name} {a}-{k}") for a, k in self.junctions
        )

    def _voltages(self, at: Bias) -> dict[str, Any]:
        return {t: at.v(node) for t, node in self.terminals}

    def _collect(self, what: str, result) -> dict[str, Any]:
        if not isinstance(result, Mapping):
            raise ModelError(
                f"{self.describe()} {what} law returned {type(result).__name__}; "
                "it must return a dict terminal -> value."
            )
        names = self.terminal_names
        for t in result:
            if t not in names:
                raise ModelError(
                    f"{self.describe()} {what} law returned a value for terminal "
                    f"{t!r}, which is not one of its terminals {list(names)}; "
                    "add it to the terminals mapping."
                )
        return {t: _scalar(self, f"{what} at terminal {t!r}", v) for t, v in result.items()}

    def currents(self, at: Bias):
        if self.current_law is None:
            return []
        out = self._collect("current", self.current_law(self._voltages(at), at.local(self.params)))
        return [(at.row(self.node_of(t)), i) for t, i in out.items()]

    def charges(self, at: Bias):
        out = self._collect("charge", self.charge_law(self._voltages(at), at.local(self.params)))
        return [(at.row(self.node_of(t)), q) for t, q in out.items()]

    def _vector_law(self, law, p):
        names = self.terminal_names

        def f(v):
            out = self._collect("law", law(dict(zip(names, v, strict=True)), p))
            return jnp.stack([out.get(t, jnp.zeros_like(v[0])) for t in names])

        return f

    def small_signal(self, at: Bias) -> Quantities:
        names = self.terminal_names
        v0 = jnp.stack([at.v(node) for _, node in self.terminals])
        p = at.local(self.params)
        if self.current_law is not None:
            f = self._vector_law(self.current_law, p)
            i, g = f(v0), jax.jacfwd(f)(v0)
        else:
            i, g = jnp.zeros_like(v0), jnp.zeros((len(names), len(names)), dtype=v0.dtype)
        q = c = None
        if self.charge_law is not None:
            h = self._vector_law(self.charge_law, p)
            q, c = h(v0), jax.jacfwd(h)(v0)
        return self.summary(names, i, g, q, c)
