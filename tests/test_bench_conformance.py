"""What every bench must do before a unit is tested on it, proven on the bench itself: the
virtual bench by default, a real one with ``--bench-station FILE`` (``tests/bench_under_test.py``;
docs/station-file.md, "Proving a real bench").

On a real bench these tests operate each relay of the fixture once, alone, with the supply
proven off first; they set the meter to each function and range of the station's accuracy table
with every relay open; they never switch the supply on.  The relay box's watchdog is tripped on
purpose, by a controller process that is killed while a relay is closed: the box must open it by
itself (the design's safe state when the controller dies).
"""

from __future__ import annotations

import json
import math
import subprocess
import sys
import time
from collections.abc import Iterator

import pytest

from drivers.base import MeterFunction
from drivers.registry import open_instrument
from rig.bench_open import close_bench, open_bench
from rig.config.fixture import Bus
from rig.config.station import Station
from rig.engine import Bench, make_safe

pytestmark = pytest.mark.timeout(120)


@pytest.fixture
def bench(bench_station: Station) -> Iterator[Bench]:
    """The bench opened (each instrument asked who it is, as before any run) and made safe."""
    opened = open_bench(bench_station)
    try:
        assert make_safe(opened) == [], "the bench could not be made safe"
        yield opened
    finally:
        make_safe(opened)
        close_bench(opened)


def test_each_instrument_answers_with_an_identity(bench: Bench) -> None:
    # IEEE 488.2 10.14: *IDN? answers manufacturer, model, serial number, firmware level
    assert set(bench.identities) == {"dmm", "supply", "relay_box"}
    for role, identity in bench.identities.items():
        assert identity.manufacturer.strip() and identity.model.strip(), role


def test_the_safe_state_reads_back_as_safe(bench: Bench) -> None:
    # the design's safe state: every relay open and the supply's output off, each verified
    assert not bench.supply.output_is_on()
    assert bench.relays.closed_relays() == frozenset()
    volts = bench.supply.measure_voltage()
    assert math.isfinite(volts)


def test_every_relay_of_the_fixture_closes_and_opens_alone(
    bench: Bench, bench_station: Station
) -> None:
    relays = sorted(bench_station.fixture.relay_owner())
    assert relays, "the fixture map names no relay"
    stuck = []
    for relay in relays:
        bench.relays.apply([relay])
        if bench.relays.closed_relays() != {relay}:
            stuck.append(f"relay {relay} closed alone reads {sorted(bench.relays.closed_relays())}")
        bench.relays.open_all()
        if bench.relays.closed_relays():
            stuck.append(f"relay {relay} opened reads {sorted(bench.relays.closed_relays())}")
    assert not stuck, "; ".join(stuck)


def test_the_meter_takes_every_range_the_station_states(
    bench: Bench, bench_station: Station
) -> None:
    # every relay is open: the meter's input is open, so a resistance reads overload and a
    # voltage near nothing; what is proven is that each setup is accepted and read
    refused = []
    for name in bench_station.dmm_accuracy.entries:
        function = MeterFunction(name)
        for range_ in bench_station.dmm_accuracy.ranges(function):
            try:
                bench.dmm.configure(function, range_, 1.0)
                value = bench.dmm.read()
                bench.dmm.check_errors()
            except Exception as exc:
                refused.append(f"{name} range {range_:g}: {exc}")
                continue
            if math.isnan(value):
                refused.append(f"{name} range {range_:g}: read NaN")
    assert not refused, "; ".join(refused)


WATCHDOG_HOST = """
import json, sys, time
from drivers.registry import open_instrument
config = json.loads(sys.argv[1])
box = open_instrument(config["driver"], "relay_box", config["resource"], config["settings"])
box.apply([config["relay"]])
box.start_watchdog(config["timeout_s"])
print("armed", flush=True)
time.sleep(600)
"""


def test_the_box_opens_its_relays_when_the_controller_dies(bench_station: Station) -> None:
    # a relay to a meter bus (never the supply's), closed by a controller that is then killed
    # with the watchdog armed at the station's own timeout
    owners = bench_station.fixture.relay_owner()
    relay = min(r for r, (_, bus) in owners.items() if bus not in (Bus.SUPPLY_POS, Bus.SUPPLY_NEG))
    config = bench_station.instruments["relay_box"]
    wanted = {
        "driver": config.driver,
        "resource": config.resource,
        "settings": dict(config.settings),
        "relay": relay,
        "timeout_s": bench_station.watchdog_s,
    }
    host = subprocess.Popen(
        [sys.executable, "-c", WATCHDOG_HOST, json.dumps(wanted, default=str)],
        stdout=subprocess.PIPE,
        text=True,
    )
    try:
        assert host.stdout is not None
        assert host.stdout.readline().strip() == "armed", "the controller could not arm the box"
    finally:
        host.kill()
        host.wait()
    # its timeout, and half as long again to act on it: the box is not asked before then, since
    # any frame feeds its watchdog (docs/relay-box-protocol.md), and asking early would stop it
    time.sleep(1.5 * bench_station.watchdog_s + 0.5)
    box = open_instrument(config.driver, "relay_box", config.resource, config.settings)
    try:
        closed = box.closed_relays()
        box.open_all()  # whatever the outcome, the bench is left open
    finally:
        box.close()
    assert closed == frozenset(), (
        f"relay {relay} still closed {bench_station.watchdog_s:g} s after its controller died"
    )
