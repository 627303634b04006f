"""The console says, as a run starts, that the unit scanned has runs of the sequence on record
already (a label scanned twice, a unit back on the bench), in the line ``rig run`` prints
(``rig.tested_before``), and runs it all the same: a retest is normal (common practice, no
published source).  The line stays under the verdict, since a quick run would take it out of
sight before it is read.

Real runs on the virtual bench (its meter over real TCP, its relay box on a real pty) into a real
SQLite file, driven through textual's pilot; with a results server, the suite's real PostgreSQL
server and a second station.  Serials invented."""

from __future__ import annotations

import asyncio
import contextlib
import io
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES
from console_helpers import console_on_bench, console_setup, finish, start_run, wait_for
from postgres_server import Cluster
from test_fleet_diagnosis import two_benches
from textual.pilot import Pilot

from rig.cli import main
from rig.config.station import Station
from rig.console import ConsoleApp
from rig.console.screens.prompt import PromptScreen
from rig.console.screens.run import RunScreen
from rig.console.widgets import StatusPanel
from rig.runner import load_plan, run_plan

SIZE = (120, 40)
AT_QA = SEQUENCES / "temp-circuit-check.toml"
"""The sequence the two stations on the results server run (no prompt: it runs to its end)."""


def _notes_of_a_console_run(station: Station, serial: str, claim: str = "") -> list[str]:
    """The lines about the unit in the status panel of a console run of ``AT_QA`` at
    ``station`` on ``serial`` (under ``claim``), once it has ended (it must complete)."""
    app = ConsoleApp(console_setup(station, AT_QA))
    notes: list[str] = []

    async def scenario() -> None:
        async with app.run_test(size=SIZE) as pilot:
            screen = await start_run(pilot, serial, claim)
            await finish(pilot, screen)
            assert screen.summary is not None and screen.summary.status == "complete"
            notes.extend(screen.query_one(StatusPanel).notes)

    asyncio.run(scenario())
    return notes


async def _at_the_prompt(
    pilot: Pilot[None], app: ConsoleApp, screen: RunScreen, *, said: bool
) -> str:
    """The run view's status panel while the run waits at its first step, a prompt: before any
    step is judged.  ``said``: wait for a line about the unit (else a few timer ticks)."""
    await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
    panel = screen.query_one(StatusPanel)
    if said:
        await wait_for(pilot, lambda: bool(panel.notes), "the line about the unit")
    else:
        await pilot.pause(0.5)  # five of the run view's ticks: time for any line to show
    assert screen.results == []  # nothing judged yet: this is the run's start
    return str(panel.render())


async def _next_unit(pilot: Pilot[None], app: ConsoleApp, serial: str) -> RunScreen:
    """Scan ``serial`` into the finished run view's next-serial field."""
    previous = app.run_screen
    await pilot.press(*serial, "enter")
    await wait_for(pilot, lambda: app.run_screen not in (None, previous), "the next run")
    screen = app.run_screen
    assert screen is not None
    return screen


def test_a_serial_scanned_again_is_said_at_the_start_of_its_run(tmp_path: Path) -> None:
    with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _bench):
        # the unit's first run, by rig run at the same station: the console reads its file
        station = str(app.setup.station.path)
        screen_file = str(SEQUENCES / "ntc-sender-screen.toml")
        printed = io.StringIO()
        with contextlib.redirect_stdout(printed):
            args = ["run", screen_file, "--station", station, "--serial", "RET-0070", "--yes"]
            assert main(args) == 0
        assert "note:" not in printed.getvalue()  # never tested before

        async def scenario() -> None:
            async with app.run_test(size=SIZE) as pilot:
                first = await start_run(pilot, "RET-0071")  # a unit never seen: nothing said
                assert "note:" not in await _at_the_prompt(pilot, app, first, said=False)
                await pilot.press("f6")
                await finish(pilot, first)

                again = await _next_unit(pilot, app, "RET-0070")
                shown = await _at_the_prompt(pilot, app, again, said=True)
                said = (
                    "note: RET-0070 has an earlier run of ntc-sender-screen on this station; "
                    "the latest: run 1, pass (complete), started "
                )
                assert said in shown
                await pilot.press("f6")
                await finish(pilot, again)
                assert again.summary is not None and again.summary.status == "complete"
                panel = again.query_one(StatusPanel)
                assert panel.verdict is not None  # the run went on, and the line stays
                assert "note: RET-0070 has an earlier run" in str(panel.render())

        asyncio.run(scenario())

        # rig run, at the same station after the console's run, says the console's run is the
        # latest of two: both front ends read one record
        printed = io.StringIO()
        with contextlib.redirect_stdout(printed):
            args = ["run", screen_file, "--station", station, "--serial", "RET-0070", "--yes"]
            assert main(args) == 0
        assert (
            "note: RET-0070 has 2 earlier runs of ntc-sender-screen on this station; the latest: "
            "run 3, pass (complete)"
        ) in printed.getvalue()


