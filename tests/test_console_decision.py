"""The console states a screen's decision on the unit beside the run's verdict, as ``rig run``
prints it, on the run view and in the run's record (F2): a simple-rule PASS within U of a limit
is no clean pass for a returned unit (ILAC-G8:09/2019 calls such a result conditional).

Real runs on the virtual bench (its meter and relay box over real TCP and a pty) into a real
SQLite file, driven through textual's pilot; a harness proof states no screen decision."""

from __future__ import annotations

import asyncio
from pathlib import Path

from bench_helpers import SEQUENCES
from console_helpers import console_on_bench, finish, harness_console, start_run, wait_for
from textual.pilot import Pilot
from textual.widgets import Static

from rig.console import ConsoleApp
from rig.console.screens.history import HistoryScreen, RecordScreen
from rig.console.screens.prompt import PromptScreen
from rig.console.screens.run import RunScreen
from rig.console.widgets import StatusPanel
from rig.store import ResultStore

SIZE = (120, 40)


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
                head = await _record_head(pilot, app)
                assert "screen decision" not in head

        asyncio.run(scenario())
