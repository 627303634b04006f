"""The fixture map: which relay joins which pin to which instrument bus.

A fixture is the board the unit under test is plugged into.  Each named pin can be switched onto
the DMM HI and LO buses, the 4-wire sense buses and the supply + and - buses, each through a
relay of
its own.  Routing and interlocks (``rig.routing``) and the virtual bench both read this map.
"""

from __future__ import annotations

import enum
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import TYPE_CHECKING

from rig.config.reader import TomlDoc, load_named

if TYPE_CHECKING:
    from rig.config.unit_file import UnitModel


class Bus(enum.Enum):
    """The instrument buses a fixture relay can join a pin to."""

    DMM_HI = "dmm_hi"
    DMM_LO = "dmm_lo"
    SENSE_HI = "sense_hi"
    SENSE_LO = "sense_lo"
    SUPPLY_POS = "supply_pos"
    SUPPLY_NEG = "supply_neg"

    @property
    def is_source(self) -> bool:
        """Buses that drive current into the unit (the supply; the DMM drives only in ohms)."""
        return self in (Bus.SUPPLY_POS, Bus.SUPPLY_NEG)


@dataclass(frozen=True)
class FixturePin:
    name: str
    relays: dict[Bus, int]
    connector: str = ""
    is_ground: bool = False
    bench_ground: bool = False
    """True for the pin on the bench's own ground bar: the virtual bench ties it to node 0."""


@dataclass
class FixtureMap:
    """A loaded fixture.  Its pins are read-only once loaded: ``relay_owner`` is worked out once."""

    name: str
    path: Path
    relay_count: int
    max_closed: int
    pins: dict[str, FixturePin] = field(default_factory=dict)
    rated_operations: int = 10_000_000

    def relay_owner(self) -> Mapping[int, tuple[str, Bus]]:
        """Each relay number -> the (pin, bus) it joins."""
        return self._relay_owner

    @cached_property
    def _relay_owner(self) -> dict[int, tuple[str, Bus]]:
        # Kept once: routing asks for it on every route and every interlock check, and rebuilding
        # it over all pins each time made checking a 256-pin plan twice as slow per step.
        return {r: (pin.name, bus) for pin in self.pins.values() for bus, r in pin.relays.items()}

    def relay_for(self, pin: str, bus: Bus) -> int | None:
        found = self.pins.get(pin)
        return None if found is None else found.relays.get(bus)

    @property
    def ground_pins(self) -> list[str]:
        return [p.name for p in self.pins.values() if p.is_ground]


def load_fixture(path: Path | str) -> FixtureMap:
    """Read and validate a fixture map; raises ``ConfigError`` listing every problem."""
    doc = TomlDoc(Path(path), kind="a fixture file (.toml)")
    fixture = parse_fixture(doc)
    doc.raise_if_problems()
    return fixture


def fixture_of(unit: UnitModel) -> FixtureMap:
    """The fixture map a unit file names; where that file cannot be read (not there, a folder),
    the problem is put at ``[unit].fixture`` in the unit file, the key to fix."""
    return load_named(
        load_fixture,
        unit.fixture_path,
        unit.fixture_written,
        lambda message: unit.problem("unit.fixture", message),
    )


def parse_fixture(doc: TomlDoc) -> FixtureMap:
    root = doc.root
    head = root.table("fixture", required=True)
    name = head.string("name", "fixture") if head else "fixture"
    relay_count = head.integer("relay_count", minimum=1) if head else 0
    max_closed = head.integer("max_closed", minimum=1) if head else 0
    rated = head.integer("rated_operations", 10_000_000, minimum=1) if head else 10_000_000
    if head:
        head.reject_unknown()
    pins: dict[str, FixturePin] = {}
    used: dict[int, str] = {}
    for pin_name, section in root.named_tables("pins"):
        relays: dict[Bus, int] = {}
        for bus in Bus:
            number = section.integer(bus.value, None, minimum=1)
            if number is None:
                continue
            if relay_count and number > relay_count:
                section.problem(
                    bus.value, f"relay {number} does not exist; the box has 1..{relay_count}"
                )
                continue
            owner = f"{pin_name}.{bus.value}"
            if number in used:
                section.problem(bus.value, f"relay {number} is already used by pins.{used[number]}")
                continue
            used[number] = owner
            relays[bus] = number
        pin = FixturePin(
            name=pin_name,
            relays=relays,
            connector=section.string("connector", ""),
            is_ground=section.boolean("ground", False),
            bench_ground=section.boolean("bench_ground", False),
        )
        if pin.bench_ground:
            pin = FixturePin(pin.name, pin.relays, pin.connector, True, True)
        section.reject_unknown()
        pins[pin_name] = pin
    if not pins:
        root.problem("pins", "no pins defined; expected [pins.NAME] tables")
    if sum(p.bench_ground for p in pins.values()) > 1:
        root.problem("pins", "more than one pin has bench_ground = true; expected one")
    root.reject_unknown()
    return FixtureMap(
        name=name or "fixture",
        path=doc.path,
        relay_count=relay_count or 0,
        max_closed=max_closed or 0,
        pins=pins,
        rated_operations=rated,
    )


def describe_relay(fixture: FixtureMap, relay: int) -> str:
    """'relay 7 (S_SIG to dmm_hi)': how messages name a relay."""
    owner = fixture.relay_owner().get(relay)
    return f"relay {relay}" if owner is None else f"relay {relay} ({owner[0]} to {owner[1].value})"
