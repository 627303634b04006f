"""The command output the documentation pages show is what rig prints today.

A block that starts with ``$ rig ...`` is run as it stands (from the repository's top folder, or,
for a file-format page's "Check it with", beside that page's complete examples) and compared with
the lines shown under it; ``...`` stands for lines left out, and trailing spaces of table cells
are not compared.  ``STATION`` in a command is the station ``rig sim`` writes for the demo
fixture.  The sequence page's account of how its complete example is planned is checked against
the plan.  Source: the pages themselves; that documentation examples are checked by running them
is common practice.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from doc_blocks import ROOT, section, shown_commands, write_complete_examples
from offline_station import DEMO_FIXTURE, offline_station_text

from rig.cli import main
from rig.runner import load_plan

GAP = "..."

SHOWN = [
    ("limits.md", "## Pasting the limits"),
    ("limits.md", "## The text output"),
    ("coverage-and-diagnosis.md", "### Output"),
]
CHECK_IT = ["fixture-file.md", "station-file.md", "unit-file.md"]


def matches(shown: list[str], printed: list[str]) -> bool:
    """Whether ``printed`` reads as ``shown``: line for line, ``...`` standing for any lines."""
    printed = [line.rstrip() for line in printed]
    if not shown:
        return not printed
    if shown[0] == GAP:
        return any(matches(shown[1:], printed[n:]) for n in range(len(printed) + 1))
    return bool(printed) and printed[0] == shown[0] and matches(shown[1:], printed[1:])


def printed(args: list[str], capsys: pytest.CaptureFixture[str]) -> list[str]:
    capsys.readouterr()
    assert main(args) == 0, capsys.readouterr().err
    return capsys.readouterr().out.splitlines()


@pytest.mark.parametrize(("page", "heading"), SHOWN)
def test_the_output_a_page_shows_is_what_rig_prints(
    page: str,
    heading: str,
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    station = tmp_path / "station.toml"
    station.write_text(offline_station_text("virtual-bench", DEMO_FIXTURE, tmp_path), "utf-8")
    monkeypatch.chdir(ROOT)
    commands = shown_commands(page, heading)
    assert commands, f"{page} {heading}: no $ rig block"
    for args, shown in commands:
        args = [str(station) if arg == "STATION" else arg for arg in args]
        out = printed(args, capsys)
        assert matches(shown, out), "\n".join(["rig printed:", *out])


@pytest.mark.parametrize("page", CHECK_IT)
def test_check_it_with_prints_what_the_page_shows(
    page: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    write_complete_examples(tmp_path)
    monkeypatch.chdir(tmp_path)
    (args, shown), *others = shown_commands(page, "## Complete example")
    assert not others and args[0] == "check"
    assert printed(args, capsys) == shown


def test_the_complete_example_is_planned_as_the_sequence_page_says(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    paths = write_complete_examples(tmp_path)
    plan = load_plan(paths["sequence.toml"], paths["station.toml"])
    text = " ".join(section("sequence-file.md", "## Complete example").split())
    order = re.search(r"The planner runs it as `([^`]*)`", text)
    assert order is not None
    assert order.group(1).split(", ") == [p.spec.id for p in plan.steps]
    ops = re.search(r"(\d+) relay operations to all open\..*costs (\d+)\.", text)
    assert ops is not None
    assert (int(ops.group(1)), int(ops.group(2))) == (plan.relay_ops, plan.relay_ops_file_order())
    # and `rig check` shows that order and those counts
    out = printed(
        ["check", str(paths["sequence.toml"]), "--station", str(paths["station.toml"])], capsys
    )
    rows = [line.split()[0] for line in out[3 : 3 + len(plan.steps)]]
    assert rows == [p.spec.id for p in plan.steps]
    assert f"relay operations: {plan.relay_ops} as planned ({plan.relay_ops_file_order()} in" in (
        "\n".join(out)
    )


def test_a_gap_stands_for_any_lines_and_nothing_else() -> None:
    assert matches(["a", GAP, "d"], ["a", "b", "c", "d  "])
    assert matches([GAP, "c"], ["a", "b", "c"])
    assert not matches(["a", "c"], ["a", "b", "c"])
    assert not matches(["a", GAP], ["b"])
