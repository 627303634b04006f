"""The operator console driven by textual's pilot, running real runs on the virtual bench.

Every run here goes through the real drivers (pyvisa-py over TCP, pyserial on a pty) into a real
SQLite file; the console is checked against what the bench and the store say, not against itself.
"""

from __future__ import annotations

import asyncio
import importlib.util
import json
import math
from pathlib import Path

from bench_helpers import SEQUENCES as SEQUENCES_DIR
from console_helpers import console_on_bench, finish, start_run, stored_run, wait_for
from textual.pilot import Pilot
from textual.widgets import DataTable, Input, Static

from rig.console import ConsoleApp
from rig.console.screens.history import HistoryScreen, RecordScreen
from rig.console.screens.prompt import PromptScreen
from rig.console.widgets import RunList, StatusPanel

SIZE = (120, 40)


def _cell_text(table: DataTable[object], row: int, column: int) -> str:
    return str(table.get_row_at(row)[column])


def test_a_scanned_serial_runs_the_sequence_the_prompt_is_answered_and_the_verdict_shown(
    tmp_path: Path,
) -> None:
    async def scenario() -> None:
        with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, bench):
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "NTC-1001")
                await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
                prompt = app.screen
                assert isinstance(prompt, PromptScreen)
                assert "Place the sender in the well" in prompt.text
                # the prompt step opened everything before asking (read back from the bench)
                assert bench.state()["closed_relays"] == []
                await pilot.press("f6")
                await finish(pilot, screen)

                assert screen.summary is not None
                panel = screen.query_one(StatusPanel)
                assert panel.verdict is not None and panel.verdict.word == "PASS"
                # what the console shows is what the store recorded
                run, steps = stored_run(app, screen.summary.run_id)
                assert (run["serial"], run["status"], run["verdict"]) == (
                    "NTC-1001",
                    "complete",
                    "pass",
                )
                assert run["operator"] == "tester" and run["unit"] == "ntc-sender"
                table = screen.query_one("#steps", DataTable)
                assert table.row_count == len(steps) == 4
                for i, row in enumerate(steps):
                    assert _cell_text(table, i, 1) == row["step_id"]
                    assert _cell_text(table, i, 2) == row["verdict"].upper()
                # the 4-wire sender reading, shown in kohm, agrees with the stored ohms
                four_wire = next(r for r in steps if r["step_id"] == "sender-4wire")
                index = steps.index(four_wire)
                assert _cell_text(table, index, 4) == "kohm"
                assert math.isclose(
                    float(_cell_text(table, index, 3)) * 1e3, four_wire["value"], rel_tol=1e-4
                )
                # the next unit's serial is scanned straight into the run view: same sequence
                await pilot.press(*"NTC-1004", "enter")
                await wait_for(
                    pilot, lambda: app.run_screen not in (None, screen), "the next unit's run"
                )
                second = app.run_screen
                assert second is not None and second.request.serial == "NTC-1004"
                await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "a prompt")
                await pilot.press("f6")
                await finish(pilot, second)
                assert second.summary is not None and second.summary.run_id == 2
                # Escape goes back to the start view, to choose another sequence
                await pilot.press("escape")
                await wait_for(pilot, lambda: app.run_screen is None, "the start view")

    asyncio.run(scenario())


def test_answering_no_fails_the_run_and_says_why_no_diagnosis_is_shown(tmp_path: Path) -> None:
    async def scenario() -> None:
        with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _bench):
            app.setup.unit = None  # a real bench: the console does not know the unit model
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "NTC-1002")
                await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
                await pilot.press("f7")
                await finish(pilot, screen)
                panel = screen.query_one(StatusPanel)
                assert panel.verdict is not None and panel.verdict.word == "FAIL"
                assert screen.summary is not None and screen.summary.failed_steps == ["place"]
                box = screen.query_one("#diagnosis", Static)
                assert box.display
                assert "no diagnosis available" in str(box.render())

    asyncio.run(scenario())


