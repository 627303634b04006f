"""Capture a known-good harness: find which fixture pins are joined and measure each join, so
that a shop with a good harness and no drawing gets a wire list to test the next ones against.

The rows written are measured paths (from the first pin of each net to each other pin), not
physical wires: a splice shows as a star.  Each row keeps its measured resistance and the ambient
it was measured at; a later check moves that to its own ambient with the copper coefficient and
adds the stated captured tolerance (``rig.harness.conductors``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from rig.config.fixture import Bus, FixtureMap
from rig.errors import Problem
from rig.harness.conductors import PathLimit
from rig.harness.continuity import ContinuityCheck, MeasurePort, orientation, run_continuity
from rig.harness.isolation import IsolationResult, discover_groups
from rig.harness.scan import HarnessSettings, island_reader
from rig.harness.wire_list import End, WireRow


@dataclass
class Capture:
    rows: list[WireRow]
    discovery: IsolationResult
    pins: list[str]

    @property
    def readings(self) -> int:
        return len(self.discovery.readings) + len(self.rows)


def capture_pins(fixture: FixtureMap, connectors: list[str] | None = None) -> list[str]:
    """Fixture pins that can go on DMM HI and LO, on ``connectors`` (all when None)."""
    return [
        pin.name
        for pin in fixture.pins.values()
        if {Bus.DMM_HI, Bus.DMM_LO} <= set(pin.relays)
        and (connectors is None or _end(pin.name, pin.connector).connector in connectors)
    ]


def capture_connectors(fixture: FixtureMap) -> list[str]:
    """The connectors a capture can scan: those with a pin on DMM HI and LO, in name order."""
    pins = capture_pins(fixture)
    return sorted({_end(name, fixture.pins[name].connector).connector for name in pins})


def connector_problems(fixture: FixtureMap, connectors: list[str], key: str) -> list[Problem]:
    """One problem per connector asked for that the fixture has no capturable pin on: a
    misspelt or foreign connector would otherwise scan nothing and capture an empty list."""
    known = capture_connectors(fixture)
    return [
        Problem(
            key,
            "",
            f"fixture {fixture.name!r} ({fixture.path.name}) has no connector {name!r} on the "
            f"DMM buses; it has {', '.join(known) or 'none'}",
        )
        for name in connectors
        if name not in known
    ]


def _end(pin: str, connector: str) -> End:
    if connector and pin.startswith(connector + "-"):
        return End(connector, pin[len(connector) + 1 :])
    head, _, tail = pin.rpartition("-")
    return End(head, tail) if head else End(pin, "?")


def capture_harness(
    port: MeasurePort, fixture: FixtureMap, pins: list[str], settings: HarnessSettings
) -> Capture:
    islands: list[tuple[str, ...]] = [(p,) for p in pins]
    _, read = island_reader(port, islands, settings)
    discovery = discover_groups(
        len(pins), read, settings.isolation_ohm, ceiling_ohm=settings.isolation_range_ohm
    )
    rows: list[WireRow] = []
    for number, group in enumerate(discovery.groups, start=1):
        members = [pins[i] for i in sorted(group)]
        first = members[0]
        checks = []
        for other in members[1:]:
            hi, lo, four = orientation(fixture, first, other)
            checks.append(ContinuityCheck(f"N{number}", hi, lo, four, PathLimit(math.inf, 0.0)))
        results = run_continuity(
            port, checks, range_ohm=settings.continuity_range_ohm, nplc=settings.nplc
        )
        leaf = {frozenset((pins[j.a], pins[j.b])): j.r_ohm for j in discovery.joins}
        for result in results:
            value = result.value_ohm
            ends = (result.check.hi, result.check.lo)
            if not math.isfinite(value):
                value = leaf.get(frozenset(ends), math.nan)
            start, end = ends if ends[0] == first else ends[::-1]
            rows.append(
                WireRow(
                    line=0,
                    wire=f"C{len(rows) + 1}",
                    start=_end(start, fixture.pins[start].connector),
                    end=_end(end, fixture.pins[end].connector),
                    net=f"N{number}",
                    measured_ohm=value,
                    measured_at_c=settings.temp_c,
                )
            )
    return Capture(rows, discovery, pins)
