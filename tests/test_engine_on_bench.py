"""The main job end to end: shipped sequences on the virtual bench through the real drivers
(pyvisa-py over TCP, pyserial on a pty), judged, stored, and the bench left safe."""

from __future__ import annotations

import math
import threading
from dataclasses import replace
from pathlib import Path

import pytest
from bench_helpers import shipped_bench, shipped_plan

from rig.bench_identity import BenchRefused
from rig.bench_open import close_bench, open_bench
from rig.engine import Engine, RunSummary
from rig.events import Event, RunFinished, StepFinished
from rig.judge.decision import Verdict
from rig.models.divider import divider_voltage
from rig.models.ntc import BetaNtc
from rig.runner import run_plan
from rig.store import ResultStore

# Check values for a 5 V sensor signal and a sensor ground (common practice, no published
# source; see SOURCES.md "Sensor circuits"): healthy 0.6 V to 4.8 V; 0.5 V or below is a
# low-circuit fault; above 4.8 V a high or open-circuit fault; ground drop under 0.02 V.
HEALTHY_LOW_V, HEALTHY_HIGH_V, LOW_FAULT_V, GROUND_DROP_MAX_V = 0.6, 4.8, 0.5, 0.02


def _run(tmp_path: Path, unit: str, sequence: str, faults: tuple[str, ...] = ()) -> RunSummary:
    with shipped_bench(unit, faults, folder=tmp_path) as (bench, station):
        summary = run_plan(
            shipped_plan(sequence, station), "SN-1", operator="test", ask=lambda t: True
        )
        # the safe state, read from the bench's own side
        assert bench.relay_box.closed() == frozenset()
        assert not bench.supply_settings.output_on
    return summary


def _value(summary: RunSummary, step_id: str) -> float:
    return next(r.value for r in summary.results if r.step_id == step_id)


def test_good_harness_passes_with_common_practice_values(tmp_path: Path) -> None:
    summary = _run(tmp_path, "temp-circuit", "temp-circuit-check")
    assert summary.status == "complete"
    assert summary.verdict is Verdict.PASS, [(r.step_id, r.verdict) for r in summary.results]
    signal = _value(summary, "signal-at-controller")
    assert HEALTHY_LOW_V < signal < HEALTHY_HIGH_V
    assert abs(_value(summary, "sensor-ground-drop")) < GROUND_DROP_MAX_V
    # Pull-up divider V = Vref R/(R + Rpull) (SOURCES.md, sensor circuits) with the unit file's
    # invented values: 5.0 V, 2.49 kohm, Beta NTC 2.0 kohm / 3450 K at 23 degC.  The wire and
    # ground drops shift it by well under 1 %.
    expected = divider_voltage(5.0, 2490.0, BetaNtc(2000.0, 3450.0).r_at(23.0))
    assert signal == pytest.approx(expected, rel=0.01)


def test_open_signal_wire_reads_as_high_fault(tmp_path: Path) -> None:
    summary = _run(tmp_path, "temp-circuit", "temp-circuit-check", ("open:signal",))
    assert summary.verdict in (Verdict.FAIL, Verdict.ERROR)
    assert _value(summary, "signal-at-controller") > HEALTHY_HIGH_V
    assert "signal-at-controller" in summary.failed_steps


def test_signal_shorted_to_ground_reads_as_low_fault(tmp_path: Path) -> None:
    summary = _run(tmp_path, "temp-circuit", "temp-circuit-check", ("short-ground:signal",))
    assert summary.verdict is Verdict.FAIL
    assert _value(summary, "signal-at-controller") <= LOW_FAULT_V


def test_corroded_ground_fails_ground_drop_only(tmp_path: Path) -> None:
    summary = _run(tmp_path, "temp-circuit", "temp-circuit-check", ("series:ground=0.15ohm",))
    assert summary.failed_steps == ["sensor-ground-drop"]
    assert _value(summary, "sensor-ground-drop") > GROUND_DROP_MAX_V


def test_returned_sender_screen_separates_good_from_drifted(tmp_path: Path) -> None:
    good = _run(tmp_path / "a", "ntc-sender", "ntc-sender-screen")
    drifted = _run(tmp_path / "b", "ntc-sender", "ntc-sender-screen", ("drift:sender=+18%",))
    assert good.verdict in (Verdict.PASS, Verdict.CONDITIONAL_PASS)
    assert "sender-resistance" in drifted.failed_steps
    # IEC 60751: the bench Pt100 at the unit's ambient reads back as that temperature.
    assert _value(good, "well-temperature") == pytest.approx(23.0, abs=0.05)


def test_pressure_circuit_fraction_matches_transfer(tmp_path: Path) -> None:
    summary = _run(tmp_path, "pressure-circuit", "pressure-circuit-check")
    assert summary.verdict is Verdict.PASS, [(r.step_id, r.verdict) for r in summary.results]
    # Ratiometric transfer 10 % .. 90 % over 0 .. 500 kPa at 101.3 kPa (invented sensor values):
    # 10 + 80 * 101.3 / 500 = 26.208 %; the sensor's 100 ohm output into 47 kohm loses ~0.2 %.
    assert _value(summary, "output-fraction") == pytest.approx(26.208, abs=0.1)


