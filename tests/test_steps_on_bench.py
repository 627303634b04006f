"""Step kinds the shipped demo does not use, on the virtual bench: a sensor powered from the bench
supply (current draw, output fraction), a timed soak, 2-wire resistance with the station's stored
lead zero against 4-wire, and the shipped limits against the common-practice check values."""

from __future__ import annotations

import time
from collections.abc import Collection
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES

from rig.config.fixture import load_fixture
from rig.config.sequence import load_sequence
from rig.config.station import load_station
from rig.config.unit_file import load_unit
from rig.engine import RunSummary
from rig.judge.decision import Verdict
from rig.plan import Plan, build_plan
from rig.runner import run_plan
from rig.sim.bench import VirtualBench
from rig.store import ResultStore

FIXTURE = SEQUENCES / "demo-fixture.toml"

BARE_SENSOR = f"""
# invented test unit: a ratiometric sensor alone on the fixture, powered from the bench supply
[unit]
name = "bare-sensor"
fixture = "{FIXTURE}"
[sensors.map]
kind = "ratiometric"
supply = "P_5V"
output = "P_SIG"
ground = "P_GND"
range_low = "0 kPa"
range_high = "500 kPa"
quiescent_current = "8 mA"
output_resistance = "100 ohm"
"""

POWERED_SEQUENCE = """
[sequence]
name = "powered"
[[steps]]
id = "draw"
kind = "supply-current"
supply = { pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "50 mA" }
nominal = "8 mA"
tolerance = "5 %"
[[steps]]
id = "wait"
kind = "soak"
duration = "0.2 s"
[[steps]]
id = "fraction"
kind = "ratiometric"
output = "P_SIG"
power = "P_5V"
ground = "P_GND"
range_low = "0 kPa"
range_high = "500 kPa"
pressure = "101.3 kPa"
tolerance = "1 %"
supply = { pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "50 mA" }
"""


def _bench(tmp_path: Path, unit_text: str, extra_station: str = "") -> tuple[VirtualBench, Path]:
    unit_file = tmp_path / "unit.toml"
    unit_file.write_text(unit_text, encoding="utf-8")
    unit = load_unit(unit_file)
    bench = VirtualBench(unit, load_fixture(unit.fixture_path))
    bench.start()
    station = bench.write_station(tmp_path / "station.toml", data_dir=str(tmp_path / "data"))
    if extra_station:
        station.write_text(station.read_text(encoding="utf-8") + extra_station, encoding="utf-8")
    return bench, station


def test_powered_sensor_draw_soak_and_fraction(tmp_path: Path) -> None:
    bench, station_path = _bench(tmp_path, BARE_SENSOR)
    try:
        seq = tmp_path / "powered.toml"
        seq.write_text(POWERED_SEQUENCE, encoding="utf-8")
        plan = build_plan(load_sequence(seq), load_station(station_path))
        started = time.monotonic()
        summary = run_plan(plan, "P-1")
        elapsed = time.monotonic() - started
        assert not bench.supply_settings.output_on and bench.relay_box.closed() == frozenset()
    finally:
        bench.stop()
    results = {r.step_id: r for r in summary.results}
    assert summary.verdict is Verdict.PASS, [
        (r.step_id, r.verdict, r.value) for r in summary.results
    ]
    # Ohm's law on the invented quiescent draw: 5 V over the 625 ohm that stands for 8 mA.
    assert results["draw"].value == pytest.approx(0.008, rel=0.01)
    assert elapsed >= 0.2  # the soak really waited
    # 10 % + 80 % x 101.3 / 500 = 26.208 % (the unit's invented transfer); unloaded output.
    assert results["fraction"].value == pytest.approx(26.208, abs=0.05)


