"""The circuit as data: named elements between named nodes, checked as they are added.

A ``Circuit`` only records what is connected to what and with which value; solving lives in
``rig.circuit.mna``.  Values can change freely (``set_value``, ``set_switch``) without touching the
topology, so the solver keeps its compiled index arrays until an element is added or removed.
"""

from __future__ import annotations

import enum
import math
import numbers
from collections.abc import Mapping
from dataclasses import dataclass, replace
from types import MappingProxyType

import numpy as np

from rig.errors import CircuitError

GROUND = "0"
"""The reference node.  ``"0"`` and ``"gnd"`` (any case) both name it."""

_GROUND_ALIASES = frozenset({"0", "gnd"})


class Kind(enum.StrEnum):
    """What an element is; decides how it is stamped and what its value means."""

    RESISTOR = "resistor"  # value: resistance in ohm
    VSOURCE = "vsource"  # value: V(pos) - V(neg) in volt
    ISOURCE = "isource"  # value: current from pos through the source to neg, in ampere
    VCVS = "vcvs"  # value: voltage gain (dimensionless)
    SWITCH = "switch"  # value: the resistance now in effect (r_on_ohm or r_off_ohm)


@dataclass(frozen=True)
class Element:
    """One element.  ``nodes`` are canonical names (ground is always ``GROUND``).

    Node order: resistor/switch ``(a, b)``; sources ``(pos, neg)``; VCVS
    ``(pos, neg, ctrl_pos, ctrl_neg)``.  Only switches use ``closed`` and the two resistances.
    """

    name: str
    kind: Kind
    nodes: tuple[str, ...]
    value: float
    closed: bool | None = None
    r_on_ohm: float | None = None
    r_off_ohm: float | None = None


def canonical_node(node: object) -> str:
    """Return the name the solver uses for ``node``: ground aliases become ``GROUND``."""
    if not isinstance(node, str) or not node.strip():
        raise CircuitError(f"node name must be a non-empty string, got {node!r}")
    if node.strip().lower() in _GROUND_ALIASES:
        return GROUND
    return node


def is_ground(node: str) -> bool:
    """True when ``node`` names the reference node."""
    return node.strip().lower() in _GROUND_ALIASES


