"""The console states a screen's decision on the unit beside the run's verdict, as ``rig run``
prints it, on the run view, in the history's list and in the run's record (F2): a simple-rule
PASS within U of a limit is no clean pass for a returned unit (ILAC-G8:09/2019 calls such a
result conditional).

Real runs on the virtual bench (its meter and relay box over real TCP and a pty) into a real
SQLite file, by ``rig run`` and by the console through textual's pilot; a harness proof states
no screen decision (blank in the history).  Serials and drifts invented."""

from __future__ import annotations

import asyncio
import contextlib
import io
from pathlib import Path
from typing import Any

from bench_helpers import SEQUENCES, shipped_bench
from console_helpers import console_on_bench, finish, harness_console, start_run, wait_for
from rich.text import Text
from textual.pilot import Pilot
from textual.widgets import Static

from rig.cli import main
from rig.console import ConsoleApp
from rig.console.screens.history import HistoryScreen, RecordScreen
from rig.console.screens.prompt import PromptScreen
from rig.console.screens.run import RunScreen
from rig.console.widgets import RunList, StatusPanel
from rig.store import ResultStore

SIZE = (120, 40)
# the sender as returned: good, drifted 0.5 % inside its 5 % tolerance, drifted far beyond it
UNITS = {"H-GOOD": (), "H-EDGE": ("drift:sender=+4.5%",), "H-BAD": ("drift:sender=+20%",)}
DECISION_COLUMN = "screen decision"  # the history's heading, as the operator reads it
NOT_OF_UNIT = {"prompt", "reference-temperature"}  # an operator's answer, the bench's reference


def _simple_rule_screen(folder: Path) -> Path:
    """The shipped NTC screen judged by the simple rule (an edited copy): a reading within U of
    its limit is then a plain pass."""
    text = (SEQUENCES / "ntc-sender-screen.toml").read_text(encoding="utf-8")
    edited = text.replace('decision_rule = "guarded"', 'decision_rule = "simple"', 1)
    assert edited != text
    path = folder / "ntc-sender-screen-simple.toml"
    path.write_text(edited, encoding="utf-8")
    return path


async def _run_answering_yes(pilot: Pilot[None], app: ConsoleApp, serial: str) -> RunScreen:
    screen = await start_run(pilot, serial)
    await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
    await pilot.press("f6")
    await finish(pilot, screen)
    assert screen.summary is not None
    return screen


async def _record_head(pilot: Pilot[None], app: ConsoleApp) -> str:
    """The head of the newest run's record, opened as an operator does: F2, Enter."""
    await pilot.press("f2")
    await wait_for(pilot, lambda: isinstance(app.screen, HistoryScreen), "history")
    await pilot.press("enter")
    await wait_for(pilot, lambda: isinstance(app.screen, RecordScreen), "the record")
    return str(app.screen.query_one("#record-head", Static).render())


def test_a_pass_within_u_of_its_limit_shows_inconclusive_beside_the_pass(tmp_path: Path) -> None:
    sequence = _simple_rule_screen(tmp_path)
    faults = ("drift:sender=+4.5%",)  # 0.5 % under the 5 % tolerance: U is some 0.9 %
    with console_on_bench("ntc-sender", tmp_path, sequence, faults=faults) as (app, _):

        async def scenario() -> None:
            async with app.run_test(size=SIZE) as pilot:
                screen = await _run_answering_yes(pilot, app, "RET-0044")
                assert screen.summary is not None
                store = ResultStore(app.setup.store_path)
                try:
                    steps = {s["step_id"]: s for s in store.steps(screen.summary.run_id)}
                finally:
                    store.close()
                sender = steps["sender-resistance"]
                # the stored reading passes within its stored U of the top limit: a result
                # ILAC-G8:09/2019 calls conditional, which the simple rule reports as a pass
                assert sender["verdict"] == "pass"
                assert 0 < sender["high"] - sender["value"] < sender["expanded_u"]
                panel = screen.query_one(StatusPanel)
                assert panel.verdict is not None and panel.verdict.word == "PASS"
                shown = str(panel.render())
                assert "screen decision: inconclusive (" in shown and "within its U of" in shown
                # beside the block letters too, and the border is no pass's
                assert " screen decision: inconclusive " in shown.splitlines()[2]
                assert not panel.has_class("-pass") and panel.has_class("-other")
                head = await _record_head(pilot, app)
                assert "screen decision: inconclusive (" in head

        asyncio.run(scenario())


