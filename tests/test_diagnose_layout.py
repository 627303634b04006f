"""``rig diagnose``'s table fits an 80-column terminal, with every word of where each fault is.

The table padded every row's ``where`` column to its longest wire description (about 130
characters), so that each row wrapped across the screen.  Where a fault is now goes on lines of
its own under its row, wrapped at spaces; ``--json`` keeps each description whole.  80 columns:
the classic terminal's width (common practice, no published source).  The runs are the demo's,
measured through the real drivers on the virtual bench into a SQLite file.
"""

from __future__ import annotations

import io
import json
from pathlib import Path

import pytest

from rig.cli import main
from rig.cli_output import TERMINAL_WIDTH, Output
from rig.demo import CASES, run_demo

SERIALS = ("NTC-0002", "HAR-0102")
"""A sender drifted (faults that a sequence cannot tell apart, long in the fault column) and an
open signal wire (wire descriptions of 120 characters and more)."""


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> list[tuple[int, Path]]:
    """The demo's failed runs of those units: (run id, the station file of its bench)."""
    folder = tmp_path_factory.mktemp("diagnose")
    _, runs = run_demo(folder, cases=tuple(c for c in CASES if c.serial in SERIALS))
    return [(r.summary.run_id, folder / f"station-{r.case.unit}.toml") for r in runs]


def said(capsys: pytest.CaptureFixture[str], *args: object) -> str:
    capsys.readouterr()
    assert main([str(a) for a in args]) == 0
    return capsys.readouterr().out


def test_the_table_fits_80_columns_and_keeps_every_word_of_where(
    demo: list[tuple[int, Path]], capsys: pytest.CaptureFixture[str]
) -> None:
    assert TERMINAL_WIDTH == 80
    for run_id, station in demo:
        command = ("diagnose", run_id, "--station", station)
        found = json.loads(said(capsys, *command, "--json"))["hypotheses"]
        assert max(len(h["where"]) for h in found) > 100  # too long for a column of 80
        lines = said(capsys, *command).splitlines()
        start = next(n for n, line in enumerate(lines) if line.startswith("#  probability"))
        table = lines[start : start + 2]
        for line in lines[start + 2 :]:
            if not (line[:1].isdigit() or line.startswith(" ")):
                break
            table.append(line)
        assert all(len(line) <= 80 for line in table), "\n".join(table)
        words = " ".join(" ".join(table).split())
        place = 0
        for h in found:  # each hypothesis in rank order, its where whole under its fault
            entry = f"{h['spec']} " if not h["same_as"] else f"{h['spec']} (or "
            place = words.index(entry, place)
            place = words.index(" ".join(h["where"].split()), place)
        assert len(table) >= 2 + 2 * len(found)


def test_a_word_wider_than_the_room_left_stands_whole_on_its_own_line() -> None:
    buffer = io.StringIO()
    word = "x" * 90
    Output(buffer).wrapped_table(
        ["#", "fault"], [["1", "open:signal"]], [f"before {word} after"], width=40
    )
    lines = buffer.getvalue().splitlines()
    assert lines[2] == "1  open:signal"
    assert [line.strip() for line in lines[3:]] == ["before", word, "after"]
    assert all(len(line) <= 40 for line in lines if word not in line)
