"""The console's opening cautions are the ones the command line prints for the same bench work.

Harness work and a sender in a hot well each carry a caution of their own (handling of live
circuits and of hot liquids: common practice, no published source); what the console shows is
checked against what ``rig harness check`` and ``rig run`` print on the same virtual bench (real
drivers over TCP and a pty, a real SQLite file), not against the console's own choice.
"""

from __future__ import annotations

import asyncio
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES
from console_helpers import HARNESS, console_on_bench, harness_console, wait_for
from textual.widgets import Static

from rig.cli import main
from rig.console import ConsoleApp

SIZE = (120, 40)


def printed_cautions(capsys: pytest.CaptureFixture[str], argv: list[str]) -> list[str]:
    """The caution lines a command prints before its run, in order."""
    capsys.readouterr()
    main(argv)
    return [line for line in capsys.readouterr().out.splitlines() if line.startswith("Caution")]


def shown_cautions(app: ConsoleApp) -> list[str]:
    """The cautions in the box the console opens with, in order, read from the screen."""

    async def scenario() -> list[str]:
        async with app.run_test(size=SIZE) as pilot:
            await wait_for(pilot, lambda: len(app.screen_stack) > 1, "the cautions")
            texts = [str(w.render()) for w in app.screen.query(Static)]
            # nothing starts before they are confirmed
            assert not app.cautions_acknowledged
            await pilot.press("enter")
            await wait_for(pilot, lambda: app.cautions_acknowledged, "the confirmation")
            return [" ".join(t.split()) for t in texts if t.startswith("Caution")]

    return asyncio.run(scenario())


def test_a_console_on_a_harness_proof_shows_the_harness_caution_as_the_cli_does(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with harness_console(tmp_path, []) as app:
        station = str(app.setup.station.path)
        check = ["harness", "check", str(HARNESS / "wire-list.csv"), "--station", station]
        by_check = printed_cautions(capsys, [*check, "--serial", "HC-1", "--ambient", "23 degC"])
        sequence = str(HARNESS / "harness-proof.toml")
        by_run = printed_cautions(
            capsys, ["run", sequence, "--station", station, "--serial", "HC-2"]
        )
        assert len(by_check) == 1 and "test harnesses off the vehicle" in by_check[0]
        assert by_run == by_check  # one decision: the sequence, not the command, chooses it
        assert shown_cautions(app) == by_check


@pytest.mark.parametrize(
    ("unit", "sequence", "last_words", "count"),
    [
        # a sender screened in a well the bench Pt100 reads: the well's caution too
        ("ntc-sender", "ntc-sender-screen", "heated well or liquid bath", 2),
        # no sensor in a well: the general caution alone
        ("pressure-circuit", "pressure-circuit-check", "bench work on vehicle and machine", 1),
    ],
)
def test_a_console_offering_a_screen_shows_the_cautions_rig_run_prints(
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
    unit: str,
    sequence: str,
    last_words: str,
    count: int,
) -> None:
    with console_on_bench(unit, tmp_path, sequence) as (app, _bench):
        station = str(app.setup.station.path)
        path = str(SEQUENCES / f"{sequence}.toml")
        argv = ["run", path, "--station", station, "--serial", "S-1", "--yes"]
        by_run = printed_cautions(capsys, argv)
        assert len(by_run) == count and last_words in by_run[-1]
        assert shown_cautions(app) == by_run