def test_a_failed_run_on_a_known_unit_shows_ranked_hypotheses_or_why_not(tmp_path: Path) -> None:
    async def scenario() -> None:
        with console_on_bench(
            "temp-circuit", tmp_path, "temp-circuit-check", faults=("open:signal",)
        ) as (app, _bench):
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "HAR-2001")
                await finish(pilot, screen)
                assert screen.summary is not None
                assert screen.summary.verdict.value in ("fail", "conditional fail")
                view = screen.diagnosis
                assert view is not None and view.run_id == screen.summary.run_id
                if importlib.util.find_spec("rig.analysis.diagnose") is None:  # optional module
                    assert view.unavailable == "no diagnosis available (module not installed)"
                else:
                    assert not view.unavailable, view.unavailable
                    # the fault injected on the virtual bench is the one named first
                    assert view.hypotheses[0].fault == "open:signal"
                    probabilities = [h.probability for h in view.hypotheses]
                    assert probabilities == sorted(probabilities, reverse=True)
                    assert all(0.0 <= p <= 1.0 for p in probabilities)
                    text = str(screen.query_one("#diagnosis", Static).render())
                    assert view.hypotheses[0].fault in text.split("2. ")[0]
                    assert view.next_check is None or "Next check: " + view.next_check in text

    asyncio.run(scenario())


def test_faults_the_sequence_cannot_tell_apart_are_shown_together(tmp_path: Path) -> None:
    # An open sender lead reads the same whichever lead it is: the probability shown is that of
    # the group, and the pane names every member (not one lead, with certainty).
    async def scenario() -> None:
        faults = ("open:lead_b",)
        with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen", faults=faults) as (
            app,
            _bench,
        ):
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "NTC-1002")
                await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
                await pilot.press("f6")
                await finish(pilot, screen)
                view = screen.diagnosis
                assert view is not None
                if importlib.util.find_spec("rig.analysis.diagnose") is None:  # optional module
                    return
                assert not view.unavailable, view.unavailable
                top = view.hypotheses[0]
                assert top.same_as, top
                assert "open:lead_a" in (top.fault, *top.same_as)
                text = str(screen.query_one("#diagnosis", Static).render())
                assert "alike to this sequence" in text
                assert all(name in text for name in top.same_as)

    asyncio.run(scenario())


def test_an_empty_scan_starts_nothing_and_says_what_to_do(tmp_path: Path) -> None:
    async def scenario() -> None:
        with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _bench):
            async with app.run_test(size=SIZE) as pilot:
                await wait_for(pilot, lambda: len(app.screen_stack) > 1, "the cautions")
                await pilot.press("enter")  # cautions
                await pilot.press(" ", "enter")
                await pilot.pause()
                assert app.run_screen is None
                problem = app.screen.query_one("#serial-problem", Static)
                assert "scan or type" in str(problem.render())

    asyncio.run(scenario())


def test_history_lists_the_station_runs_and_opens_a_record(tmp_path: Path) -> None:
    async def scenario() -> None:
        with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _bench):
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "NTC-1003")
                await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
                await pilot.press("f6")
                await finish(pilot, screen)
                assert screen.summary is not None
                await pilot.press("f2")
                await wait_for(pilot, lambda: isinstance(app.screen, HistoryScreen), "history")
                runs = app.screen.query_one(RunList)
                assert runs.row_count == 1
                assert _cell_text(runs, 0, 1) == "NTC-1003"
                assert _cell_text(runs, 0, 3) == "PASS"
                await pilot.press("enter")
                await wait_for(pilot, lambda: isinstance(app.screen, RecordScreen), "the record")
                record = app.screen
                assert isinstance(record, RecordScreen)
                assert record.run_id == screen.summary.run_id
                steps = record.query_one("#record-steps", DataTable)
                assert steps.row_count == 4
                await pilot.press("escape", "escape")
                await wait_for(pilot, lambda: app.screen is screen, "back to the run view")
                # the start view's own pane shows the same run
                await pilot.press("escape")
                await wait_for(pilot, lambda: app.run_screen is None, "the start view")
                recent = app.screen.query_one(RunList)
                assert _cell_text(recent, 0, 1) == "NTC-1003"

    asyncio.run(scenario())


