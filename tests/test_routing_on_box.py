"""Interlocks in front of the real relay box: the simulated box on its pseudo-terminal, driven by
the serial driver over pyserial, exactly as a bench run drives it.

Random routing requests on the demo fixture's pins and buses (legal and illegal) go through
``check_interlocks``; what is accepted is applied to the box.  After every request the state read
back from the box itself must pass the interlocks, and a refused request must have moved nothing.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from drivers.relay_serial import SerialRelayBox
from rig.config.fixture import Bus, load_fixture
from rig.config.sequence import load_sequence
from rig.config.station import load_station
from rig.errors import InterlockError
from rig.plan import build_plan
from rig.routing import Route, check_interlocks, interlock_violations, relays_for
from rig.sim.bench import STATION_TEMPLATE
from rig.sim.sim_relay_box import SimRelayBox
from rig.sim.timing import BenchClock

SEQUENCES = Path(__file__).resolve().parent.parent / "sequences"
FIXTURE = load_fixture(SEQUENCES / "demo-fixture.toml")
SETTINGS = {"timeout_ms": 300}

# every pin with every bus, reachable or not, and a pin the fixture does not have
JOINS = [(pin, bus) for pin in FIXTURE.pins for bus in Bus] + [("NO_SUCH_PIN", Bus.DMM_HI)]


@dataclass(frozen=True)
class Request:
    route: Route
    add: bool
    """Close the route on top of what is closed (a supply route beside a meter one), or replace."""


requests = st.builds(
    Request,
    route=st.builds(
        Route,
        joins=st.lists(st.sampled_from(JOINS), min_size=1, max_size=4).map(tuple),
        zero_check=st.booleans(),
    ),
    add=st.booleans(),
)


@dataclass
class Bench:
    sim: SimRelayBox
    box: SerialRelayBox


@pytest.fixture(scope="module")
def bench() -> Iterator[Bench]:
    sim = SimRelayBox(
        relay_count=FIXTURE.relay_count, max_closed=FIXTURE.max_closed, clock=BenchClock()
    )
    sim.start()
    try:
        box = SerialRelayBox("relays", sim.port_path, SETTINGS)
        try:
            yield Bench(sim, box)
            box.open_all()
        finally:
            box.close()
    finally:
        sim.stop()


def run_request(bench: Bench, request: Request) -> bool:
    """Check, and apply if accepted; assert what must hold either way.  True when accepted."""
    before = bench.box.closed_relays()
    counts_before = bench.sim.operation_counts()
    zero_check = request.route.zero_check
    try:
        wanted = relays_for(FIXTURE, request.route)
        target = wanted | before if request.add else wanted
        check_interlocks(FIXTURE, target, zero_check=zero_check)
    except InterlockError:
        assert bench.box.closed_relays() == before
        assert bench.sim.operation_counts() == counts_before
        return False
    bench.box.apply(target)
    after = bench.box.closed_relays()
    assert after == target
    assert interlock_violations(FIXTURE, after, zero_check=zero_check) == []
    # each relay that changed state moved once; nothing else moved
    counts = bench.sim.operation_counts()
    moved = {r for r in counts if counts[r] != counts_before[r]}
    assert moved == set(before ^ after)
    assert all(counts[r] - counts_before[r] == 1 for r in moved)
    return True


@settings(max_examples=60, deadline=None)
@given(sequence=st.lists(requests, min_size=1, max_size=8))
def test_random_requests_never_leave_the_box_in_a_forbidden_state(
    bench: Bench, sequence: list[Request]
) -> None:
    bench.box.open_all()
    assert bench.box.closed_relays() == frozenset()
    for request in sequence:
        run_request(bench, request)


@pytest.mark.parametrize(
    ("request_", "accepted"),
    [
        (Request(Route.dmm("S_SIG", "S_GND"), add=False), True),
        (Request(Route.dmm("S_SIG", "S_SIG", zero_check=True), add=False), True),
        (Request(Route.dmm("S_SIG", "S_SIG"), add=False), False),  # HI and LO on one pin
        (Request(Route.dmm("C_SIG", "C_GND"), add=True), False),  # second pin on dmm_hi
        (Request(Route.supply("P_5V", "P_GND"), add=True), True),  # beside the meter route
        (Request(Route.dmm("T1", "T1"), add=False), False),  # T1 has no dmm_lo relay
        (Request(Route.dmm("NO_SUCH_PIN", "S_GND"), add=False), False),
    ],
)
def test_known_requests(bench: Bench, request_: Request, accepted: bool) -> None:
    """The property above sees both outcomes: these requests are known to be legal or not."""
    bench.box.open_all()
    bench.box.apply(relays_for(FIXTURE, Route.dmm("S_SIG", "S_GND")))
    assert run_request(bench, request_) is accepted


def test_planned_operations_are_what_the_box_counts(bench: Bench, tmp_path: Path) -> None:
    """The planner's relay-operation count, against the box's own contact counters."""
    station_path = tmp_path / "station.toml"
    station_path.write_text(
        STATION_TEMPLATE.format(
            name="box-test",
            fixture=json.dumps(str(SEQUENCES / "demo-fixture.toml")),
            line="50 Hz",
            data_dir=json.dumps(str(tmp_path / "rig-data")),
            dmm="TCPIP::127.0.0.1::1::SOCKET",
            supply="TCPIP::127.0.0.1::2::SOCKET",
            relays=bench.sim.port_path,
        ),
        encoding="utf-8",
    )
    plan = build_plan(
        load_sequence(SEQUENCES / "temp-circuit-check.toml"), load_station(station_path)
    )
    bench.box.open_all()
    start = bench.sim.operation_counts()
    for step in plan.steps:
        for relays in step.relay_sets:
            check_interlocks(FIXTURE, relays)
            bench.box.apply(relays)
            assert bench.box.closed_relays() == relays
    bench.box.open_all()
    end = bench.sim.operation_counts()
    assert sum(end.values()) - sum(start.values()) == plan.relay_ops