def check_value(name: str, kind: Kind, value: object, what: str = "value") -> float:
    """Return ``value`` as a float or raise ``CircuitError`` naming the element and the rule."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise CircuitError(
            f"element {name!r} ({kind.value}): {what} must be a real number, got {value!r}"
        )
    number = float(value)
    if not math.isfinite(number):
        raise CircuitError(
            f"element {name!r} ({kind.value}): {what} must be finite, got {number!r}"
        )
    if kind in (Kind.RESISTOR, Kind.SWITCH) and number <= 0.0:
        raise CircuitError(
            f"element {name!r} ({kind.value}): {what} must be a resistance > 0 ohm, got {number!r}"
        )
    return number


class Circuit:
    """A linear DC circuit: resistors, switches, independent sources and VCVS between nodes."""

    def __init__(self) -> None:
        self._elements: dict[str, Element] = {}
        self._view: Mapping[str, Element] = MappingProxyType(self._elements)
        self._nodes: list[str] | None = None
        # Filled by rig.circuit.mna with its compiled topology; dropped on add/remove.
        self._compiled: object | None = None

    # -- building ---------------------------------------------------------------------------

    def resistor(self, name: str, a: str, b: str, r_ohm: float) -> None:
        """Add a resistor of ``r_ohm`` (> 0) between ``a`` and ``b``."""
        self._add(name, Kind.RESISTOR, (a, b), r_ohm)

    def vsource(self, name: str, pos: str, neg: str, v: float) -> None:
        """Add an ideal voltage source holding ``V(pos) - V(neg) = v``."""
        self._add(name, Kind.VSOURCE, (pos, neg), v)

    def isource(self, name: str, pos: str, neg: str, i_a: float) -> None:
        """Add an ideal current source; ``i_a`` flows from ``pos`` through it to ``neg``.

        SPICE convention: a positive ``i_a`` is drawn out of node ``pos`` and pushed into ``neg``.
        """
        self._add(name, Kind.ISOURCE, (pos, neg), i_a)

    def vcvs(
        self, name: str, pos: str, neg: str, ctrl_pos: str, ctrl_neg: str, gain: float
    ) -> None:
        """Add a voltage-controlled voltage source: ``V(pos)-V(neg) = gain*(V(cp)-V(cn))``."""
        self._add(name, Kind.VCVS, (pos, neg, ctrl_pos, ctrl_neg), gain)

    def switch(
        self,
        name: str,
        a: str,
        b: str,
        closed: bool,
        r_on_ohm: float = 0.05,
        r_off_ohm: float = 1e9,
    ) -> None:
        """Add a relay contact: ``r_on_ohm`` when closed, ``r_off_ohm`` when open.

        An open switch still conducts a little (``r_off_ohm``) by design, so it never leaves a node
        floating: that matches a real contact's insulation resistance.
        """
        self._check_new_name(name)
        on = check_value(name, Kind.SWITCH, r_on_ohm, "r_on_ohm")
        off = check_value(name, Kind.SWITCH, r_off_ohm, "r_off_ohm")
        if not on < off:
            raise CircuitError(
                f"element {name!r} (switch): r_on_ohm must be below r_off_ohm, "
                f"got r_on_ohm={on!r}, r_off_ohm={off!r}"
            )
        state = _check_closed(name, closed)
        nodes = tuple(canonical_node(n) for n in (a, b))
        self._store(
            Element(
                name,
                Kind.SWITCH,
                nodes,
                on if state else off,
                closed=state,
                r_on_ohm=on,
                r_off_ohm=off,
            )
        )

    # -- changing values (topology kept) ------------------------------------------------------

    def set_value(self, name: str, value: float) -> None:
        """Change the value of a resistor (ohm), source (V or A) or VCVS (gain)."""
        element = self._get(name)
        if element.kind is Kind.SWITCH:
            raise CircuitError(
                f"element {name!r} is a switch: change it with set_switch(name, closed)"
            )
        self._elements[name] = replace(element, value=check_value(name, element.kind, value))

    def set_switch(self, name: str, closed: bool) -> None:
        """Open or close a switch."""
        element = self._get(name)
        if element.kind is not Kind.SWITCH:
            raise CircuitError(
                f"element {name!r} is a {element.kind.value}, not a switch: use set_value"
            )
        state = _check_closed(name, closed)
        assert element.r_on_ohm is not None and element.r_off_ohm is not None
        value = element.r_on_ohm if state else element.r_off_ohm
        self._elements[name] = replace(element, closed=state, value=value)

    def remove(self, name: str) -> None:
        """Remove an element; nodes left with no element disappear."""
        self._get(name)
        del self._elements[name]
        self._topology_changed()

    def copy(self) -> Circuit:
        """An independent copy (elements are immutable, so the compiled topology is shared)."""
        other = Circuit()
        other._elements.update(self._elements)
        other._nodes = None if self._nodes is None else list(self._nodes)
        other._compiled = self._compiled
        return other

    # -- reading ------------------------------------------------------------------------------

    @property
    def nodes(self) -> list[str]:
        """Non-ground nodes in order of first use (the order of the solver's unknowns)."""
        if self._nodes is None:
            seen: dict[str, None] = {}
            for element in self._elements.values():
                for node in element.nodes:
                    if node != GROUND:
                        seen.setdefault(node, None)
            self._nodes = list(seen)
        return list(self._nodes)

    @property
    def elements(self) -> Mapping[str, Element]:
        """Read-only live view: element name -> ``Element``."""
        return self._view

    def has_element(self, name: str) -> bool:
        return name in self._elements

    def __len__(self) -> int:
        return len(self._elements)

    def __repr__(self) -> str:
        return f"Circuit({len(self._elements)} elements, {len(self.nodes)} nodes)"

    # -- internals ----------------------------------------------------------------------------

    def _add(self, name: str, kind: Kind, nodes: tuple[str, ...], value: object) -> None:
        self._check_new_name(name)
        number = check_value(name, kind, value)
        canonical = tuple(canonical_node(n) for n in nodes)
        self._store(Element(name, kind, canonical, number))

    def _check_new_name(self, name: object) -> None:
        if not isinstance(name, str) or not name.strip():
            raise CircuitError(f"element name must be a non-empty string, got {name!r}")
        if name in self._elements:
            existing = self._elements[name]
            raise CircuitError(
                f"duplicate element name {name!r}: already used by a {existing.kind.value} "
                f"between {', '.join(existing.nodes)}"
            )

    def _store(self, element: Element) -> None:
        self._elements[element.name] = element
        self._topology_changed()

    def _get(self, name: str) -> Element:
        try:
            return self._elements[name]
        except (KeyError, TypeError):
            raise CircuitError(_unknown(name, self._elements)) from None

    def _topology_changed(self) -> None:
        self._nodes = None
        self._compiled = None


def _check_closed(name: str, closed: object) -> bool:
    if not isinstance(closed, bool | np.bool_):
        raise CircuitError(
            f"element {name!r} (switch): closed must be True or False, got {closed!r}"
        )
    return bool(closed)


def _unknown(name: object, known: Mapping[str, object]) -> str:
    """Message for an unknown element name, listing a few that exist."""
    names = list(known)
    shown = ", ".join(repr(n) for n in names[:8]) + (", ..." if len(names) > 8 else "")
    return f"no element named {name!r} in the circuit (elements: {shown or 'none'})"
