"""A harness as built, for the virtual bench: the wire list's wires as unit-model parts, with
build faults (pure; no I/O).

Every wire becomes a copper wire of the unit model (so the bench solves its real resistance at the
unit's ambient) between two contact resistances, one at each fixture pin; splices are nodes.  Build
faults change what was built: a wire end landed on the wrong pin, two wire ends swapped, a wire left
off its splice, a wire one standard size smaller than listed.  Damage that the unit model already
knows (open, extra series resistance, two wires touching) becomes its ``Fault``.
"""

from __future__ import annotations

import re
from collections.abc import Collection, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from rig.config.unit_file import Resistor, UnitModel, Wire
from rig.errors import ConfigError, Problem
from rig.faults import Fault
from rig.harness.gauge_hint import smaller_sizes
from rig.harness.wire_list import WireList, WireRow
from rig.quantity import QuantityError, parse_quantity

BUILD_KINDS = ("open", "high", "short", "misplaced", "swap", "missing-splice", "thin")


@dataclass(frozen=True)
class BuildFault:
    """``kind`` on ``wire``; ``other`` is the second wire (short, swap), ``pin`` the wrong pin
    (misplaced: the wire's to-end lands there), ``ohm`` the added resistance (high).  ``thin``:
    the wire is built one standard size smaller than its row lists."""

    kind: str
    wire: str
    other: str = ""
    pin: str = ""
    ohm: float = 0.0

    def __post_init__(self) -> None:
        if self.kind not in BUILD_KINDS:
            raise ValueError(f"unknown build fault {self.kind!r}; expected one of {BUILD_KINDS}")

    @property
    def spec(self) -> str:
        """The spec ``parse_build_fault`` reads back to this fault: what a bench lists."""
        text = f"{self.kind}:{self.wire}" + (f",{self.other}" if self.other else "")
        if self.kind == "misplaced":
            return f"{text}={self.pin}"
        if self.kind == "high":
            return f"{text}={self.ohm:g}ohm"
        return text

    @property
    def same_as(self) -> tuple[str, frozenset[str]]:
        """Its kind and wires, in any order: a second fault alike would change nothing (a
        second open) or undo the first (a swap swapped back)."""
        return self.kind, frozenset(w for w in (self.wire, self.other) if w)


def _node(end_name: str, wire: str, is_splice: bool) -> str:
    return f"splice:{end_name}" if is_splice else f"end:{wire}:{end_name}"


def build_unit(
    wires: WireList,
    faults: Sequence[BuildFault] = (),
    *,
    fixture_path: Path,
    ambient_c: float = 23.0,
    contact_ohm: tuple[float, float] = (0.001, 0.003),
    seed: int = 0,
) -> tuple[UnitModel, list[Fault]]:
    """The unit model of the harness as built, and the faults the unit model applies itself.

    Contact resistances are drawn uniformly from ``contact_ohm`` (invented figures), seeded.
    """
    rng = np.random.default_rng(seed)
    rows = {row.wire: row for row in wires.rows}
    for fault in faults:
        for name in (fault.wire, fault.other):
            if name and name not in rows:
                raise ValueError(f"build fault {fault.kind} names wire {name!r}, not in the list")
    lands = {row.wire: (row.start.name, row.end.name) for row in wires.rows}
    loose: set[str] = set()
    thin: set[str] = set()
    unit_faults: list[Fault] = []
    for fault in faults:
        start, end = lands[fault.wire]
        if fault.kind == "thin":
            thin.add(fault.wire)
        elif fault.kind == "misplaced":
            lands[fault.wire] = (start, fault.pin)
        elif fault.kind == "swap":
            other_start, other_end = lands[fault.other]
            lands[fault.wire] = (start, other_end)
            lands[fault.other] = (other_start, end)
        elif fault.kind == "missing-splice":
            loose.add(fault.wire)
        elif fault.kind == "open":
            unit_faults.append(Fault("open", (fault.wire,)))
        elif fault.kind == "high":
            unit_faults.append(Fault("series", (fault.wire,), fault.ohm))
        elif fault.kind == "short":
            unit_faults.append(Fault("short", (fault.wire, fault.other)))
    unit = UnitModel(
        name=f"harness {wires.path.stem}",
        path=wires.path,
        fixture_path=fixture_path,
        description="a harness built from its wire list (invented contact figures)",
        ambient_c=ambient_c,
    )
    for row in wires.rows:
        nodes = []
        for index, (planned, landed) in enumerate(zip(row.ends, lands[row.wire], strict=True)):
            if planned.is_splice:
                splice_node = _node(planned.name, row.wire, True)
                nodes.append(f"loose:{row.wire}" if row.wire in loose else splice_node)
                continue
            node = _node(landed, row.wire, False)
            r = float(rng.uniform(*contact_ohm))
            unit.resistors[f"contact:{row.wire}:{index}"] = Resistor(
                f"contact:{row.wire}:{index}", landed, node, r
            )
            nodes.append(node)
        gauge, area, length = _copper(row, row.wire in thin)
        unit.wires[row.wire] = Wire(row.wire, nodes[0], nodes[1], area, length, gauge)
    return unit, unit_faults


