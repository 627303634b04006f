"""Store commits overlapped with the instruments: never an event for a row not yet committed.

The store here is the real SQLite store on a file, slowed down (each write waits 30 ms before it
commits, as on a busy disk), so that an event sent ahead of its commit would certainly be seen:
every event is checked through a second connection to the same file, which sees committed rows
only (SQLite WAL: readers see the last commit, source: sqlite.org, WAL page).
"""

from __future__ import annotations

import json
import os
import signal
import threading
import time
from pathlib import Path
from typing import Any

import pytest
from bench_helpers import shipped_bench, shipped_plan

from rig.bench_open import close_bench, open_bench
from rig.engine import Engine, RunSummary
from rig.events import Event, ReadingTaken, RunFinished, StepFinished, StepStarted
from rig.store import ResultStore, StoreError

SLOW_WRITE_S = 0.03


class SlowDiskStore(ResultStore):
    """The results store with every queued write 30 ms late, and optionally failing."""

    fail_on_step: str = ""

    def add_reading(self, *args: Any, **kwargs: Any) -> int:
        time.sleep(SLOW_WRITE_S)
        return super().add_reading(*args, **kwargs)

    def add_step(self, run_id: int, position: int, row: dict[str, Any]) -> None:
        time.sleep(SLOW_WRITE_S)
        if row["step_id"] == self.fail_on_step:
            raise StoreError(f"disk full while writing step {row['step_id']}")
        super().add_step(run_id, position, row)


def run_watched(tmp_path: Path, fail_on_step: str = "") -> tuple[list[Event], list[str]]:
    """Run the harness check; return the events and every event that came before its row."""
    events: list[Event] = []
    early: list[str] = []
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        plan = shipped_plan("temp-circuit-check", station)
        store = SlowDiskStore(tmp_path / "r.sqlite")
        store.fail_on_step = fail_on_step
        reader = ResultStore(tmp_path / "r.sqlite")

        def listener(event: Event) -> None:
            events.append(event)
            run = reader.runs(1)[0]["id"] if reader.runs(1) else 0
            if isinstance(event, StepFinished):
                stored = {s["step_id"] for s in reader.steps(run)}
                if event.result.step_id not in stored:
                    early.append(f"step {event.result.step_id}")
            if isinstance(event, ReadingTaken) and not reader.readings(run, event.step_id):
                early.append(f"reading of {event.step_id}")

        instruments = open_bench(station)
        try:
            Engine(plan, instruments, store, listener=listener).run("SN-CA")
        finally:
            close_bench(instruments)
            store.close()
            reader.close()
    return events, early


def test_no_event_reports_a_row_before_it_is_committed(tmp_path: Path) -> None:
    events, early = run_watched(tmp_path)
    assert early == []
    finished = [e.result.step_id for e in events if isinstance(e, StepFinished)]
    assert len(finished) == 6  # every step reported, in plan order
    started = [e.step_id for e in events if isinstance(e, StepStarted)]
    assert finished == started
    assert isinstance(events[-1], RunFinished) and events[-1].status == "complete"


@pytest.mark.parametrize("step", ["signal-at-sensor"])
def test_a_failed_commit_aborts_the_run_and_is_never_reported(tmp_path: Path, step: str) -> None:
    events, early = run_watched(tmp_path, fail_on_step=step)
    assert early == []
    finished = [e.result.step_id for e in events if isinstance(e, StepFinished)]
    assert step not in finished
    last = events[-1]
    assert isinstance(last, RunFinished) and last.status == "aborted"
    assert "disk full" in last.reason


class SlowStartStore(ResultStore):
    """The results store whose run start does not commit until the virtual supply has answered
    the run's first ``expected`` queries (or 2 s have passed): an engine that waited for the
    commit before asking the supply would leave it at fewer.  Deterministic, however the threads
    are scheduled."""

    supply: Any = None
    baseline = 0
    expected = 2
    answered_meanwhile = -1

    def start_run(self, *args: Any, **kwargs: Any) -> int:
        deadline = time.monotonic() + 2.0
        while self.supply.lines_answered - self.baseline < self.expected:
            if time.monotonic() > deadline:
                break
            time.sleep(0.001)
        self.answered_meanwhile = self.supply.lines_answered - self.baseline
        return super().start_run(*args, **kwargs)