def test_an_operator_name_with_brackets_is_shown_as_typed(tmp_path: Path) -> None:
    # what the operator typed is text, not markup: it is shown whole, as the record keeps it,
    # and a stray closing tag is no crash
    from dataclasses import replace

    from bench_helpers import SEQUENCES, shipped_bench
    from console_helpers import console_setup

    from rig.console import ConsoleApp

    name = "Jo [/b] Smith [night shift]"

    async def scenario() -> None:
        with shipped_bench("ntc-sender", folder=tmp_path) as (bench, station):
            setup = console_setup(station, SEQUENCES / "ntc-sender-screen.toml", bench=bench)
            app = ConsoleApp(replace(setup, operator=name))
            async with app.run_test(size=SIZE) as pilot:
                await wait_for(pilot, lambda: len(app.screen_stack) > 1, "the cautions")
                await pilot.press("enter")
                await wait_for(pilot, lambda: app.cautions_acknowledged, "the start view")
                shown = str(app.screen.query_one("#start-operator", Static).render())
                assert name in shown

    asyncio.run(scenario())


def test_a_prompt_text_with_brackets_is_shown_as_written(tmp_path: Path) -> None:
    # a sequence's words are text: "[T1]" names a pin, it is not markup to be swallowed
    text = (SEQUENCES_DIR / "ntc-sender-screen.toml").read_text(encoding="utf-8")
    asked = "Clip the sender's leads to [T1] and [T2], then press y."
    sequence = tmp_path / "bracketed.toml"
    sequence.write_text(
        text.replace(
            'text = "Place the sender in the well and clip its two leads to T1 and T2."',
            f'text = "{asked}"',
        ),
        encoding="utf-8",
    )

    async def scenario() -> None:
        with console_on_bench("ntc-sender", tmp_path / "bench", sequence) as (app, _bench):
            async with app.run_test(size=SIZE) as pilot:
                await start_run(pilot, "NTC-1003")
                await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
                shown = str(app.screen.query_one("#prompt-text", Static).render())
                assert asked in shown
                await pilot.press("f8")

    asyncio.run(scenario())


def test_a_unit_file_given_to_the_console_is_recorded_and_diagnosed_from(tmp_path: Path) -> None:
    # `rig console --unit FILE` records the file with each run, as `rig run --unit` does, so the
    # run can be diagnosed later from its record, here by `rig report`
    from dataclasses import replace

    from bench_helpers import shipped_bench
    from console_helpers import console_setup

    from rig.cli import main
    from rig.console import ConsoleApp

    unit_file = (SEQUENCES_DIR / "units" / "temp-circuit.toml").resolve()

    async def scenario() -> None:
        with shipped_bench("temp-circuit", ("open:signal",), folder=tmp_path) as (bench, station):
            setup = console_setup(station, SEQUENCES_DIR / "temp-circuit-check.toml", bench=bench)
            app = ConsoleApp(replace(setup, unit_file=unit_file))
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "HAR-2002")
                await finish(pilot, screen)
                assert screen.summary is not None
                run, _ = stored_run(app, screen.summary.run_id)
                assert run["unit"] == str(unit_file)
                view = screen.diagnosis
                assert view is not None and not view.unavailable, view
                assert view.hypotheses[0].fault == "open:signal"
            report = ["report", str(screen.summary.run_id), "--station", str(station.path)]
            assert main([*report, "--format", "json", "--out", str(tmp_path / "r.json")]) == 0
        diagnosis = json.loads((tmp_path / "r.json").read_text(encoding="utf-8"))["diagnosis"]
        assert diagnosis["available"] and diagnosis["hypotheses"][0]["spec"] == "open:signal"

    asyncio.run(scenario())


def test_an_aborted_run_shows_the_planned_steps_it_never_measured(tmp_path: Path) -> None:
    # the operator stops the run at its second step, a question: the run view lists the judged
    # step, the question cut short and the steps never begun, in plan order; the store has a
    # row for the judged step only, and the record view shows the same rows from what it keeps
    from bench_helpers import MIDWAY_STOP

    sequence = tmp_path / "stops-midway.toml"
    sequence.write_text(MIDWAY_STOP, encoding="utf-8")

    async def scenario() -> None:
        with console_on_bench("ntc-sender", tmp_path / "bench", sequence) as (app, _bench):
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "NTC-1004")
                await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
                await pilot.press("f8")
                await finish(pilot, screen)
                assert screen.summary is not None and screen.summary.status == "aborted"
                table = screen.query_one("#steps", DataTable)
                rows = [
                    [str(cell) for cell in table.get_row_at(n)[:3]] for n in range(table.row_count)
                ]
                assert rows == [
                    ["1", "lead-check", "PASS"],
                    ["2", "seated", "NOT FINISHED"],
                    ["3", "lead-check-4w", "NOT RUN"],
                    ["4", "hold", "NOT RUN"],
                ]
                _, steps = stored_run(app, screen.summary.run_id)
                assert [s["step_id"] for s in steps] == ["lead-check"]
                # the stored record (F2, Enter) lists them too, read from the store alone
                await pilot.press("f2")
                await wait_for(pilot, lambda: isinstance(app.screen, HistoryScreen), "history")
                await pilot.press("enter")
                await wait_for(pilot, lambda: isinstance(app.screen, RecordScreen), "the record")
                record = app.screen.query_one("#record-steps", DataTable)
                assert [
                    [str(cell) for cell in record.get_row_at(n)[:3]]
                    for n in range(record.row_count)
                ] == rows

    asyncio.run(scenario())