@pytest.mark.postgres
def test_a_unit_tested_at_another_station_is_said_from_the_results_server(
    tmp_path: Path, pg_cluster: Cluster, pg_database: str
) -> None:
    with two_benches(tmp_path, pg_cluster, pg_database) as (qa1, qa2, _env):
        run_plan(load_plan(AT_QA, qa1), "U-71")  # sent to the server after its run
        notes = _notes_of_a_console_run(qa2, "U-71")
    assert len(notes) == 1, notes  # none from qa2's own file: its first run here
    assert notes[0].startswith(
        "note: U-71 has an earlier run of temp-circuit-check at station qa1; the "
        "latest: station qa1, record "
    )
    assert "pass (complete)" in notes[0]


def test_a_claim_screened_before_under_another_serial_is_said_at_the_start_of_its_run(
    tmp_path: Path,
) -> None:
    # a claim screened before, the unit now scanned under another serial (a unit swapped, a
    # label mistyped), and the claim typed in other letter case: the same claim, as rig runs
    # --claim's hint has it, said as it is stored (common practice, no published source)
    with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _bench):
        station = str(app.setup.station.path)
        screen_file = str(SEQUENCES / "ntc-sender-screen.toml")
        args = ["run", screen_file, "--station", station, "--serial", "RET-0080", "--yes"]
        with contextlib.redirect_stdout(io.StringIO()):
            assert main([*args, "--claim", "RMA-0042"]) == 0

        async def scenario() -> None:
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "RET-0081", claim="rma-0042")
                shown = await _at_the_prompt(pilot, app, screen, said=True)
                assert (
                    "note: claim 'rma-0042' was given to an earlier run of ntc-sender-screen on "
                    "this station (serial RET-0080); the latest: run 1, pass (complete), started "
                ) in shown
                assert "stored as 'RMA-0042'" in shown
                assert "note: RET-0081" not in shown  # the serial itself is new
                await pilot.press("f6")
                await finish(pilot, screen)
                assert screen.summary is not None and screen.summary.claim == "rma-0042"
                assert len(screen.query_one(StatusPanel).notes) == 1

        asyncio.run(scenario())


@pytest.mark.postgres
def test_a_claim_screened_at_another_station_is_said_from_the_results_server(
    tmp_path: Path, pg_cluster: Cluster, pg_database: str
) -> None:
    with two_benches(tmp_path, pg_cluster, pg_database) as (qa1, qa2, _env):
        run_plan(load_plan(AT_QA, qa1), "U-81", claim="RMA-0099")  # sent after its run
        notes = _notes_of_a_console_run(qa2, "U-82", claim="RMA-0099")
        assert len(notes) == 1, notes  # the serial is new everywhere
        assert notes[0].startswith(
            "note: claim 'RMA-0099' was given to an earlier run of temp-circuit-check at "
            "station qa1 (serial U-81); the latest: station qa1, record "
        )
        assert "pass (complete), started " in notes[0]
        assert "stored as" not in notes[0]  # typed as it was

        # rig run back at qa1: its own file says its run, the server qa2's (sent after the run)
        printed = io.StringIO()
        with contextlib.redirect_stdout(printed):
            args = ["run", str(AT_QA), "--station", str(qa1.path), "--serial", "U-83"]
            assert main([*args, "--claim", "rma-0099", "--yes"]) == 0
        said = printed.getvalue()
        assert (
            "note: claim 'rma-0099' was given to an earlier run of temp-circuit-check on this "
            "station (serial U-81); the latest: run 1, pass (complete)"
        ) in said
        assert (
            "note: claim 'rma-0099' was given to an earlier run of temp-circuit-check at station "
            "qa2 (serial U-82); the latest: station qa2, record "
        ) in said
        assert said.count("stored as 'RMA-0099'") == 2
