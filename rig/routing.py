"""Routing: from "measure between these pins" to a set of relays, and the interlocks that guard it.

Interlocks are checked on the relay set itself, so the same check guards the planner and any state
read back from the box: a bus may hold at most one pin (two pins on one bus would short them through
the bus); supply + and - never on the same pin; a pin never on HI and LO (or both sense buses) at
once unless the step is a zero check; never more relays closed than the fixture's closure limit.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable
from dataclasses import dataclass

from rig.config.fixture import Bus, FixtureMap, describe_relay
from rig.errors import InterlockError


@dataclass(frozen=True)
class Route:
    """Which pin goes on which bus for one measurement; ``zero_check`` allows HI and LO on a pin."""

    joins: tuple[tuple[str, Bus], ...]
    zero_check: bool = False
    ganged: bool = False
    """Several pins on DMM HI and on DMM LO at once, tied on purpose (harness isolation by
    groups); the other interlocks still hold and the sense and supply buses keep one pin."""

    @staticmethod
    def dmm(hi: str, lo: str, *, zero_check: bool = False) -> Route:
        return Route(((hi, Bus.DMM_HI), (lo, Bus.DMM_LO)), zero_check)

    @staticmethod
    def four_wire(force_hi: str, sense_hi: str, force_lo: str, sense_lo: str) -> Route:
        return Route(
            (
                (force_hi, Bus.DMM_HI),
                (sense_hi, Bus.SENSE_HI),
                (force_lo, Bus.DMM_LO),
                (sense_lo, Bus.SENSE_LO),
            )
        )

    @staticmethod
    def ganged_dmm(hi: Iterable[str], lo: Iterable[str]) -> Route:
        """Every pin of ``hi`` on DMM HI and every pin of ``lo`` on DMM LO."""
        joins = [(p, Bus.DMM_HI) for p in hi] + [(p, Bus.DMM_LO) for p in lo]
        return Route(tuple(joins), ganged=True)

    @staticmethod
    def supply(pos: str, neg: str) -> Route:
        return Route(((pos, Bus.SUPPLY_POS), (neg, Bus.SUPPLY_NEG)))

    def __add__(self, other: Route) -> Route:
        return Route(
            self.joins + other.joins,
            self.zero_check or other.zero_check,
            self.ganged or other.ganged,
        )


def relays_for(fixture: FixtureMap, route: Route) -> frozenset[int]:
    """The relays a route needs; a pin or bus the fixture lacks is an ``InterlockError``."""
    relays = set()
    for pin, bus in route.joins:
        if pin not in fixture.pins:
            raise InterlockError(f"pin {pin!r} is not in fixture {fixture.name!r}")
        relay = fixture.relay_for(pin, bus)
        if relay is None:
            raise InterlockError(
                f"fixture {fixture.name!r} has no relay joining {pin} to {bus.value}"
            )
        relays.add(relay)
    return frozenset(relays)


def interlock_violations(
    fixture: FixtureMap, relays: Iterable[int], *, zero_check: bool = False, ganged: bool = False
) -> list[str]:
    """Every interlock a set of closed relays breaks, in words; empty when it is safe."""
    relays = frozenset(relays)
    owner = fixture.relay_owner()
    problems: list[str] = []
    unknown = sorted(r for r in relays if r not in owner)
    if unknown:
        problems.append(f"relays {unknown} are not in fixture {fixture.name!r}")
    if fixture.max_closed and len(relays) > fixture.max_closed:
        problems.append(
            f"{len(relays)} relays closed at once; the closure limit is {fixture.max_closed}"
        )
    on_bus: dict[Bus, list[int]] = defaultdict(list)
    buses_of_pin: dict[str, dict[Bus, int]] = defaultdict(dict)
    for relay in sorted(relays):
        if relay in owner:
            pin, bus = owner[relay]
            on_bus[bus].append(relay)
            buses_of_pin[pin][bus] = relay
    for bus, members in on_bus.items():
        if len(members) > 1 and not (ganged and bus in (Bus.DMM_HI, Bus.DMM_LO)):
            names = ", ".join(describe_relay(fixture, r) for r in members)
            problems.append(f"two pins on bus {bus.value} would be shorted together: {names}")
    for pin, buses in buses_of_pin.items():
        if Bus.SUPPLY_POS in buses and Bus.SUPPLY_NEG in buses:
            problems.append(
                f"supply + and - both on pin {pin} "
                f"(relays {buses[Bus.SUPPLY_POS]} and {buses[Bus.SUPPLY_NEG]})"
            )
        for hi, lo in ((Bus.DMM_HI, Bus.DMM_LO), (Bus.SENSE_HI, Bus.SENSE_LO)):
            if hi in buses and lo in buses and not zero_check:
                problems.append(
                    f"pin {pin} on {hi.value} and {lo.value} at once "
                    f"(relays {buses[hi]} and {buses[lo]}); only a zero check may do that"
                )
    return problems


def check_interlocks(
    fixture: FixtureMap, relays: Iterable[int], *, zero_check: bool = False, ganged: bool = False
) -> None:
    """Raise ``InterlockError`` naming pins and relays when ``relays`` may not be closed."""
    problems = interlock_violations(fixture, relays, zero_check=zero_check, ganged=ganged)
    if problems:
        raise InterlockError("refused before any relay moved: " + "; ".join(problems))


def plan_relays(fixture: FixtureMap, route: Route) -> frozenset[int]:
    """The checked relay set for a route."""
    relays = relays_for(fixture, route)
    check_interlocks(fixture, relays, zero_check=route.zero_check, ganged=route.ganged)
    return relays


def relay_operations(path: Iterable[frozenset[int]], start: frozenset[int] = frozenset()) -> int:
    """How many relay operations (opens plus closes) a sequence of relay sets costs."""
    ops = 0
    current = start
    for relays in path:
        ops += len(current ^ relays)
        current = relays
    return ops + len(current)