def test_the_run_row_commits_while_the_bench_is_made_safe(tmp_path: Path) -> None:
    # The safe start (supply off, its error queue and its output read back) needs nothing from
    # the store, so it goes on while the run's row commits; waiting for the commit first would
    # leave the supply unasked for those 0.5 s.
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        plan = shipped_plan("temp-circuit-check", station)
        store = SlowStartStore(tmp_path / "r.sqlite")
        store.supply = bench.supply
        instruments = open_bench(station)
        store.baseline = bench.supply.lines_answered
        try:
            summary = Engine(plan, instruments, store).run("SN-START")
        finally:
            close_bench(instruments)
        assert summary.status == "complete"
        # SYST:ERR? and OUTP? of the safe start, both answered before the row commits (*IDN? was
        # asked when the bench was opened, before the baseline)
        assert store.answered_meanwhile >= store.expected
        assert store.run(summary.run_id)["status"] == "complete"
        store.close()


def run_with_a_silent_supply(tmp_path: Path, store: ResultStore, serial: str) -> RunSummary:
    """The harness check with no query to the supply answered (200 ms timeouts)."""
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        station.instruments["supply"].settings["timeout_ms"] = 200
        plan = shipped_plan("temp-circuit-check", station)
        instruments = open_bench(station)
        bench.supply.inject_fault("silent", None)
        try:
            return Engine(plan, instruments, store).run(serial)
        finally:
            bench.supply.clear_faults()
            close_bench(instruments)


def test_a_bench_not_made_safe_at_the_start_is_recorded_as_aborted(tmp_path: Path) -> None:
    store = ResultStore(tmp_path / "r.sqlite")
    summary = run_with_a_silent_supply(tmp_path, store, "SN-UNSAFE")
    assert summary.status == "aborted" and summary.results == []
    assert "could not be brought to the safe state" in summary.reason
    assert not summary.safe
    row = store.run(summary.run_id)
    assert row["status"] == "aborted" and "safe state" in row["reason"]
    store.close()


def test_ctrl_c_during_the_safe_start_ends_as_an_interrupted_run(tmp_path: Path) -> None:
    # Ctrl-C while the bench is being made safe (the run's row still committing) must end the
    # run as any interrupt does: the bench made safe, the run recorded as aborted, the store's
    # worker gone before the caller closes the store; then the interrupt goes on to the caller.
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        plan = shipped_plan("temp-circuit-check", station)
        store = ResultStore(tmp_path / "r.sqlite")
        handle = bench.supply.handle
        sent: list[str] = []

        def handle_and_interrupt(line: str) -> str | None:
            if line.strip().upper().startswith("OUTP OFF") and not sent:
                sent.append(line)  # the first switch-off is the safe start's: press Ctrl-C
                os.kill(os.getpid(), signal.SIGINT)
            return handle(line)

        bench.supply.handle = handle_and_interrupt  # type: ignore[method-assign]
        instruments = open_bench(station)
        try:
            with pytest.raises(KeyboardInterrupt):
                Engine(plan, instruments, store).run("SN-CTRL-C")
        finally:
            close_bench(instruments)
        assert sent, "the safe start switched the supply off"
        assert not any(t.name == "store-commits" for t in threading.enumerate())
        run = store.runs(1)[0]
        assert run["status"] == "aborted" and "interrupted" in run["reason"]
        notes = json.loads(run["notes"])
        assert notes == [] or not any("could not make safe" in note for note in notes), notes
        assert bench.relay_box.closed() == frozenset()
        assert not bench.supply_settings.output_on
        store.close()


class FailingStartStore(ResultStore):
    def start_run(self, *args: Any, **kwargs: Any) -> int:
        raise StoreError("cannot write to the results store r.sqlite: disk I/O error")


def test_a_failed_run_start_says_too_that_the_bench_is_not_safe(tmp_path: Path) -> None:
    store = FailingStartStore(tmp_path / "r.sqlite")
    with pytest.raises(StoreError) as failed:
        run_with_a_silent_supply(tmp_path, store, "SN-NO-ROW")
    assert "disk I/O error" in str(failed.value)
    assert "could not be brought to the safe state" in str(failed.value)
    assert not any(t.name == "store-commits" for t in threading.enumerate())
    store.close()
