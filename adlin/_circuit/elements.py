"""Circuit elements and their stamps (modified nodal analysis, charge form).

Every element adds to the rows of ``d/dt q(x, p) + f(x, u, p) = 0``:

- a node row of f collects the currents LEAVING the node through the
  element; a node row of q collects the charge the element holds on that node;
- an element with a branch current ``i_<name>`` also owns one branch row.

Sign convention for two-terminal elements ``(a, b)``: the element current
flows from terminal a, through the element, to terminal b.  For a resistor,
capacitor and inductor that is the current driven by ``v_a - v_b > 0``; for a
voltage source it is the current entering its + terminal (a) from the outside
(passive sign convention), so a battery that delivers power has a negative
``i_<name>``; a current source of value I takes I amperes out of node a and
puts them into node b.

Reference: modified nodal analysis of Ho, Ruehli & Brennan, "The modified
nodal approach to network analysis", IEEE Trans. Circuits Syst. 22(6), 1975;
charge-oriented form as in Günther & Feldmann, "CAD-based electric-circuit
modeling in industry", Surv. Math. Ind. 8, 1999.
"""

from __future__ import annotations

import abc
import dataclasses
from collections.abc import Mapping
from typing import Any, ClassVar

from .assembly import Bias, Stamp
from .values import Ref


class AbstractElement(abc.ABC):
    """What the circuit builder needs from an element."""

    kind: ClassVar[str]
    name: str

    @property
    def stores_charge(self) -> bool:
        return False

    @property
    def has_branch(self) -> bool:
        """True if the element adds the unknown ``i_<name>`` and a branch row."""
        return False

    @abc.abstractmethod
    def nodes(self) -> tuple[str, ...]:
        """Every node the element touches (sensing terminals included)."""

    def connections(self) -> tuple[str, ...]:
        """Nodes the element ties together electrically (not sensing terminals)."""
        return self.nodes()

    def refs(self) -> dict[str, Ref]:
        """The element's values, by local name."""
        return {}

    def check(self, elements: Mapping[str, AbstractElement]) -> None:
        """Build-time checks that need the other elements (default: none)."""
        del elements

    @abc.abstractmethod
    def currents(self, at: Bias) -> Stamp:
        """Contributions to f: (row, value) pairs."""

    def charges(self, at: Bias) -> Stamp:
        """Contributions to q: (row, value) pairs."""
        return []

    def junction_pairs(self) -> tuple[tuple[str, str, str], ...]:
        """(anode node, cathode node, label) of each pn junction, for step limiting."""
        return ()

    def small_signal(self, at: Bias) -> dict[str, tuple[Any, str]] | None:
        """Small-signal quantities at a bias, or None for a linear element."""
        return None

    def describe(self) -> str:
        return f"{self.kind} {self.name!r}"


def _pair(at: Bias, a: str, b: str, value) -> Stamp:
    """`value` leaving node a and entering node b."""
    return [(at.row(a), value), (at.row(b), -value)]


class AbstractTwoNode(AbstractElement):
    """A linear element between nodes a and b with one value, named `value_field`."""

    value_field: ClassVar[str]
    a: str
    b: str

    def nodes(self):
        return (self.a, self.b)

    def refs(self):
        return {self.value_field: getattr(self, self.value_field)}


@dataclasses.dataclass(frozen=True, eq=False)
class Resistor(AbstractTwoNode):
    """Linear resistor: current ``(v_a - v_b) / R`` from a to b."""

    kind: ClassVar[str] = "resistor"
    value_field: ClassVar[str] = "resistance"
    name: str
    a: str
    b: str
    resistance: Ref

    def currents(self, at):
        return _pair(at, self.a, self.b, (at.v(self.a) - at.v(self.b)) / at.value(self.resistance))


@dataclasses.dataclass(frozen=True, eq=False)
class Capacitor(AbstractTwoNode):
    """Linear capacitor: charge ``C (v_a - v_b)`` on a, its negative on b."""

    kind: ClassVar[str] = "capacitor"
    value_field: ClassVar[str] = "capacitance"
    name: str
    a: str
    b: str
    capacitance: Ref

    @property
    def stores_charge(self):
        return True

    def currents(self, at):
        return []

    def charges(self, at):
        return _pair(at, self.a, self.b, at.value(self.capacitance) * (at.v(self.a) - at.v(self.b)))


@dataclasses.dataclass(frozen=True, eq=False)
class Inductor(AbstractTwoNode):
    """Linear inductor with branch current ``i_<name>`` from a to b.

    Branch row: flux ``L i`` in q and ``-(v_a - v_b)`` in f, so that
    ``L di/dt = v_a - v_b``.
    """

    kind: ClassVar[str] = "inductor"
    value_field: ClassVar[str] = "inductance"
    name: str
    a: str
    b: str
    inductance: Ref

    @property
    def stores_charge(self):
        return True

    @property
    def has_branch(self):
        return True

    def currents(self, at):
        i = at.i(self.name)
        return _pair(at, self.a, self.b, i) + [
            (at.branch_row(self.name), -(at.v(self.a) - at.v(self.b)))
        ]

    def charges(self, at):
        return [(at.branch_row(self.name), at.value(self.inductance) * at.i(self.name))]


@dataclasses.dataclass(frozen=True, eq=False)
class VoltageSource(AbstractTwoNode):
    """Independent voltage source ``v_a - v_b = V``; ``i_<name>`` enters at a."""

    kind: ClassVar[str] = "voltage source"
    value_field: ClassVar[str] = "voltage"
    name: str
    a: str
    b: str
    voltage: Ref

    @property
    def has_branch(self):
        return True

    def currents(self, at):
        return _pair(at, self.a, self.b, at.i(self.name)) + [
            (at.branch_row(self.name), at.v(self.a) - at.v(self.b) - at.value(self.voltage))
        ]


@dataclasses.dataclass(frozen=True, eq=False)
class CurrentSource(AbstractTwoNode):
    """Independent current source: I flows from a, through the source, to b."""

    kind: ClassVar[str] = "current source"
    value_field: ClassVar[str] = "current"
    name: str
    a: str
    b: str
    current: Ref

    def currents(self, at):
        return _pair(at, self.a, self.b, at.value(self.current))