def test_a_good_unit_shows_no_fault_found(tmp_path: Path) -> None:
    with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _):

        async def scenario() -> None:
            async with app.run_test(size=SIZE) as pilot:
                screen = await _run_answering_yes(pilot, app, "RET-0045")
                panel = screen.query_one(StatusPanel)
                assert panel.verdict is not None and panel.verdict.word == "PASS"
                assert "screen decision: no fault found (a pass beyond" in str(panel.render())
                assert panel.has_class("-pass")
                head = await _record_head(pilot, app)
                assert "screen decision: no fault found (" in head

        asyncio.run(scenario())


def decided_from_steps(steps: list[dict[str, Any]]) -> str:
    """ILAC-G8:09/2019, guarded acceptance, over the unit's judged steps: one beyond U outside
    its limits confirms the fault; every one beyond U inside them finds none; else a reading
    within U of a limit supports neither side."""
    margins = []
    for step in steps:
        if step["kind"] in NOT_OF_UNIT or (step["low"] is None and step["high"] is None):
            continue
        value, u = float(step["value"]), float(step["expanded_u"])
        sides = [value - step["low"]] if step["low"] is not None else []
        sides += [step["high"] - value] if step["high"] is not None else []
        margins.append((min(sides), u))
    if any(m < -u for m, u in margins):
        return "confirmed failure"
    if all(m > u for m, u in margins):
        return "no fault found"
    return "inconclusive"


def _history_cells(app: ConsoleApp) -> dict[str, dict[str, str]]:
    """The history's rows as shown: {serial: {column label: cell text}}."""
    table = app.screen.query_one(RunList)
    labels = [str(c.label) for c in table.columns.values()]
    rows = {}
    for key in table.rows:
        cells = [c.plain if isinstance(c, Text) else str(c) for c in table.get_row(key)]
        row = dict(zip(labels, cells, strict=True))
        rows[row["serial"]] = row
    return rows


async def _open_history(pilot: Pilot[None], app: ConsoleApp) -> dict[str, dict[str, str]]:
    await pilot.press("f2")
    await wait_for(pilot, lambda: isinstance(app.screen, HistoryScreen), "the history")
    await pilot.pause()
    return _history_cells(app)


def test_the_history_lists_each_screens_decision_beside_its_verdict(tmp_path: Path) -> None:
    sequence = _simple_rule_screen(tmp_path)
    for serial, faults in UNITS.items():  # by rig run, into the station's one file
        with shipped_bench("ntc-sender", faults, folder=tmp_path) as (_, station):
            args = ["run", str(sequence), "--station", str(station.path), "--serial", serial]
            with contextlib.redirect_stdout(io.StringIO()):
                main([*args, "--yes"])
    with console_on_bench("ntc-sender", tmp_path, sequence) as (app, _bench):

        async def scenario() -> None:
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "H-NO")  # the sender was not placed: no
                await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
                await pilot.press("f7")
                await finish(pilot, screen)
                shown = await _open_history(pilot, app)
                assert DECISION_COLUMN in next(iter(shown.values()))
                store = ResultStore(app.setup.store_path)
                try:
                    stored = {r["serial"]: store.steps(r["id"]) for r in store.runs()}
                finally:
                    store.close()
                expected = {s: decided_from_steps(stored[s]) for s in UNITS}
                # the bench gave the three cases, and the edge one is a plain PASS
                assert sorted(expected.values()) == [
                    "confirmed failure",
                    "inconclusive",
                    "no fault found",
                ]
                assert shown["H-EDGE"]["verdict"] == "PASS"
                for serial, decision in expected.items():
                    assert shown[serial][DECISION_COLUMN] == decision, serial
                # an operator's no decides nothing (docs/reports-and-stats.md, the screen's
                # decision on one run), whatever its readings
                assert shown["H-NO"][DECISION_COLUMN] == "undecided"

        asyncio.run(scenario())


def test_a_harness_proof_shows_no_screen_decision(tmp_path: Path) -> None:
    with harness_console(tmp_path, []) as app:

        async def scenario() -> None:
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "HP-0046")
                await finish(pilot, screen)
                assert screen.summary is not None and screen.summary.status == "complete"
                panel = screen.query_one(StatusPanel)
                assert panel.verdict is not None and panel.decision is None
                assert "screen decision" not in str(panel.render())
                shown = await _open_history(pilot, app)
                assert shown["HP-0046"]["verdict"] == "PASS"
                assert shown["HP-0046"][DECISION_COLUMN] == ""  # a harness proof: none
                await pilot.press("escape")
                await wait_for(pilot, lambda: app.screen is screen, "the run view")
                head = await _record_head(pilot, app)
                assert "screen decision" not in head

        asyncio.run(scenario())