def test_a_current_limit_the_supply_cannot_set_is_named_as_such_not_as_a_trip(
    tmp_path: Path,
) -> None:
    # The virtual supply's limit spans 1 mA to 3 A (a typical 30 V / 3 A bench supply, from
    # memory); it answers "CURR 5" with -222 "Data out of range" (SCPI-1999 Vol. 2, 21.8: an
    # execution error, the command not carried out). That is a setting to correct, not a unit
    # drawing too much current.
    bench, station_path = _bench(tmp_path, BARE_SENSOR)
    try:
        seq = tmp_path / "five-amps.toml"
        seq.write_text(POWERED_SEQUENCE.replace('limit = "50 mA"', 'limit = "5 A"', 1))
        summary = run_plan(build_plan(load_sequence(seq), load_station(station_path)), "P-2")
        assert not bench.supply_settings.output_on and bench.relay_box.closed() == frozenset()
    finally:
        bench.stop()
    assert summary.status == "aborted"
    assert "the supply refused the command 'CURR 5'" in summary.reason, summary.reason
    assert "-222" in summary.reason
    assert "too much current" not in summary.reason


SENDER = f"""
# invented test unit: a 2.0 kohm resistor standing for a sender, with long fixture leads
[unit]
name = "sender"
fixture = "{FIXTURE}"
[resistors.element]
between = ["Ax", "Bx"]
value = "2.0 kohm"
[wires.lead_a]
between = ["T1", "Ax"]
gauge = "26 AWG"
length = "3 m"
[wires.lead_b]
between = ["Bx", "T2"]
gauge = "26 AWG"
length = "3 m"
"""

RESISTANCE_SEQUENCE = """
[sequence]
name = "ohms"
[[steps]]
id = "two-wire"
kind = "resistance"
hi = "T1"
lo = "T2"
nominal = "2.0 kohm"
tolerance = "1 %"
[[steps]]
id = "four-wire"
kind = "resistance"
hi = "T1"
lo = "T2"
wires = 4
nominal = "2.0 kohm"
tolerance = "1 %"
"""


def test_two_wire_with_stored_zero_agrees_with_four_wire(tmp_path: Path) -> None:
    # The stored zero stands for what the fixture adds to a 2-wire reading: two relay contacts
    # of 0.05 ohm each (the virtual bench's contact resistance).  The unit's own leads are part
    # of what both readings measure, since 4-wire sensing happens at the fixture pins.
    zero = '\n[lead_zero]\n"T1:T2" = "0.1 ohm"\n'
    bench, station_path = _bench(tmp_path, SENDER, zero)
    try:
        seq = tmp_path / "ohms.toml"
        seq.write_text(RESISTANCE_SEQUENCE, encoding="utf-8")
        summary = run_plan(build_plan(load_sequence(seq), load_station(station_path)), "R-1")
    finally:
        bench.stop()
    by_id = {result.step_id: result for result in summary.results}  # run order may differ
    two, four = by_id["two-wire"], by_id["four-wire"]
    # 26 AWG copper: 133.9 ohm/km at 20 degC (handbook AWG table, from memory), corrected to
    # the unit's 23 degC with alpha 0.00393 /K (from memory): 6 m of lead is 0.813 ohm.
    leads = 6 * 0.1339 * (1 + 0.00393 * 3)
    assert four.value == pytest.approx(2000.0 + leads, abs=four.expanded_u + 0.01)
    assert two.value == pytest.approx(four.value, abs=two.expanded_u + four.expanded_u)
    assert "lead zero 0.1 ohm subtracted" in two.note
    assert four.note == ""  # the stored 2-wire zero is never taken from a 4-wire reading


def test_shipped_limits_are_the_common_practice_check_values() -> None:
    # Common practice, no published source (SOURCES.md, sensor circuits): a 5 V sensor signal is
    # healthy between about 0.6 V and 4.8 V; a sensor ground's drop to chassis is under 0.02 V.
    for name in ("temp-circuit-check", "pressure-circuit-check"):
        steps = {s.id: s for s in load_sequence(SEQUENCES / f"{name}.toml").steps}
        window = steps["signal-at-controller"].limits
        assert window is not None and (window.low, window.high) == (0.6, 4.8)
        ground = steps["sensor-ground-drop"].limits
        assert ground is not None and ground.high == pytest.approx(0.02)


