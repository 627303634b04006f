"""A barcode scanner at the run view, a failed harness proof's findings, a bench left live.

A scanner is a keyboard: it types its label's characters and then Enter.  While a run goes on,
no such key may act as a command or start a run, and the tail of a scan (or a stray key) typed
as the run ends must not become the next serial (common practice on test benches that take
serials by scanner, no published source).  Every run here is a real run on the virtual bench
(pyvisa-py over TCP, pyserial on a pty) into a real SQLite file; the console is checked against
what the store and the bench say.
"""

from __future__ import annotations

import asyncio
import sqlite3
from pathlib import Path

from console_helpers import (
    console_on_bench,
    finish,
    harness_console,
    slow_console,
    start_run,
    stored_run,
    wait_for,
)
from textual.containers import VerticalScroll
from textual.geometry import Region
from textual.widget import Widget
from textual.widgets import Input, Static

from rig.console import ConsoleApp
from rig.console.screens.history import HistoryScreen, RecordScreen
from rig.console.screens.prompt import PromptScreen
from rig.console.screens.run import RunScreen
from rig.console.widgets import StatusPanel
from rig.harness.as_built import BuildFault

SIZE = (120, 40)


def _runs(app: ConsoleApp) -> list[tuple[str, str]]:
    with sqlite3.connect(app.setup.store_path) as db:
        return [(str(r[0]), str(r[1])) for r in db.execute("SELECT serial, status FROM runs")]


def _on_screen(widget: Widget) -> str:
    """The text the widget shows in its region of the terminal (what is cut off is not there)."""
    width, height = widget.outer_size
    return "\n".join(strip.text for strip in widget.render_lines(Region(0, 0, width, height)))


def test_a_label_scanned_during_a_run_neither_stops_it_nor_starts_another(tmp_path: Path) -> None:
    async def scenario() -> None:
        with slow_console(tmp_path) as (app, bench):
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "HG-RUN1")
                await wait_for(pilot, lambda: bench.state()["outputs_on"] == ["supply"], "power")
                assert screen.running
                await pilot.press(*"hs-77", "enter")  # the scanner: the label, then Enter
                await pilot.pause()
                assert screen.running and app.run_screen is screen
                await finish(pilot, screen)
                assert screen.summary is not None and screen.summary.status == "complete"
                assert app.run_screen is screen  # no second run view was opened
                assert _runs(app) == [("HG-RUN1", "complete")]

    asyncio.run(scenario())


def test_a_stray_key_as_the_run_ends_does_not_enter_the_next_serial(tmp_path: Path) -> None:
    async def scenario() -> None:
        with slow_console(tmp_path) as (app, _bench):
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "HG-L1")
                await wait_for(pilot, lambda: not screen.running, "the run's verdict")
                await pilot.press("s")  # meant as a stop, a moment too late
                await pilot.pause(getattr(RunScreen, "QUIET_S", 0.0) + 0.5)
                await pilot.press(*"HG-L2", "enter")
                await wait_for(pilot, lambda: app.run_screen is not screen, "the next run")
                following = app.run_screen
                assert following is not None and following.request.serial == "HG-L2"
                await finish(pilot, following)
                assert [serial for serial, _ in _runs(app)] == ["HG-L1", "HG-L2"]

    asyncio.run(scenario())


def test_a_failed_harness_proof_lists_its_findings_in_full(tmp_path: Path) -> None:
    faults = [BuildFault("open", "W2"), BuildFault("swap", "W4", other="W5")]

    async def scenario() -> None:
        with harness_console(tmp_path, faults) as app:
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "HF-C1")
                await finish(pilot, screen)
                assert screen.summary is not None and screen.summary.status == "complete"
                _, steps = stored_run(app, screen.summary.run_id)
                note = next(s["note"] for s in steps if s["step_id"] == "harness")
                findings = [part for part in note.split("; ") if "isolation" not in part]
                # the faults planted on the bench are named there by their wires
                assert any("W2" in f for f in findings) and any("W4" in f for f in findings)
                pane = screen.query_one("#findings")
                assert pane.display and not screen.query_one("#diagnosis").display
                shown = str(screen.query_one("#findings-text", Static).render())
                for finding in note.split("; "):
                    assert finding in shown  # in full, one a line, wrapped by the pane
                assert "no unit model" not in _on_screen(screen.query_one("#lower"))

    asyncio.run(scenario())