def test_every_reading_is_stored_with_its_record(tmp_path: Path) -> None:
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        store = ResultStore(tmp_path / "results.sqlite")
        summary = run_plan(shipped_plan("temp-circuit-check", station), "SN-9", store=store)
        run = store.run(summary.run_id)
        steps = store.steps(summary.run_id)
        readings = store.readings(summary.run_id)
        store.close()
    assert run["status"] == "complete" and run["verdict"] == summary.verdict.value
    assert "virtual-dmm" in run["instruments"]
    assert [s["step_id"] for s in steps] == [r.step_id for r in summary.results]
    assert len(readings) >= sum(r.readings for r in summary.results) >= len(steps)
    for step in steps:
        assert step["coverage_k"] == 2.0 and step["decision_rule"] in ("simple", "guarded")
    assert sum(r["settled"] for r in readings) >= len(steps)


def test_instrument_fault_aborts_and_leaves_bench_safe(tmp_path: Path) -> None:
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        station.instruments["dmm"].settings["timeout_ms"] = 300
        plan = shipped_plan("temp-circuit-check", station)
        events: list[Event] = []

        def listener(event: Event) -> None:
            events.append(event)
            if isinstance(event, StepFinished) and event.result.position == 2:
                bench.dmm.inject_fault("silent", None)

        summary = run_plan(plan, "SN-2", listener=listener)
        assert summary.status == "aborted"
        assert summary.verdict is Verdict.ERROR
        assert "dmm" in summary.reason.lower() or "instrument" in summary.reason.lower()
        assert summary.safe
        assert bench.relay_box.closed() == frozenset()
        assert isinstance(events[-1], RunFinished) and events[-1].status == "aborted"


def test_operator_stop_brings_bench_to_safe_state(tmp_path: Path) -> None:
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        plan = shipped_plan("temp-circuit-check", station)
        stop = threading.Event()
        bench_handle = open_bench(station)
        store = ResultStore(tmp_path / "r.sqlite")

        def listener(event: Event) -> None:
            if isinstance(event, StepFinished) and event.result.position == 1:
                stop.set()

        try:
            engine = Engine(plan, bench_handle, store, listener=listener, stop=stop)
            summary = engine.run("SN-3")
        finally:
            close_bench(bench_handle)
        assert summary.status == "aborted" and "operator" in summary.reason
        assert len(summary.results) == 1
        assert store.run(summary.run_id)["status"] == "aborted"
        store.close()
        assert bench.relay_box.closed() == frozenset()


def test_overload_never_passes(tmp_path: Path) -> None:
    summary = _run(tmp_path, "ntc-sender", "ntc-sender-screen", ("open:lead_b",))
    result = next(r for r in summary.results if r.step_id == "sender-4wire")
    assert math.isinf(result.value) or math.isnan(result.value)
    assert result.verdict is Verdict.FAIL


def test_relay_wear_is_kept_across_runs_and_warned_near_rated_life(tmp_path: Path) -> None:
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        plan = shipped_plan("temp-circuit-check", station)
        store = ResultStore(tmp_path / "wear.sqlite")
        first = run_plan(plan, "W-1", store=store)
        wear_one = store.relay_wear(station.name)
        # the box's own counters (read from the simulator) agree with what was recorded
        assert wear_one == {r: n for r, n in bench.relay_box.operation_counts().items() if n}
        station.fixture.rated_operations = max(wear_one.values())  # pretend a short-lived relay
        second = run_plan(plan, "W-2", store=store)
        wear_two = store.relay_wear(station.name)
        store.close()
    assert not any("replace" in n for n in first.notes)
    assert wear_two == {r: 2 * n for r, n in wear_one.items()}
    assert any("plan to replace it" in n for n in second.notes)
    assert [w for w in second.warnings if "plan to replace it" in w]  # listed to act on


def test_past_due_calibration_is_refused_unless_allowed(tmp_path: Path) -> None:
    import datetime as dt

    from rig.bench_open import CalibrationPastDue

    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        plan = shipped_plan("temp-circuit-check", station)
        station.instruments["dmm"].calibration_due = dt.date(2020, 1, 31)
        with pytest.raises(CalibrationPastDue, match="allow_past_due"):
            run_plan(plan, "C-1")
        assert bench.relay_box.operation_counts() == dict.fromkeys(
            bench.relay_box.operation_counts(), 0
        )  # refused before anything moved
        station.instruments["dmm"].allow_past_due = True
        summary = run_plan(plan, "C-2")
    assert summary.status == "complete"
    assert any("past due since 2020-01-31" in n for n in summary.notes)