def test_prompt_opens_every_relay_and_switches_the_supply_off_first(tmp_path: Path) -> None:
    bench, station_path = _bench(tmp_path, BARE_SENSOR)
    seen: list[tuple[frozenset[int], bool]] = []
    try:
        seq = tmp_path / "p.toml"
        seq.write_text(
            POWERED_SEQUENCE.replace(
                '[[steps]]\nid = "wait"',
                '[[steps]]\nid = "ask"\nkind = '
                '"prompt"\ntext = "Reconnect the sensor."\n[[steps]]\nid = "wait"',
            ),
            encoding="utf-8",
        )
        plan = build_plan(load_sequence(seq), load_station(station_path))

        def ask(text: str) -> bool:
            seen.append((bench.relay_box.closed(), bench.supply_settings.output_on))
            return True

        summary = run_plan(plan, "P-2", ask=ask)
    finally:
        bench.stop()
    assert seen == [(frozenset(), False)]
    assert summary.status == "complete"


def _logged_supply(bench: VirtualBench, *, miss_the_last_off: bool) -> list[str]:
    """Every line the virtual supply is sent, in order.  With ``miss_the_last_off`` the first
    ``OUTP OFF`` after the output went on is ignored (a supply that missed the command): in the
    powered sequence that is the run's end, since its steps share one supply setting."""
    lines: list[str] = []
    handle = bench.supply.handle
    went_on = missed = False

    def logged(line: str) -> str | None:
        nonlocal went_on, missed
        lines.append(line.strip().upper())
        went_on = went_on or lines[-1] == "OUTP ON"
        if miss_the_last_off and went_on and not missed and lines[-1] == "OUTP OFF":
            missed = True
            return None
        return handle(line)

    bench.supply.handle = logged  # type: ignore[method-assign]
    return lines


def _powered_run(tmp_path: Path, *, miss_the_last_off: bool) -> tuple[list[str], bool]:
    bench, station_path = _bench(tmp_path, BARE_SENSOR)
    try:
        seq = tmp_path / "powered.toml"
        seq.write_text(POWERED_SEQUENCE, encoding="utf-8")
        plan = build_plan(load_sequence(seq), load_station(station_path))
        lines = _logged_supply(bench, miss_the_last_off=miss_the_last_off)
        summary = run_plan(plan, "P-OFF")
        assert summary.status == "complete", summary.reason
        assert not bench.supply_settings.output_on and bench.relay_box.closed() == frozenset()
    finally:
        bench.stop()
    return lines, summary.safe


def test_a_run_ends_with_the_supply_switched_off_and_read_back(tmp_path: Path) -> None:
    lines, safe = _powered_run(tmp_path, miss_the_last_off=False)
    assert safe
    # the safe start empties the error queue (a stale trip is not blamed on a later step)
    first_off = lines.index("OUTP OFF")
    assert lines[first_off : first_off + 3] == ["OUTP OFF", "SYST:ERR?", "OUTP?"]
    assert "OUTP ON" in lines  # the run did power the sensor
    # at the end the read-back is the proof: no error query when the output reads off
    assert lines[-2:] == ["OUTP OFF", "OUTP?"]


def test_a_supply_still_on_at_the_end_is_switched_off_again_with_its_check(
    tmp_path: Path,
) -> None:
    lines, safe = _powered_run(tmp_path, miss_the_last_off=True)
    assert safe  # the second switch-off worked and was read back
    assert lines[-5:] == ["OUTP OFF", "OUTP?", "OUTP OFF", "SYST:ERR?", "OUTP?"]