def test_a_no_to_a_prompt_that_stops_the_run_says_so_and_ends_the_run(tmp_path: Path) -> None:
    # declined = "stop" on the question: the box tells the operator what n does, and n ends the
    # run aborted with the question named; the steps after it are never begun
    from bench_helpers import MIDWAY_STOP

    sequence = tmp_path / "stops-on-no.toml"
    asked = 'text = "Is the sender seated in the well?"\n'
    sequence.write_text(MIDWAY_STOP.replace(asked, asked + 'declined = "stop"\n'), "utf-8")

    async def scenario() -> None:
        with console_on_bench("ntc-sender", tmp_path / "bench", sequence) as (app, bench):
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "NTC-1005")
                await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
                keys = app.screen.query_one("#prompt-keys", Static)
                assert "F7 = no (the run stops)" in str(keys.render())
                await pilot.press("f7")
                await finish(pilot, screen)
                summary = screen.summary
                assert summary is not None and summary.status == "aborted"
                assert summary.reason.startswith("step seated: the operator declined")
                assert summary.not_run == ["lead-check-4w", "hold"]
                run, steps = stored_run(app, summary.run_id)
                assert run["status"] == "aborted" and run["reason"] == summary.reason
                assert [(s["step_id"], s["verdict"]) for s in steps] == [
                    ("lead-check", "pass"),
                    ("seated", "fail"),
                ]
                assert bench.state()["closed_relays"] == [] and bench.state()["outputs_on"] == []

    asyncio.run(scenario())


def test_warnings_the_technician_must_act_on_are_shown_under_the_verdict(tmp_path: Path) -> None:
    # A fixture whose relays are rated for 4 operations (invented: relays worn nearly out): after
    # one run, the next run's record warns of wear, and the console's verdict must say so too.
    from bench_helpers import shipped_bench
    from console_helpers import console_setup

    from rig.cli import main
    from rig.config.station import load_station
    from rig.console import ConsoleApp

    sequence = SEQUENCES_DIR / "temp-circuit-check.toml"
    fixture = tmp_path / "worn-fixture.toml"
    text = (SEQUENCES_DIR / "demo-fixture.toml").read_text(encoding="utf-8")
    fixture.write_text(text.replace("rated_operations = 10000000", "rated_operations = 4"))

    async def scenario() -> None:
        with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
            station_text = station.path.read_text(encoding="utf-8")
            station.path.write_text(station_text.replace(str(station.fixture.path), str(fixture)))
            args = ["run", str(sequence), "--station", str(station.path), "--serial", "W1"]
            assert main(args) == 0  # wears the relays past their rating
            app = ConsoleApp(console_setup(load_station(station.path), sequence, bench=bench))
            async with app.run_test(size=SIZE) as pilot:
                screen = await start_run(pilot, "W2")
                await finish(pilot, screen)
                assert screen.summary is not None and screen.summary.warnings
                panel = screen.query_one(StatusPanel)
                shown = str(panel.render())
                assert "PASS" in shown and "of its rated 4 operations" in shown
                run, _ = stored_run(app, screen.summary.run_id)
                assert "of its rated 4 operations" in run["notes"]  # as the record says

    asyncio.run(scenario())


async def acknowledge_cautions(pilot: Pilot[None], app: ConsoleApp) -> None:
    await wait_for(pilot, lambda: len(app.screen_stack) > 1, "the cautions")
    await pilot.press("enter")
    await wait_for(pilot, lambda: app.cautions_acknowledged, "the cautions to be acknowledged")


