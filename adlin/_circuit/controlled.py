"""Linear controlled sources.

Output terminals ``(a, b)`` follow the two-terminal convention of
`elements`: current flows from a through the source to b, and a voltage
output sets ``v_a - v_b``.  Voltage control senses ``v_c - v_d`` (no current
drawn); current control senses the branch current ``i_<control>`` of another
element that has one (inductor, voltage source, VCVS or CCVS), in that
element's own direction.
"""

from __future__ import annotations

import dataclasses
from typing import ClassVar

from .._errors import ModelError, did_you_mean
from .elements import AbstractElement, _pair
from .values import Ref


def _check_control(owner: AbstractElement, control: str, elements) -> None:
    with_branch = [n for n, e in elements.items() if e.has_branch]
    if control not in elements or not elements[control].has_branch:
        problem = (
            "there is no element of that name"
            if control not in elements
            else f"{elements[control].describe()} has no branch current"
        )
        raise ModelError(
            f"{owner.describe()} is controlled by the current of {control!r}, but {problem}; "
            "current control needs an inductor, voltage source, vcvs or ccvs "
            f"({did_you_mean(control, with_branch)})."
        )


@dataclasses.dataclass(frozen=True, eq=False)
class Vccs(AbstractElement):
    """Current ``gm (v_c - v_d)`` from a through the source to b."""

    kind: ClassVar[str] = "vccs"
    name: str
    a: str
    b: str
    c: str
    d: str
    transconductance: Ref

    def nodes(self):
        return (self.a, self.b, self.c, self.d)

    def connections(self):
        return (self.a, self.b)

    def refs(self):
        return {"transconductance": self.transconductance}

    def currents(self, at):
        return _pair(
            at, self.a, self.b, at.value(self.transconductance) * (at.v(self.c) - at.v(self.d))
        )


@dataclasses.dataclass(frozen=True, eq=False)
class Vcvs(AbstractElement):
    """``v_a - v_b = gain (v_c - v_d)``, branch current ``i_<name>`` entering a."""

    kind: ClassVar[str] = "vcvs"
    name: str
    a: str
    b: str
    c: str
    d: str
    gain: Ref

    @property
    def has_branch(self):
        return True

    def nodes(self):
        return (self.a, self.b, self.c, self.d)

    def connections(self):
        return (self.a, self.b)

    def refs(self):
        return {"gain": self.gain}

    def currents(self, at):
        row = (
            at.branch_row(self.name),
            at.v(self.a) - at.v(self.b) - at.value(self.gain) * (at.v(self.c) - at.v(self.d)),
        )
        return _pair(at, self.a, self.b, at.i(self.name)) + [row]


@dataclasses.dataclass(frozen=True, eq=False)
class Cccs(AbstractElement):
    """Current ``gain * i_<control>`` from a through the source to b."""

    kind: ClassVar[str] = "cccs"
    name: str
    a: str
    b: str
    control: str
    gain: Ref

    def nodes(self):
        return (self.a, self.b)

    def refs(self):
        return {"gain": self.gain}

    def check(self, elements):
        _check_control(self, self.control, elements)

    def currents(self, at):
        return _pair(at, self.a, self.b, at.value(self.gain) * at.i(self.control))


@dataclasses.dataclass(frozen=True, eq=False)
class Ccvs(AbstractElement):
    """``v_a - v_b = r * i_<control>``, branch current ``i_<name>`` entering a."""

    kind: ClassVar[str] = "ccvs"
    name: str
    a: str
    b: str
    control: str
    transresistance: Ref

    @property
    def has_branch(self):
        return True

    def nodes(self):
        return (self.a, self.b)

    def refs(self):
        return {"transresistance": self.transresistance}

    def check(self, elements):
        _check_control(self, self.control, elements)

    def currents(self, at):
        row = (
            at.branch_row(self.name),
            at.v(self.a) - at.v(self.b) - at.value(self.transresistance) * at.i(self.control),
        )
        return _pair(at, self.a, self.b, at.i(self.name)) + [row]