COLD = """
[sequence]
name = "cold"
reorder = false
[[steps]]
id = "unpowered"
kind = "resistance"
hi = "P_SIG"
lo = "P_GND"
low = "1 ohm"
high = "1 Mohm"
[[steps]]
id = "feed"
kind = "volts"
hi = "P_5V"
lo = "P_GND"
supply = { pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "50 mA" }
nominal = "5 V"
tolerance = "5 %"
[[steps]]
id = "fraction"
kind = "ratiometric"
output = "P_SIG"
power = "P_5V"
ground = "P_GND"
range_low = "0 kPa"
range_high = "500 kPa"
pressure = "101.3 kPa"
tolerance = "1 %"
supply = { pos = "P_5V", neg = "P_GND", voltage = "6 V", limit = "50 mA" }
[[steps]]
id = "draw"
kind = "supply-current"
supply = { pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "50 mA" }
nominal = "8 mA"
tolerance = "5 %"
"""


Timeline = list[tuple[frozenset[int], bool]]


def _run_watching_relays(
    tmp_path: Path, unit_text: str, sequence_text: str, serial: str
) -> tuple[RunSummary, Plan, Timeline]:
    """Run ``sequence_text`` on a bench of ``unit_text``, noting after every relay change the
    relays closed and whether the supply's output was on while they moved."""
    bench, station_path = _bench(tmp_path, unit_text)
    timeline: Timeline = []
    original = bench.relay_box._on_change

    def relays_changed() -> None:
        timeline.append((bench.relay_box.closed(), bench.supply_settings.output_on))
        if original is not None:
            original()

    bench.relay_box._on_change = relays_changed
    try:
        seq = tmp_path / "watched.toml"
        seq.write_text(sequence_text, encoding="utf-8")
        plan = build_plan(load_sequence(seq), load_station(station_path))
        return run_plan(plan, serial), plan, timeline
    finally:
        bench.stop()


def _assert_never_moved_live(timeline: Timeline, supply_relays: Collection[int]) -> None:
    before: frozenset[int] = frozenset()
    for closed, output_on in timeline:
        moved = (closed ^ before) & set(supply_relays)
        assert not (moved and output_on), (sorted(moved), "moved with the output on")
        before = closed


def test_the_supplys_relays_never_switch_with_its_output_on(tmp_path: Path) -> None:
    # Cold switching (common practice for relay contacts, no published source): a relay that
    # takes the supply to the unit closes and opens with the output off, so no contact makes or
    # breaks the supply's current; the output comes on once they have landed.
    from rig.routing import Route, plan_relays

    summary, plan, timeline = _run_watching_relays(tmp_path, BARE_SENSOR, COLD, "C-1")
    supply_relays = plan_relays(plan.station.fixture, Route.supply("P_5V", "P_GND"))
    assert summary.status == "complete", summary.reason
    assert supply_relays and len(timeline) >= 3
    _assert_never_moved_live(timeline, supply_relays)
    # and the powered steps measured a powered unit (the output did come on)
    results = {r.step_id: r for r in summary.results}
    assert results["feed"].value == pytest.approx(5.0, rel=0.01)
    assert results["draw"].value == pytest.approx(0.008, rel=0.05)


SECOND_SUPPLY_PIN = """
[sequence]
name = "two-supply-pins"
reorder = false
[[steps]]
id = "feed"
kind = "volts"
hi = "P_5V"
lo = "P_GND"
supply = { pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "50 mA" }
nominal = "5 V"
tolerance = "5 %"
[[steps]]
id = "back-feed"
kind = "supply-current"
supply = { pos = "P_SIG", neg = "P_GND", voltage = "1 V", limit = "20 mA" }
max = "20 mA"
"""


