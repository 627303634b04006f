"""Node names of a unit file that look like slips of the keyboard.  Pure: no I/O.

Any name that is not a fixture pin is an internal node of the unit, so ``"O_SIGG"`` for the pin
``O_SIG``, or ``"E_5v"`` for ``E_5V``, is valid to the loader: the part is simply not connected
where the engineer meant, and the virtual bench simulates an open sensor.  These are warnings, not
errors (internal nodes are allowed): a node that differs from a fixture pin only by letter case,
and an internal node that only one part touches (nothing can flow through it), with the pin it is
one edit from where there is one.  An internal node one edit from a pin that joins two parts is
left alone: ``"T1x"`` between a lead and its sensor is a name of choice, not a slip.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable, Iterator
from dataclasses import dataclass

from rig.config.unit_file import Potentiometer, RatiometricSensor, UnitModel

GROUND_NAMES = frozenset({"0", "gnd"})
"""The solver's reference node, in any case (docs/unit-file.md, Nodes)."""


@dataclass(frozen=True)
class NodeUse:
    """One part touching one node, and the key that says so."""

    node: str
    part: str
    """The part as the file names it: ``wires.signal``, ``controller.sources.reference``."""
    key: str
    """The key the node is written under: ``wires.signal.between``."""


def node_uses(unit: UnitModel) -> Iterator[NodeUse]:
    """Every node each part of ``unit`` touches, by the key that names it."""
    two_ended = [
        *(("wires", name, part.a, part.b) for name, part in unit.wires.items()),
        *(("resistors", name, part.a, part.b) for name, part in unit.resistors.items()),
        *(("capacitors", name, part.a, part.b) for name, part in unit.capacitors.items()),
    ]
    for group, name, a, b in two_ended:
        for node in (a, b):
            yield NodeUse(node, f"{group}.{name}", f"{group}.{name}.between")
    for name, sensor in unit.sensors.items():
        part = f"sensors.{name}"
        if isinstance(sensor, RatiometricSensor):
            for key in ("supply", "output", "ground"):
                yield NodeUse(getattr(sensor, key), part, f"{part}.{key}")
            continue
        for node in (sensor.a, sensor.b):
            yield NodeUse(node, part, f"{part}.between")
        if isinstance(sensor, Potentiometer):
            yield NodeUse(sensor.wiper, part, f"{part}.wiper")
    if unit.controller is not None:
        for source in unit.controller.sources:
            part = f"controller.sources.{source.name}"
            yield NodeUse(source.node, part, f"{part}.node")
            yield NodeUse(unit.controller.ground, part, "controller.ground")
    if unit.probe is not None:
        for key in ("force_hi", "sense_hi", "force_lo", "sense_lo"):
            yield NodeUse(getattr(unit.probe, key), "reference_probe", f"reference_probe.{key}")


def node_warnings(unit: UnitModel, pins: Iterable[str]) -> list[tuple[str, str]]:
    """Nodes that look like a misspelt fixture pin or touch one part only, as (key, message),
    once per node at the first key that names it."""
    pin_names = set(pins)
    by_node: dict[str, list[NodeUse]] = defaultdict(list)
    for use in node_uses(unit):
        by_node[use.node].append(use)
    found = []
    for node, uses in by_node.items():
        if node in pin_names or node.lower() in GROUND_NAMES or node == "?":
            continue  # "?": a node the loader reported missing
        parts = sorted({use.part for use in uses})
        meant = _meant_pin(node, pin_names)
        by_case = meant is not None and meant.lower() == node.lower()
        if len(parts) > 1 and not by_case:
            continue  # an internal node that joins parts ("T1x" between a lead and a sensor)
        words = []
        if by_case:
            words.append(
                f"node {node!r} differs from fixture pin {meant!r} only in letter case, so it is "
                "an internal node of the unit, not the pin (names are case-sensitive)"
            )
        if len(parts) == 1:
            words.append(
                f"{'it' if words else f'node {node!r}'} is touched by {parts[0]} alone, so "
                "nothing can flow through it: that part is left unconnected there"
            )
        advice = f"; did you mean {meant!r}?" if meant is not None else ""
        found.append((uses[0].key, "; ".join(words) + advice))
    return found


def _meant_pin(node: str, pins: set[str]) -> str | None:
    """The one fixture pin ``node`` is a slip of (letter case, or one letter added, dropped,
    changed or two swapped), or None where there is none or more than one."""
    same = [p for p in pins if p.lower() == node.lower()]
    close = same or [p for p in pins if _one_edit(node.lower(), p.lower())]
    return close[0] if len(close) == 1 else None


def _one_edit(a: str, b: str) -> bool:
    """Whether ``a`` and ``b`` are equal or one edit apart (Damerau: an insertion, deletion,
    substitution or swap of two neighbouring letters)."""
    if a == b:
        return True
    if abs(len(a) - len(b)) > 1:
        return False
    if len(a) == len(b):
        diff = [i for i, (x, y) in enumerate(zip(a, b, strict=True)) if x != y]
        if len(diff) == 1:
            return True
        i = diff[0]
        return len(diff) == 2 and diff[1] == i + 1 and a[i] == b[i + 1] and a[i + 1] == b[i]
    short, long_ = (a, b) if len(a) < len(b) else (b, a)
    return any(long_[:i] + long_[i + 1 :] == short for i in range(len(long_)))