def test_lost_relay_box_is_named_when_the_bench_cannot_be_made_safe(tmp_path: Path) -> None:
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        station.instruments["relay_box"].settings["timeout_ms"] = 200
        plan = shipped_plan("temp-circuit-check", station)

        def listener(event: Event) -> None:
            if isinstance(event, StepFinished) and event.result.position == 1:
                bench.relay_box.inject_fault("close_pty")

        summary = run_plan(plan, "L-1", listener=listener)
    assert summary.status == "aborted"
    assert not summary.safe
    assert any("could not make safe" in n and "relay box" in n for n in summary.notes)


def test_a_bench_that_cannot_be_made_safe_after_the_last_step_aborts_the_run(
    tmp_path: Path,
) -> None:
    # Every step done, then the relay box stops answering: the record must not read as a clean
    # run, since the bench needs a person before the next unit (common practice, no published
    # source).  The box falls silent at the last reading, after its last route was answered, so
    # the first command it leaves unanswered is the end of the run's "open everything".
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        station.instruments["relay_box"].settings["timeout_ms"] = 200
        plan = shipped_plan("temp-circuit-check", station)
        last_route_closed = threading.Event()
        bench.relay_box.when_closed(plan.steps[-1].relay_sets[-1], last_route_closed.set)
        handle = bench.dmm.handle

        def handle_then_silence_the_box(line: str) -> str | None:
            if "READ?" in line and last_route_closed.is_set():
                bench.relay_box.inject_fault("no_ack", None)
            return handle(line)

        bench.dmm.handle = handle_then_silence_the_box  # type: ignore[method-assign]
        summary = run_plan(plan, "L-2")
        assert bench.relay_box.closed() == frozenset()  # the box did open; it just never said so
    assert len(summary.results) == len(plan.steps)
    assert summary.status == "aborted" and summary.verdict is Verdict.ERROR
    assert summary.reason.startswith("the bench could not be made safe at the end: relay box")
    assert "relay box did not answer in time" in summary.reason  # in plain words
    assert not summary.safe


def test_a_meter_silent_for_its_setup_while_relays_move_leaves_the_box_fed(
    tmp_path: Path,
) -> None:
    # A step's meter setup goes out while its relays move, and its error check waits until the
    # box has answered: a meter that then falls silent for longer than the box's watchdog must
    # not keep the relay driver from feeding it.  The check times out, the step is retried once
    # on a bench made safe again, and the run completes (figures invented for the test: meter
    # timeout 1.5 s, watchdog 1 s).
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        station.instruments["dmm"].settings["timeout_ms"] = 1500
        plan = replace(
            shipped_plan("temp-circuit-check", station), station=replace(station, watchdog_s=1.0)
        )
        handle = bench.dmm.handle
        reads, silenced = [0], [False]

        def silence_the_second_setup(line: str) -> str | None:
            reads[0] += "READ?" in line
            if reads[0] == 1 and "RANG" in line and not silenced[0]:
                silenced[0] = True
                bench.dmm.inject_fault("silent", 1)  # its error check goes unanswered
            return handle(line)

        bench.dmm.handle = silence_the_second_setup  # type: ignore[method-assign]
        summary = run_plan(plan, "SILENT-1")
        assert bench.relay_box.closed() == frozenset()
    assert summary.status == "complete", summary.reason
    assert any("cured by one retry" in n for n in summary.notes), summary.notes
    assert any("cured by one retry" in w for w in summary.warnings), summary.warnings
    assert not any("watchdog" in n for n in summary.notes), summary.notes


@pytest.mark.parametrize("fault", ["garble", "drop"])
def test_a_transient_fault_on_the_identity_query_is_asked_again(tmp_path: Path, fault: str) -> None:
    # The meter's *IDN? reply garbled or its connection dropped once when the bench is opened:
    # asked again, as any query is, and the record names the meter (IEEE 488.2-1992 §10.14:
    # maker, model, serial, firmware).
    with shipped_bench("ntc-sender", folder=tmp_path) as (bench, station):
        bench.dmm.inject_fault(fault, 1)
        summary = run_plan(shipped_plan("ntc-sender-screen", station), "IDN-1", ask=lambda t: True)
        store = ResultStore(station.store_path)
        try:
            instruments = store.run(summary.run_id)["instruments"]
        finally:
            store.close()
    assert summary.status == "complete", summary.reason
    assert "unknown" not in str(instruments) and "virtual-dmm" in str(instruments)
    assert not summary.warnings


def test_an_identity_that_cannot_be_read_refuses_the_bench_before_any_run(tmp_path: Path) -> None:
    # Asked twice at opening and garbled twice: the bench is refused, and no run is charged to
    # the unit (it used to run with a warning and a record that did not name its meter).
    with shipped_bench("ntc-sender", folder=tmp_path) as (bench, station):
        bench.dmm.inject_fault("garble", 2)  # the first ask and the second
        with pytest.raises(BenchRefused, match=r"\[dmm\] at .*four comma-separated fields"):
            run_plan(shipped_plan("ntc-sender-screen", station), "IDN-2", ask=lambda t: True)
        assert not any(bench.relay_box.operation_counts().values())  # nothing moved
        store = ResultStore(station.store_path)
        try:
            assert store.runs() == []
        finally:
            store.close()
