"""Export a circuit as a SPICE netlist for an independent check with ngspice.

SPICE folds names to lower case and gives the first letter of an element name a meaning, so rig's
names are mapped to safe, unique SPICE names; the mapping is public (``spice_names``) so results
can be read back under rig's names.  A switch is written as the resistor it is in its present state.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from rig.circuit.netlist import GROUND, Circuit, Kind

_PREFIX = {
    Kind.RESISTOR: "r",
    Kind.SWITCH: "r",
    Kind.VSOURCE: "v",
    Kind.ISOURCE: "i",
    Kind.VCVS: "e",
}
_UNSAFE = re.compile(r"[^a-z0-9_]")


@dataclass(frozen=True)
class SpiceNames:
    """rig name -> SPICE name, for nodes (ground is ``"0"``) and for elements."""

    nodes: dict[str, str]
    elements: dict[str, str]


def _safe(name: str) -> str:
    return _UNSAFE.sub("_", name.lower())


def spice_names(circuit: Circuit) -> SpiceNames:
    """Unique lower-case SPICE names for every node and element of ``circuit``."""
    taken: set[str] = {"0"}
    nodes: dict[str, str] = {GROUND: "0"}
    for node in circuit.nodes:
        nodes[node] = _unique("n_" + _safe(node), taken)
    elements: dict[str, str] = {}
    for name, element in circuit.elements.items():
        elements[name] = _unique(_PREFIX[element.kind] + "_" + _safe(name), taken)
    return SpiceNames(nodes, elements)


def _unique(candidate: str, taken: set[str]) -> str:
    name, k = candidate, 1
    while name in taken:
        k += 1
        name = f"{candidate}_{k}"
    taken.add(name)
    return name


def _num(value: float) -> str:
    """A float as SPICE reads it back exactly (17 significant digits, no scale suffix)."""
    return format(float(value), ".17g")


def to_spice(circuit: Circuit, title: str = "rig") -> str:
    """A netlist that ``ngspice -b`` runs as a DC operating point (``.op``)."""
    names = spice_names(circuit)
    node = names.nodes
    safe_title = " ".join(title.split()) or "rig"
    lines = [safe_title, "* written by rig.circuit.spice; rig name -> SPICE name in comments"]
    for rig_node, spice_node in node.items():
        if rig_node != GROUND:
            lines.append(f"* node {rig_node!r} = {spice_node}")
    for name, element in circuit.elements.items():
        ref = names.elements[name]
        ends = " ".join(node[n] for n in element.nodes)
        if element.kind is Kind.SWITCH:
            state = "closed" if element.closed else "open"
            lines.append(f"* switch {name!r} {state}")
            lines.append(f"{ref} {ends} {_num(element.value)}")
        elif element.kind in (Kind.VSOURCE, Kind.ISOURCE):
            lines.append(f"* {element.kind.value} {name!r}")
            lines.append(f"{ref} {ends} DC {_num(element.value)}")
        else:
            lines.append(f"* {element.kind.value} {name!r}")
            lines.append(f"{ref} {ends} {_num(element.value)}")
    lines += [".op", ".end", ""]
    return "\n".join(lines)