def test_moving_the_supply_to_other_pins_switches_it_off_first(tmp_path: Path) -> None:
    # A step that connects before it powers (a supply-current step once did) or a supply moved
    # to other pins between two powered steps: the output must still be off while the supply's
    # relays move (cold switching; common practice, no published source). A fixture copy gives
    # P_SIG a relay to the supply's + bus, so the supply can move from P_5V to P_SIG.
    from rig.config.fixture import Bus

    fixture_text = FIXTURE.read_text(encoding="utf-8")
    fixture_text = fixture_text.replace("dmm_lo = 21\n", "dmm_lo = 21\nsupply_pos = 40\n", 1)
    fixture = tmp_path / "fixture.toml"
    fixture.write_text(fixture_text, encoding="utf-8")
    unit_text = BARE_SENSOR.replace(str(FIXTURE), str(fixture))
    summary, plan, timeline = _run_watching_relays(tmp_path, unit_text, SECOND_SUPPLY_PIN, "C-2")
    supply_relays = {
        relay
        for pin in plan.station.fixture.pins.values()
        for bus, relay in pin.relays.items()
        if bus in (Bus.SUPPLY_POS, Bus.SUPPLY_NEG)
    }
    assert summary.status == "complete", summary.reason
    assert 40 in supply_relays
    _assert_never_moved_live(timeline, supply_relays)
    assert any(40 in closed for closed, _ in timeline)  # the supply did move to P_SIG


NTC_OHMS_SEQUENCE = """
[sequence]
name = "ntc-ohms"
[[steps]]
id = "ntc-two-wire"
kind = "ntc"
hi = "T1"
lo = "T2"
measure = "resistance"
r25 = "2.0 kohm"
beta = "3450 K"
temperature = "23 degC"
tolerance = "5 %"
[[steps]]
id = "four-wire"
kind = "resistance"
hi = "T1"
lo = "T2"
wires = 4
nominal = "2.0 kohm"
tolerance = "10 %"
"""


def test_an_ntc_read_two_wire_takes_off_the_stored_zero_as_resistance_does(
    tmp_path: Path,
) -> None:
    # The fixture's two relay contacts (0.05 ohm each on the virtual bench) are in every 2-wire
    # reading: on a hot NTC of about 110 ohm they are about 0.1 % of it, a bias the step's U
    # does not hold.  The ntc step takes the station's stored zero off, as resistance and rtd do.
    zero = '\n[lead_zero]\n"T2:T1" = "0.1 ohm"\n'  # either order matches
    bench, station_path = _bench(tmp_path, SENDER, zero)
    try:
        seq = tmp_path / "ntc-ohms.toml"
        seq.write_text(NTC_OHMS_SEQUENCE, encoding="utf-8")
        station = load_station(station_path)
        summary = run_plan(build_plan(load_sequence(seq), station), "N-1")
        store = ResultStore(station.store_path)
        try:
            *_, raw = [r for r in store.readings(summary.run_id, "ntc-two-wire") if r["settled"]]
        finally:
            store.close()
    finally:
        bench.stop()
    by_id = {result.step_id: result for result in summary.results}
    ntc, four = by_id["ntc-two-wire"], by_id["four-wire"]
    assert ntc.value == pytest.approx(raw["value"] - 0.1, abs=1e-9)
    assert "lead zero 0.1 ohm subtracted" in ntc.note
    assert ntc.value == pytest.approx(four.value, abs=ntc.expanded_u + four.expanded_u)


def test_rig_limits_takes_the_stored_zero_off_an_ntc_read_two_wire_as_a_run_does(
    tmp_path: Path,
) -> None:
    # rig limits' Monte Carlo computes each step's value as the step kind does: a proposal for
    # an ntc step read 2-wire must rest on the reading less the station's stored lead zero, or
    # its limits sit that zero off what a run judges.
    import numpy as np

    from rig.analysis.montecarlo import step_value

    zero = '\n[lead_zero]\n"T2:T1" = "0.1 ohm"\n'
    bench, station_path = _bench(tmp_path, SENDER, zero)
    bench.stop()
    seq = tmp_path / "ntc-ohms.toml"
    seq.write_text(NTC_OHMS_SEQUENCE, encoding="utf-8")
    station = load_station(station_path)
    plan = build_plan(load_sequence(seq), station)
    spec = next(p.spec for p in plan.steps if p.spec.id == "ntc-two-wire")
    value = step_value(spec, {"ntc": np.array([110.0, 2000.0])}, station)
    assert value.tolist() == pytest.approx([109.9, 1999.9])
