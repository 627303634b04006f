"""Harnesses on the virtual bench: invented wire lists of any size, a fixture for them, the bench,
and a direct port onto the same circuit for runs where the sockets would only add time.

Every figure here is invented for testing: connector names, gauges, lengths, contact resistances.
Each fixture pin gets DMM HI and LO relays (isolation may put any pin on either side) and one sense
relay: from-pins sense HI, to-pins sense LO, so every continuity reading is 4-wire.  128 two-pin
nets need 768 relays and at most 128 closed at once, within one box of up to 999 relays and within
the 1024-byte command line (a SET of 128 three-digit relays is about 520 bytes).
"""

from __future__ import annotations

import math
import time
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from drivers.base import MeterFunction
from rig.config.fixture import FixtureMap, load_fixture
from rig.config.unit_file import ReferenceProbe, UnitModel
from rig.faults import Fault
from rig.harness.as_built import BuildFault, build_unit, parse_build_faults
from rig.harness.wire_list import WireList, load_wire_list
from rig.routing import Route, plan_relays
from rig.sim.bench import VirtualBench
from rig.sim.circuit_probe import CircuitProbe
from rig.sim.control import SOURCE
from rig.sim.probe import SupplySettings
from rig.sim.sim_dmm import OVERRANGE_FACTOR, SPECS
from rig.sim.timing import BenchClock, Timing
from rig.steps.base import Reading
from rig.steps.context import ConnectThenMeasure

GAUGES = ("0.35 mm2", "0.5 mm2", "0.75 mm2", "20 AWG", "18 AWG", "16 AWG")


def invented_wire_list(nets: int, *, seed: int = 0, splices: int = 0) -> str:
    """CSV text of ``nets`` two-pin nets from connector A to connector B (plus ``splices`` nets
    of three pins joined at a splice, from A to B and C).  Values invented."""
    rng = np.random.default_rng(seed)
    lines = [
        "# Invented wire list for tests; gauges and lengths are not from any real harness.",
        "wire,net,from_connector,from_pin,to_connector,to_pin,gauge,length_m,colour",
    ]
    for i in range(1, nets + 1):
        gauge = GAUGES[int(rng.integers(len(GAUGES)))]
        length = round(float(rng.uniform(0.3, 3.0)), 2)
        if i <= splices:
            lines.append(f"W{i}a,N{i},A,{i},SP{i},,{gauge},{length / 2:g},red")
            lines.append(f"W{i}b,N{i},SP{i},,B,{i},{gauge},{length / 2:g},red")
            lines.append(f"W{i}c,N{i},SP{i},,C,{i},{gauge},{length / 3:g},red")
        else:
            lines.append(f"W{i},N{i},A,{i},B,{i},{gauge},{length:g},blue")
    return "\n".join(lines) + "\n"


def fixture_toml(wire_list_text_pins: Iterable[tuple[str, str, str]], *, name: str) -> str:
    """A fixture for ``(pin, connector, sense bus)`` triples: DMM HI, DMM LO and that sense."""
    pins = list(wire_list_text_pins)
    relay = 0
    body = []
    for pin, connector, sense in pins:
        relay += 3
        body.append(
            f'[pins."{pin}"]\nconnector = "{connector}"\n'
            f"dmm_hi = {relay - 2}\ndmm_lo = {relay - 1}\n{sense} = {relay}\n"
        )
    head = (
        "# Fixture for an invented harness (test data; relay numbers invented).\n"
        f'[fixture]\nname = "{name}"\nrelay_count = {max(relay, 1)}\n'
        f"max_closed = {min(max(relay, 1), len(pins) + 4)}\n\n"
    )
    return head + "\n".join(body)


def fixture_for(wires: WireList, *, spare: int = 0) -> str:
    """Fixture text for a wire list: from-ends sense HI, to-ends sense LO, ``spare`` spare pins
    on the first to-connector."""
    seen: dict[str, tuple[str, str, str]] = {}
    for row in wires.rows:
        for end, sense in ((row.start, "sense_hi"), (row.end, "sense_lo")):
            if not end.is_splice and end.name not in seen:
                seen[end.name] = (end.name, end.connector, sense)
    to_connector = next(r.end.connector for r in wires.rows if not r.end.is_splice)
    top = max(int(p.rsplit("-", 1)[1]) for p in seen if p.startswith(to_connector + "-"))
    for k in range(1, spare + 1):
        pin = f"{to_connector}-{top + k}"
        seen[pin] = (pin, to_connector, "sense_lo")
    return fixture_toml(seen.values(), name=f"harness-{len(wires.nets)}")


