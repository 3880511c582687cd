"""Build-time checks of a circuit's graph and names, and its junction table."""

from __future__ import annotations

from collections.abc import Sequence

from .._errors import FloatingNodeError, ModelError
from .._system import Junction
from .assembly import Layout
from .elements import AbstractElement
from .values import ValueTable, junction_limits

# Used for a junction whose element has no such parameter (Shockley diode
# defaults of adlin.devices).
JUNCTION_DEFAULTS = {
    "saturation_current": 1e-14,
    "emission_coefficient": 1.0,
    "temperature": 300.15,
}


def check_connected(
    name: str, elements: Sequence[AbstractElement], nodes: Sequence[str], ground: str
) -> None:
    """Every node must be tied to ground through some chain of elements.

    Union-find over the terminals each element ties together; the sensing
    terminals of controlled sources draw no current and do not count.  A node
    outside ground's group has no equation that fixes its potential.
    """
    parent: dict[str, str] = {}

    def root(node):
        while parent.setdefault(node, node) != node:
            node = parent[node]
        return node

    for element in elements:
        tied = element.connections()
        for other in tied[1:]:
            parent[root(other)] = root(tied[0])
    if ground not in parent:
        raise FloatingNodeError(
            f"no element of circuit {name!r} connects to ground {ground!r}; connect at least "
            "one node to ground (e.g. the minus side of the supply)."
        )
    floating = [n for n in nodes if root(n) != root(ground)]
    if floating:
        raise FloatingNodeError(
            f"nodes {floating} are not connected to ground {ground!r} through any element "
            "(sensing terminals of controlled sources do not count); add a path to ground, "
            "e.g. a large resistor."
        )


def check_names(layout: Layout, values: ValueTable) -> None:
    """Inputs and parameters must not take the name of an unknown."""
    taken = {f"v_{node}": f"the voltage unknown of node {node!r}" for node in layout.nodes}
    taken.update(
        {f"i_{e}": f"the branch current unknown of element {e!r}" for e in layout.branches}
    )
    for kind, names in (("input", values.inputs), ("parameter", values.params)):
        for name in names:
            if name in taken:
                raise ModelError(
                    f"{kind} {name!r} has the same name as {taken[name]}; rename "
                    f"the {kind} (e.g. {name + '_src'!r}) or the node."
                )


def junction_table(
    elements: Sequence[AbstractElement], layout: Layout, values: ValueTable
) -> tuple[Junction, ...]:
    """One `Junction` per pn junction, its limits from the parameter defaults."""
    out = []
    for element in elements:
        refs = element.refs()
        for anode, cathode, label in element.junction_pairs():
            if anode == cathode:
                continue  # a shorted junction never needs limiting
            vals = {
                k: (values.default(refs[k]) if k in refs else d)
                for k, d in JUNCTION_DEFAULTS.items()
            }
            bad = [k for k, v in vals.items() if not v > 0]
            if bad:
                raise ModelError(
                    f"junction {label!r} needs a positive {bad[0]} (default value "
                    f"{vals[bad[0]]!r}) to set its Newton step limits."
                )
            nvt, vcrit = junction_limits(
                vals["saturation_current"], vals["emission_coefficient"], vals["temperature"]
            )
            out.append(
                Junction(
                    anode=layout.unknown_of_node(anode),
                    cathode=layout.unknown_of_node(cathode),
                    thermal_voltage=nvt,
                    critical_voltage=vcrit,
                    label=label,
                )
            )
    return tuple(out)
