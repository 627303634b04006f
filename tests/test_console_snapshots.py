"""Snapshots of the console's main screens (pytest-textual-snapshot), after real runs.

Each screen is reached by real runs on the virtual bench (seeded, instant timing), so the readings
are the same on every machine.  Nothing that changes with the time reaches the picture: the clock
is fixed, stored run times are rewritten to fixed instants, and times are shown in UTC.
Regenerate with ``pytest tests/test_console_snapshots.py --snapshot-update`` and look at them.
"""

from __future__ import annotations

import sqlite3
import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest
from console_helpers import console_on_bench, finish, start_run, wait_for
from textual.pilot import Pilot

from rig.console import ConsoleApp
from rig.console.screens.history import RecordScreen
from rig.console.screens.prompt import PromptScreen
from rig.console.widgets import StatusPanel

SIZE = (120, 40)
SnapCompare = Callable[..., bool]


@pytest.fixture(autouse=True)
def utc(monkeypatch: pytest.MonkeyPatch) -> Iterator[None]:
    """Show stored times in UTC whatever the machine's zone."""
    monkeypatch.setenv("TZ", "UTC")
    time.tzset()
    yield
    monkeypatch.undo()
    time.tzset()


def fix_times(store_path: Path) -> None:
    """Rewrite every run's start and end to fixed instants, one minute apart."""
    db = sqlite3.connect(store_path)
    try:
        ids = [row[0] for row in db.execute("SELECT id FROM runs ORDER BY id")]
        for n, run_id in enumerate(ids):
            db.execute(
                "UPDATE runs SET started_at=?, ended_at=? WHERE id=?",
                (f"2030-01-02T08:{n:02d}:00+00:00", f"2030-01-02T08:{n:02d}:30+00:00", run_id),
            )
        db.commit()
    finally:
        db.close()


async def run_through(pilot: Pilot[Any], serial: str, answer: str = "f6") -> None:
    """One whole run of the first sequence, answering its prompt (if any) with ``answer``."""
    app = pilot.app
    assert isinstance(app, ConsoleApp)
    previous = app.run_screen
    if previous is not None:  # scan the next serial straight into the finished run view
        await pilot.press(*serial, "enter")
        await wait_for(pilot, lambda: app.run_screen not in (None, previous), "the next run")
        run = app.run_screen
    else:
        run = await start_run(pilot, serial)
    assert run is not None and run.request.serial == serial
    if run.request.plan.steps[0].spec.kind == "prompt":
        await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
        await pilot.press(answer)
    await finish(pilot, run)


def test_snapshot_cautions(tmp_path: Path, snap_compare: SnapCompare) -> None:
    with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _bench):
        assert snap_compare(app, terminal_size=SIZE)


def test_snapshot_start_view_with_recent_runs(tmp_path: Path, snap_compare: SnapCompare) -> None:
    with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _bench):

        async def before(pilot: Pilot[Any]) -> None:
            await run_through(pilot, "NTC-0101")
            await run_through(pilot, "NTC-0102", answer="f7")
            fix_times(app.setup.store_path)
            await pilot.press("escape")
            await wait_for(pilot, lambda: app.run_screen is None, "the start view")
            await pilot.press(*"NTC-01")

        assert snap_compare(app, terminal_size=SIZE, run_before=before)


def test_snapshot_prompt(tmp_path: Path, snap_compare: SnapCompare) -> None:
    with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _bench):

        async def before(pilot: Pilot[Any]) -> None:
            run = await start_run(pilot, "NTC-0201")
            await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
            status = run.query_one(StatusPanel)
            await wait_for(pilot, lambda: "step 1 of 4" in str(status.render()), "the progress")

        assert snap_compare(app, terminal_size=SIZE, run_before=before)
        # the snapshot left the run waiting at its prompt; the app has exited, so the worker's
        # question went unanswered and it ended the run itself


def test_snapshot_passed_run_with_its_curve(tmp_path: Path, snap_compare: SnapCompare) -> None:
    with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _bench):

        async def before(pilot: Pilot[Any]) -> None:
            await run_through(pilot, "NTC-0301")

        assert snap_compare(app, terminal_size=SIZE, run_before=before)


def test_snapshot_failed_harness_run(tmp_path: Path, snap_compare: SnapCompare) -> None:
    with console_on_bench(
        "temp-circuit", tmp_path, "temp-circuit-check", faults=("open:signal",)
    ) as (app, _bench):
        # no unit model known: the diagnosis pane says so (hypotheses are tested in test_console)
        app.setup.unit = None

        async def before(pilot: Pilot[Any]) -> None:
            await run_through(pilot, "HAR-0401")

        assert snap_compare(app, terminal_size=SIZE, run_before=before)


def test_snapshot_trend_of_a_step(tmp_path: Path, snap_compare: SnapCompare) -> None:
    with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _bench):

        async def before(pilot: Pilot[Any]) -> None:
            for n in range(1, 5):
                await run_through(pilot, f"NTC-05{n:02d}")
            await pilot.press("f3", "down", "down", "down")

        assert snap_compare(app, terminal_size=SIZE, run_before=before)


def test_snapshot_record_of_a_run(tmp_path: Path, snap_compare: SnapCompare) -> None:
    with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _bench):

        async def before(pilot: Pilot[Any]) -> None:
            await run_through(pilot, "NTC-0601")
            fix_times(app.setup.store_path)
            await pilot.press("f2", "enter")
            await wait_for(pilot, lambda: isinstance(app.screen, RecordScreen), "the record")

        assert snap_compare(app, terminal_size=SIZE, run_before=before)