def _copper(row: WireRow, thin: bool = False) -> tuple[str, float, float]:
    """Gauge, area and length; ``thin``: the next standard size below the listed one, at the
    listed length.  A captured row (no drawing) is built as 0.5 mm2 copper of its resistance."""
    if row.area_mm2 is not None and row.length_m is not None:
        if thin:
            gauge, area = smaller_sizes(row.gauge, row.area_mm2)[0]
            return gauge, area, row.length_m
        return row.gauge, row.area_mm2, row.length_m
    area = 0.5
    length = max((row.measured_ohm or 0.01) * area / (1 / 58.0), 0.01)
    return row.gauge, area, length


def parse_build_fault(spec: str, source: str = "--fault") -> BuildFault:
    """``open:W5``, ``high:W5=0.5ohm``, ``short:W5,W7``, ``swap:W5,W6``, ``misplaced:W5=J3-7``
    (the to-end lands on J3-7), ``missing-splice:W1c``, ``thin:W4`` (one size smaller)."""
    forms = (
        "open:W, high:W=0.5ohm, short:W,W2, swap:W,W2, misplaced:W=PIN, missing-splice:W, thin:W"
    )

    def fail(message: str) -> ConfigError:
        return ConfigError([Problem(source, spec, f"{message}; expected one of {forms}")])

    kind, sep, rest = spec.strip().partition(":")
    if not sep or kind not in BUILD_KINDS or not rest:
        raise fail(f"unknown build fault {spec!r}")
    target, _, value = rest.partition("=")
    wires = [w for w in target.split(",") if w]
    if kind in ("short", "swap"):
        if len(wires) != 2 or value:
            raise fail(f"{kind} names two wires and no value")
        return BuildFault(kind, wires[0], other=wires[1])
    if len(wires) != 1:
        raise fail(f"{kind} names one wire")
    if kind == "misplaced":
        if not value:
            raise fail("misplaced needs the pin the wire's to-end lands on")
        return BuildFault(kind, wires[0], pin=value)
    if kind == "high":
        try:
            ohm = parse_quantity(
                re.sub(r"^([-+]?[\d.]+(?:[eE][-+]?\d+)?)\s*", r"\1 ", value), "ohm"
            )
        except QuantityError as exc:
            raise fail(str(exc)) from None
        if ohm <= 0:
            raise fail("the added resistance must be above 0")
        return BuildFault(kind, wires[0], ohm=ohm)
    if value:
        raise fail(f"{kind} takes no value")
    return BuildFault(kind, wires[0])


def build_fault_problems(
    fault: BuildFault, spec: str, wires: WireList, pins: Collection[str], source: str = "--fault"
) -> list[Problem]:
    """Why ``fault`` cannot be built on this harness and fixture (``pins``), in the words of
    ``spec``; empty when it can.  A fault that would change nothing (a wire shorted to itself, a
    swap of a splice end) is refused too: a bench said to be faulty must be."""
    rows = {row.wire: row for row in wires.rows}
    names = [fault.wire] + ([fault.other] if fault.other else [])
    unknown = [w for w in names if w not in rows]
    if unknown:
        listed = sorted(rows)
        few = ", ".join(listed[:8]) + (" ..." if len(listed) > 8 else "")
        return [
            Problem(source, spec, f"no wire {w!r} in {wires.path.name}; its wires: {few}")
            for w in unknown
        ]
    problems = []
    if fault.other and fault.other == fault.wire:
        problems.append(Problem(source, spec, f"{fault.kind} names wire {fault.wire!r} twice"))
    if fault.kind == "misplaced" and fault.pin not in pins:
        problems.append(
            Problem(source, spec, f"the fixture has no pin {fault.pin!r} to land the wire on")
        )
    if fault.kind in ("misplaced", "swap"):
        for name in names:
            if rows[name].end.is_splice:
                problems.append(
                    Problem(source, spec, f"wire {name}'s to-end is splice {rows[name].end.name}")
                )
    if fault.kind == "missing-splice" and not any(e.is_splice for e in rows[fault.wire].ends):
        problems.append(Problem(source, spec, f"wire {fault.wire} has no splice end"))
    if fault.kind == "thin":
        problems += _thin_problems(rows[fault.wire], spec, source)
    return problems


def _thin_problems(row: WireRow, spec: str, source: str) -> list[Problem]:
    """A wire can be built a size smaller only where its row states a size and length and a
    standard size lies below it."""
    if row.area_mm2 is None or row.length_m is None:
        return [
            Problem(source, spec, f"wire {row.wire} has no gauge and length in the list (captured)")
        ]
    if not smaller_sizes(row.gauge, row.area_mm2):
        return [Problem(source, spec, f"no standard size below {row.gauge} (wire {row.wire})")]
    return []


def parse_build_faults(
    specs: Sequence[str],
    wires: WireList,
    pins: Collection[str],
    source: str = "--fault",
    active: Sequence[BuildFault] = (),
) -> list[BuildFault]:
    """The build faults of ``specs``, checked against the harness, its fixture's ``pins`` and
    the faults already ``active``; raises ``ConfigError`` naming every bad spec at once."""
    faults: list[BuildFault] = []
    problems: list[Problem] = []
    for spec in specs:
        try:
            fault = parse_build_fault(spec, source)
        except ConfigError as exc:
            problems += exc.problems
            continue
        found = build_fault_problems(fault, spec, wires, pins, source)
        alike = [f for f in [*active, *faults] if f.same_as == fault.same_as]
        if not found and alike:
            found = [Problem(source, spec, f"the harness is already built with {alike[0].spec}")]
        problems += found
        faults.append(fault)
    if problems:
        raise ConfigError(problems)
    return faults