def write_invented(
    folder: Path, nets: int, *, seed: int = 0, splices: int = 0, spare: int = 2
) -> tuple[WireList, FixtureMap]:
    """Write an invented wire list and its fixture to ``folder`` and load both (real loaders)."""
    folder.mkdir(parents=True, exist_ok=True)
    list_path = folder / f"wires-{nets}.csv"
    list_path.write_text(invented_wire_list(nets, seed=seed, splices=splices), encoding="utf-8")
    fixture_path = folder / f"fixture-{nets}.toml"
    fixture_path.write_text(fixture_for(load_wire_list(list_path), spare=spare), encoding="utf-8")
    fixture = load_fixture(fixture_path)
    return load_wire_list(list_path, fixture), fixture


def harness_bench(
    wires: WireList,
    fixture: FixtureMap,
    faults: list[BuildFault] | None = None,
    *,
    ambient_c: float = 23.0,
    seed: int = 0,
    probe: tuple[str, str, str, str] | None = None,
) -> VirtualBench:
    """A virtual bench (not started) with the harness as built on its fixture, and a bench Pt100
    at ambient on the four ``probe`` pins (force HI, sense HI, force LO, sense LO) if given."""
    return HarnessFaults(HarnessBuild(wires, fixture, ambient_c, seed, probe), faults).bench


@dataclass(frozen=True)
class HarnessBuild:
    """What a harness bench is built from besides its faults.  The same seed draws the same
    contacts whatever the faults, so a rebuilt harness differs from the one before by its
    faults alone."""

    wires: WireList
    fixture: FixtureMap
    ambient_c: float = 23.0
    seed: int = 0
    probe: tuple[str, str, str, str] | None = None

    def unit(self, faults: list[BuildFault]) -> tuple[UnitModel, list[Fault]]:
        """The unit model as built with ``faults``, with the bench Pt100 on ``probe`` if
        given, and the faults the unit model applies itself."""
        unit, unit_faults = build_unit(
            self.wires,
            faults,
            fixture_path=self.fixture.path,
            ambient_c=self.ambient_c,
            seed=self.seed,
        )
        if self.probe is not None:
            unit.probe = ReferenceProbe(*self.probe)
        return unit, unit_faults


class HarnessFaults:
    """A harness bench and its build faults, for the control channel
    (``rig.sim.control.BenchFaults``): each change rebuilds the harness on the same fixture,
    instruments and ports, so a station file written once stays valid."""

    def __init__(
        self,
        build: HarnessBuild,
        faults: list[BuildFault] | None = None,
        *,
        dmm_port: int = 0,
        supply_port: int = 0,
    ) -> None:
        self.build = build
        self.faults = list(faults or [])
        unit, unit_faults = build.unit(self.faults)
        self._bench = VirtualBench(
            unit,
            build.fixture,
            faults=unit_faults,
            seed=build.seed,
            dmm_port=dmm_port,
            supply_port=supply_port,
        )

    @property
    def bench(self) -> VirtualBench:
        return self._bench

    def specs(self) -> list[str]:
        return [f.spec for f in self.faults]

    def add(self, specs: list[str]) -> None:
        build = self.build
        added = parse_build_faults(
            specs, build.wires, build.fixture.pins, source=SOURCE, active=self.faults
        )
        self._rebuild(self.faults + added)

    def clear(self) -> None:
        self._rebuild([])

    def _rebuild(self, faults: list[BuildFault]) -> None:
        unit, unit_faults = self.build.unit(faults)
        self._bench.set_unit(unit, unit_faults)
        self.faults = faults


class ProbePort(ConnectThenMeasure):
    """The harness check's ``MeasurePort`` straight onto the bench circuit: same relays, same
    solver, the DMM's overload rule, no sockets, no noise.  For benchmarks and large models."""

    def __init__(
        self,
        wires: WireList,
        fixture: FixtureMap,
        faults: list[BuildFault] | None = None,
        *,
        ambient_c: float = 23.0,
        seed: int = 0,
    ) -> None:
        unit, unit_faults = HarnessBuild(wires, fixture, ambient_c, seed).unit(faults or [])
        self.fixture = fixture
        self._closed: frozenset[int] = frozenset()
        self.probe = CircuitProbe(
            unit,
            fixture,
            lambda: self._closed,
            SupplySettings(),
            BenchClock(Timing.INSTANT),
            faults=unit_faults,
            seed=seed,
        )
        self.readings = 0

    def connect(self, route: Route) -> None:
        self._closed = plan_relays(self.fixture, route)

    def measure(
        self, function: MeterFunction, *, role: str, range_: float | None, nplc: float
    ) -> Reading:
        spec = SPECS[function]
        rng = range_ if range_ is not None else spec.ranges[-1]
        value = self.probe.meter_value(function, spec.test_current(rng))
        if not math.isfinite(value) or abs(value) > rng * OVERRANGE_FACTOR:
            value = math.inf
        self.readings += 1
        return Reading(role, function.value, value, rng, nplc, time.time(), abs(value) * 1e-4)

    def lead_zero(self, hi: str, lo: str) -> float:
        return 0.0

    def meter_ranges(self, function: MeterFunction) -> list[float]:
        return list(SPECS[function].ranges)