def test_a_claim_and_remark_typed_on_the_start_view_are_kept_and_shown_with_the_verdict(
    tmp_path: Path,
) -> None:
    # the same record `rig run --claim --remark` keeps (schema 6, docs/console.md); the claim
    # and remark are our own invented example
    async def scenario() -> None:
        with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _bench):
            async with app.run_test(size=SIZE) as pilot:
                await acknowledge_cautions(pilot, app)
                await pilot.click("#claim")
                await pilot.press(*"RMA-0042")
                await pilot.click("#remark")
                await pilot.press(*"gauge reads cold (invented)")
                await pilot.click("#serial")
                await pilot.press(*"NTC-2001", "enter")
                await wait_for(pilot, lambda: app.run_screen is not None, "the run view")
                screen = app.run_screen
                assert screen is not None
                await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "the prompt")
                await pilot.press("f6")
                await finish(pilot, screen)
                assert screen.summary is not None
                run, _steps = stored_run(app, screen.summary.run_id)
                assert (run["claim"], run["remark"]) == ("RMA-0042", "gauge reads cold (invented)")
                shown = str(screen.query_one(StatusPanel).render())
                assert "claim: RMA-0042 · remark: gauge reads cold (invented)" in shown
                # the next unit scanned in the run view is another unit: no claim of its own
                await pilot.press(*"NTC-2002", "enter")
                await wait_for(
                    pilot, lambda: app.run_screen not in (None, screen), "the next unit's run"
                )
                second = app.run_screen
                assert second is not None
                assert (second.request.claim, second.request.remark) == ("", "")
                await wait_for(pilot, lambda: isinstance(app.screen, PromptScreen), "a prompt")
                await pilot.press("f6")
                await finish(pilot, second)
                await pilot.press("escape")
                await wait_for(pilot, lambda: app.run_screen is None, "the start view")
                assert app.screen.query_one("#claim", Input).value == ""

    asyncio.run(scenario())


def test_a_claim_the_cli_would_refuse_starts_nothing_and_says_why(tmp_path: Path) -> None:
    # the same check as rig run --claim (rig.run_admission.claim_problem): at most 200 characters
    async def scenario() -> None:
        with console_on_bench("ntc-sender", tmp_path, "ntc-sender-screen") as (app, _bench):
            async with app.run_test(size=SIZE) as pilot:
                await acknowledge_cautions(pilot, app)
                app.screen.query_one("#claim", Input).value = "C" * 201
                await pilot.click("#serial")
                await pilot.press(*"NTC-2003", "enter")
                await pilot.pause()
                assert app.run_screen is None
                problem = str(app.screen.query_one("#serial-problem", Static).render())
                assert problem == (
                    "the claim or return number is 201 characters long; at most 200 are kept"
                )
                assert app.screen.focused is app.screen.query_one("#claim", Input)

    asyncio.run(scenario())


def test_a_serial_with_brackets_is_listed_as_stored(tmp_path: Path) -> None:
    # a serial is text, not markup: a stored run whose label holds "[/b]" or "[red]" is listed
    # whole in the start view, the history and the record, and a stray closing tag is no crash
    from bench_helpers import SEQUENCES, shipped_bench, shipped_plan
    from console_helpers import console_setup

    from rig.runner import run_plan

    serial = "SN [/b] 7 [red]X"

    async def scenario() -> None:
        with shipped_bench("ntc-sender", folder=tmp_path) as (bench, station):
            run_plan(shipped_plan("ntc-sender-screen", station), serial, ask=lambda t: True)
            app = ConsoleApp(
                console_setup(station, SEQUENCES / "ntc-sender-screen.toml", bench=bench)
            )
            async with app.run_test(size=SIZE) as pilot:
                await wait_for(pilot, lambda: len(app.screen_stack) > 1, "the cautions")
                await pilot.press("enter")
                await wait_for(pilot, lambda: app.cautions_acknowledged, "the start view")
                recent = app.screen.query_one(RunList)
                await pilot.pause()
                shown = recent.render_line(1).text + recent.render_line(2).text
                assert serial in shown, shown

    asyncio.run(scenario())