def _read(*widgets: Widget) -> str:
    """What the widgets show, their lines joined and runs of spaces made one: text wrapped
    over lines reads as one string, text cut at an edge does not."""
    return " ".join(" ".join(_on_screen(w).split()) for w in widgets)


def test_the_record_of_a_failed_harness_proof_shows_long_notes_and_remark_in_full(
    tmp_path: Path,
) -> None:
    # a harness proof's findings are its step note, hundreds of characters; the remark may hold
    # 2000 (docs/console.md).  The record (F2, Enter) must show every character of both, wrapped,
    # on a page that scrolls by keys where it is longer than the screen.  Invented remark.
    faults = [BuildFault("open", "W2"), BuildFault("swap", "W4", other="W5")]
    remark = "customer says the lamp flickers over rough roads; " * 5 + "(invented, 250 chars)"

    async def scenario() -> None:
        with harness_console(tmp_path, faults) as app:
            async with app.run_test(size=(100, 20)) as pilot:
                await wait_for(pilot, lambda: len(app.screen_stack) > 1, "the cautions")
                await pilot.press("enter")
                app.screen.query_one("#remark", Input).value = remark
                await pilot.click("#serial")
                await pilot.press(*"HF-R1", "enter")
                await wait_for(pilot, lambda: app.run_screen is not None, "the run view")
                screen = app.run_screen
                assert screen is not None
                await finish(pilot, screen)
                assert screen.summary is not None
                run, steps = stored_run(app, screen.summary.run_id)
                assert run["remark"] == remark.strip()
                note = next(s["note"] for s in steps if s["step_id"] == "harness")
                assert len(note) > 200 and "W2" in note and "W4" in note
                await pilot.press("f2")
                await wait_for(pilot, lambda: isinstance(app.screen, HistoryScreen), "history")
                await pilot.press("enter")
                await wait_for(pilot, lambda: isinstance(app.screen, RecordScreen), "the record")
                await pilot.pause()
                record = app.screen
                shown = _read(*record.query_one(VerticalScroll).children)
                assert f"remark: {remark.strip()}" in shown
                for finding in note.split("; "):
                    assert " ".join(finding.split()) in shown
                # longer than the screen: the keys scroll the whole record to its last line
                page, notes = record.query_one(VerticalScroll), record.query_one("#record-notes")
                assert notes.region.bottom > page.region.bottom  # the last lines out of sight
                await pilot.press("end")
                await wait_for(pilot, lambda: page.scroll_y == page.max_scroll_y, "the end")
                await pilot.pause()
                assert notes.region.bottom <= page.region.bottom

    asyncio.run(scenario())


def test_a_bench_left_live_is_said_before_the_long_reason(tmp_path: Path) -> None:
    async def scenario() -> None:
        with slow_console(tmp_path) as (app, bench):
            app.setup.station.instruments["relay_box"].settings["timeout_ms"] = 200
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "HG-UNPLUG")
                await wait_for(pilot, lambda: len(screen.results) >= 1, "the first step")
                bench.relay_box.inject_fault("close_pty")  # the relay box's cable pulled
                await finish(pilot, screen)
                assert screen.summary is not None and not screen.summary.safe
                run, _ = stored_run(app, screen.summary.run_id)
                assert "could not make safe" in run["notes"]
                shown = _on_screen(screen.query_one(StatusPanel))
                assert "bench NOT made safe: check relays and supply by hand" in shown
                assert "could not make safe" in shown  # the stored warning, under the verdict

    asyncio.run(scenario())


def test_a_label_scanned_at_a_prompt_neither_answers_it_nor_stops_the_run(tmp_path: Path) -> None:
    async def scenario() -> None:
        with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, bench):
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "NTC-SCAN1")
                await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
                prompt = app.screen
                await pilot.press(*"yns-1", "enter")  # a label with each old answer letter
                await pilot.pause()
                assert app.screen is prompt and screen.running
                assert bench.state()["closed_relays"] == []  # still waiting, bench still safe
                await pilot.press("f6")  # yes, done
                await finish(pilot, screen)
                assert screen.summary is not None and screen.summary.status == "complete"
                _, steps = stored_run(app, screen.summary.run_id)
                assert steps[0]["kind"] == "prompt" and steps[0]["verdict"] == "pass"
                assert _runs(app) == [("NTC-SCAN1", "complete")]

    asyncio.run(scenario())
