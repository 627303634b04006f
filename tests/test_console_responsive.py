"""The console stays responsive while the engine works, and its stop makes the bench safe.

Responsiveness is shown by what the UI did while the worker was still running (keys handled,
screens opened, rows drawn in several batches), never by a wall-clock threshold.  The safe state
is read back from the virtual bench itself (its relay contacts and supply output), not from the
console.
"""

from __future__ import annotations

import asyncio
from pathlib import Path

import pytest
from console_helpers import (
    console_on_bench,
    finish,
    long_sequence,
    slow_console,
    start_run,
    stored_run,
    wait_for,
)
from textual.widgets import DataTable

from rig.console.screens.history import HistoryScreen
from rig.console.screens.run import BATCH_ITEMS
from rig.console.widgets import StatusPanel

SIZE = (120, 40)


def _status_text(screen: object) -> str:
    from textual.screen import Screen

    assert isinstance(screen, Screen)
    return str(screen.query_one(StatusPanel).render())


def test_keys_are_handled_and_the_live_reading_shown_during_a_slow_reading(
    tmp_path: Path,
) -> None:
    async def scenario() -> None:
        with slow_console(tmp_path) as (app, bench):
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "PRS-9001")
                await wait_for(pilot, lambda: "live:" in _status_text(screen), "a live reading")
                # a raw reading is in; the step is still settling, the supply is on
                assert screen.running and screen.worker is not None and screen.worker.is_running
                assert bench.state()["outputs_on"] == ["supply"]
                await pilot.press("f2")
                await wait_for(pilot, lambda: isinstance(app.screen, HistoryScreen), "history")
                # the key was handled while the worker was still in its slow readings
                assert screen.running and len(screen.results) < 4
                await pilot.press("escape")
                await wait_for(pilot, lambda: app.screen is screen, "the run view")
                assert screen.running
                await pilot.press("f8")
                await finish(pilot, screen)

    asyncio.run(scenario())


def test_stop_mid_run_makes_the_bench_safe_and_records_the_run_aborted(tmp_path: Path) -> None:
    async def scenario() -> None:
        with slow_console(tmp_path) as (app, bench):
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "PRS-9002")
                await wait_for(
                    pilot,
                    lambda: (
                        bench.state()["outputs_on"] == ["supply"]
                        and bench.state()["closed_relays"] != []
                    ),
                    "the supply on and relays closed",
                )
                await pilot.press("f8")
                await finish(pilot, screen)
                # read back from the virtual bench: every relay open, supply output off
                state = bench.state()
                assert state["closed_relays"] == []
                assert state["outputs_on"] == []
                assert screen.summary is not None
                panel = screen.query_one(StatusPanel)
                assert panel.verdict is not None and panel.verdict.word == "ABORTED"
                run, stored_steps = stored_run(app, screen.summary.run_id)
                assert run["status"] == "aborted"
                assert "stopped by the operator" in run["reason"]
                assert len(stored_steps) < 4
                assert screen.summary.safe

    asyncio.run(scenario())


@pytest.mark.slow
def test_a_500_step_run_is_drawn_in_bounded_batches_while_keys_are_handled(
    tmp_path: Path,
) -> None:
    steps = 500

    async def scenario() -> None:
        # the closing soak keeps the run going while the keys arrive: at least one is handled
        # mid-run however fast the checks go (on a loaded host they once all ended first)
        sequence = long_sequence(tmp_path, steps, closing_soak_s=3.0)
        with console_on_bench("ntc-sender", tmp_path, sequence) as (app, _bench):
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "NTC-5000")
                await wait_for(pilot, lambda: len(screen.results) > 0, "the first rows")
                handled_mid_run = 0
                for _ in range(3):
                    await pilot.press("f2")
                    await wait_for(pilot, lambda: isinstance(app.screen, HistoryScreen), "history")
                    if screen.running:
                        handled_mid_run += 1
                    await pilot.press("escape")
                    await wait_for(pilot, lambda: app.screen is screen, "the run view")
                await finish(pilot, screen)
                table = screen.query_one("#steps", DataTable)
                assert table.row_count == steps + 1  # and the soak
                assert screen.summary is not None and screen.summary.status == "complete"
                # the UI drew while the engine ran: several updates, none larger than a batch
                assert len(screen.batches) > 1, screen.batches
                assert max(screen.batches) <= BATCH_ITEMS
                assert sum(screen.batches) == steps + 1
                assert handled_mid_run >= 1

    asyncio.run(scenario())
