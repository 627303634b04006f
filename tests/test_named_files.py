"""A file that cannot be read is traced to where it was named, and a folder given where a file
is expected is said to be one.

A unit file naming a fixture that is not there used to report only the fixture's absolute path
("file not found"), not the key and line of the unit file that named it; a folder given as
``--unit`` ended in ``cannot read the file: [Errno 21] Is a directory``, and as ``rig sim
--station-out`` in a traceback.  Source: the project's own conventions (every problem names the
file, key and line and what was expected; exit code 2 for bad input; never a traceback).
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES
from doc_blocks import write_complete_examples

from rig.cli import main
from rig.config.sequence import load_sequence
from rig.config.station import load_station
from rig.errors import ConfigError


def errors(capsys: pytest.CaptureFixture[str], *args: object) -> list[str]:
    """The problems rig prints for a command that must refuse its input (exit code 2)."""
    capsys.readouterr()
    assert main([str(a) for a in args]) == 2
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err
    return [line.strip() for line in captured.err.splitlines()]


def line_of(path: Path, text: str) -> int:
    return next(n for n, row in enumerate(path.read_text("utf-8").splitlines(), 1) if text in row)


@pytest.fixture
def example(tmp_path: Path) -> dict[str, Path]:
    paths = write_complete_examples(tmp_path)
    (tmp_path / "folder").mkdir()
    paths["folder"] = tmp_path / "folder"
    return paths


def printed_for(
    capsys: pytest.CaptureFixture[str], args: list[str], example: dict[str, Path]
) -> list[str]:
    """What rig prints refusing ``args``, where ``{unit.toml}`` ... stand for the examples."""
    named = {f"{{{name}}}": str(path) for name, path in example.items()}
    return errors(capsys, *(named.get(a, a) for a in args))


def renamed(path: Path, old: str, new: str) -> Path:
    """A copy of ``path`` beside it with ``old`` (which must be there) written as ``new``."""
    text = path.read_text("utf-8")
    assert old in text
    copy = path.with_name(f"renamed-{path.name}")
    copy.write_text(text.replace(old, new), encoding="utf-8")
    return copy


@pytest.mark.parametrize("command", ["check", "sim"])
def test_a_unit_files_missing_fixture_is_put_at_the_key_that_names_it(
    command: str, example: dict[str, Path], capsys: pytest.CaptureFixture[str]
) -> None:
    unit = renamed(example["unit.toml"], 'fixture = "fixture.toml"', 'fixture = "gone.toml"')
    gone = unit.parent / "gone.toml"
    assert errors(capsys, command, "--unit", unit)[1:] == [
        f"{unit}:{line_of(unit, 'gone.toml')} [unit.fixture]: 'gone.toml' ({gone}): file not found"
    ]


def test_a_unit_files_fixture_that_is_a_folder_is_said_to_be_one(
    example: dict[str, Path], capsys: pytest.CaptureFixture[str]
) -> None:
    unit = renamed(example["unit.toml"], 'fixture = "fixture.toml"', 'fixture = "folder"')
    assert errors(capsys, "check", "--unit", unit)[1:] == [
        f"{unit}:{line_of(unit, 'folder')} [unit.fixture]: 'folder' ({example['folder']}): "
        "is a folder; expected a fixture file (.toml)"
    ]


def test_a_station_files_missing_fixture_is_put_at_the_key_that_names_it(
    example: dict[str, Path],
) -> None:
    station = renamed(example["station.toml"], 'fixture = "fixture.toml"', 'fixture = "gone.toml"')
    with pytest.raises(ConfigError) as caught:
        load_station(station)
    gone = station.parent / "gone.toml"
    assert [str(p) for p in caught.value.problems] == [
        f"{station}:{line_of(station, 'gone.toml')} [station.fixture]: 'gone.toml' ({gone}): "
        "file not found"
    ]


def test_a_harness_steps_missing_wire_list_is_put_at_the_key_that_names_it(
    tmp_path: Path,
) -> None:
    shutil.copy(SEQUENCES / "harness" / "harness-proof.toml", tmp_path / "proof.toml")
    sequence = renamed(tmp_path / "proof.toml", '"wire-list.csv"', '"gone.csv"')
    with pytest.raises(ConfigError) as caught:
        load_sequence(sequence)
    gone = tmp_path / "gone.csv"
    assert [str(p) for p in caught.value.problems] == [
        f"{sequence}:{line_of(sequence, 'gone.csv')} [steps[1].wire_list]: 'gone.csv' ({gone}): "
        "file not found"
    ]


FOLDER_GIVEN = [
    (["check", "--unit", "{folder}"], "a unit file (.toml)"),
    (["check", "--station", "{folder}"], "a station file (.toml)"),
    (["check", "--fixture", "{folder}"], "a fixture file (.toml)"),
    (["check", "--fixture", "{fixture.toml}", "--wire-list", "{folder}"], "a wire list (.csv)"),
    (["check", "{folder}", "--station", "{station.toml}"], "a sequence file (.toml)"),
    (["limits", "{sequence.toml}", "--unit", "{folder}"], "a unit file (.toml)"),
    (["harness", "sim", "{folder}", "--fixture", "{fixture.toml}"], "a wire list (.csv)"),
    (["harness", "sim", "w.csv", "--fixture", "{folder}"], "a fixture file (.toml)"),
    (["stats", "grr", "--csv", "{folder}", "--store", "x"], "a gauge study (.csv)"),
]


@pytest.mark.parametrize(("args", "expected"), FOLDER_GIVEN)
def test_a_folder_given_for_a_file_to_read_is_said_to_be_one(
    args: list[str],
    expected: str,
    example: dict[str, Path],
    capsys: pytest.CaptureFixture[str],
) -> None:
    printed = printed_for(capsys, args, example)
    said = f"{example['folder']}: is a folder; expected {expected}"
    assert said in printed or f"rig: {said}" in printed, printed


def test_a_folder_as_the_store_is_said_to_be_one(
    example: dict[str, Path], capsys: pytest.CaptureFixture[str]
) -> None:
    assert errors(capsys, "runs", "--store", example["folder"]) == [
        f"rig: --store {example['folder']}: is a folder; expected a results store file (SQLite)"
    ]


@pytest.mark.parametrize(
    ("args", "expected"),
    [
        (["sim", "--unit", "{unit.toml}", "--state-file", "{folder}"], "a JSON file to write"),
        (
            ["harness", "capture", "--station", "{station.toml}", "--serial", "H", "--ambient",
             "23 degC", "--out", "{folder}"],
            "a wire list (.csv) to write",
        ),
    ],
)  # fmt: skip
def test_a_folder_for_a_file_to_write_with_no_name_of_its_own_is_refused_before_anything_opens(
    args: list[str],
    expected: str,
    example: dict[str, Path],
    capsys: pytest.CaptureFixture[str],
) -> None:
    # the complete example station names instruments at addresses nobody serves: a refusal
    # that came after opening them would name them instead
    option = args[-2]
    assert printed_for(capsys, args, example) == [
        f"rig: {option} {example['folder']}: is a folder; expected {expected}"
    ]
    assert list(example["folder"].iterdir()) == []


def test_a_capture_out_ending_with_a_slash_is_refused_before_anything_opens(
    example: dict[str, Path], capsys: pytest.CaptureFixture[str]
) -> None:
    # `rig harness capture --out newdir/` wrote a FILE named newdir; a captured wire list has no
    # name of its own to take in a folder (POSIX.1-2017, 4.13: a trailing slash names a
    # directory), so it is refused, and nothing is made, before the bench is opened
    folder = example["folder"] / "newdir"
    args = ["harness", "capture", "--station", "{station.toml}", "--serial", "H", "--ambient",
            "23 degC", "--out", f"{folder}/"]  # fmt: skip
    assert printed_for(capsys, args, example) == [
        f"rig: --out {folder}/: names a folder (it ends with /); expected a wire list (.csv) to "
        "write"
    ]
    assert not folder.exists()


@pytest.fixture(scope="module")
def demo_store(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The demo's results store (its runs through the virtual bench), read by the tests here."""
    folder = tmp_path_factory.mktemp("demo")
    assert main(["demo", "--data-dir", str(folder)]) == 0
    return folder / "results.sqlite"


def test_a_folder_for_a_report_gets_the_report_under_its_usual_name(
    tmp_path: Path, demo_store: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    store = demo_store
    folder = tmp_path / "out"
    folder.mkdir()
    capsys.readouterr()
    assert main(["report", "1", "--store", str(store), "--out", str(folder)]) == 0
    written = list(folder.iterdir())
    assert [p.suffix for p in written] == [".html"] and written[0].name.startswith("run-1-")
    assert f"written to {written[0]}" in capsys.readouterr().out
    assert main(["stats", "--store", str(store), "--html", str(folder)]) == 0
    assert (folder / "stats.html").is_file()


def test_an_out_ending_with_a_slash_is_a_folder_made_for_the_report(
    tmp_path: Path, demo_store: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # `rig report 1 --out reports/` wrote a FILE named reports where that folder did not exist
    # (and `rig stats --html charts/` one named charts); a path ending in a slash names a
    # directory (POSIX.1-2017, 4.13 Pathname Resolution), as `rig sim --station-out` reads it
    folder = tmp_path / "new" / "reports"
    capsys.readouterr()
    assert main(["report", "1", "--store", str(demo_store), "--out", f"{folder}/"]) == 0
    written = list(folder.iterdir())
    assert [p.name[:6] for p in written] == ["run-1-"] and written[0].suffix == ".html"
    assert f"written to {written[0]}" in capsys.readouterr().out
    charts = tmp_path / "charts"
    assert main(["stats", "--store", str(demo_store), "--html", f"{charts}/"]) == 0
    assert [p.name for p in charts.iterdir()] == ["stats.html"]
    assert f"page with the charts written to {charts / 'stats.html'}" in capsys.readouterr().out
    # a file where the folder is named: refused, the file left as it was
    taken = tmp_path / "taken"
    taken.write_text("mine\n", encoding="utf-8")
    for args in (["report", "1", "--out"], ["stats", "--html"]):
        option = args[-1]
        assert errors(capsys, *args, f"{taken}/", "--store", demo_store) == [
            f"rig: {option} {taken}/: names a folder, but {taken} is a file"
        ]
        assert taken.read_text(encoding="utf-8") == "mine\n"


BLANK_NAME = "names no file; expected the path of {what} (relative to this file), found {text!r}"
"""A blank ``fixture`` used to be taken as the naming file's own folder: a unit file was read as
its own fixture map (four problems about keys it never had), a station ended in a traceback; a
blank ``wire_list`` left its harness step out of the plan.  Source: docs/unit-file.md,
docs/station-file.md and docs/harness.md (each key is required) and the project's conventions
(a clear problem at the key, exit code 2, never a traceback)."""


@pytest.mark.parametrize("text", ["", "  "])
@pytest.mark.parametrize("command", ["check", "sim"])
def test_a_unit_file_naming_no_fixture_says_so_at_its_key(
    command: str, text: str, example: dict[str, Path], capsys: pytest.CaptureFixture[str]
) -> None:
    unit = renamed(example["unit.toml"], 'fixture = "fixture.toml"', f'fixture = "{text}"')
    what = "the fixture map the unit sits on"
    assert errors(capsys, command, "--unit", unit)[1:] == [
        f"{unit}:{line_of(unit, 'fixture =')} [unit.fixture]: "
        + BLANK_NAME.format(what=what, text=text)
    ]


def test_a_station_file_naming_no_fixture_says_so_at_its_key(
    example: dict[str, Path], capsys: pytest.CaptureFixture[str]
) -> None:
    station = renamed(example["station.toml"], 'fixture = "fixture.toml"', 'fixture = ""')
    what = "the station's fixture map"
    assert errors(capsys, "check", "--station", station)[1:] == [
        f"{station}:{line_of(station, 'fixture =')} [station.fixture]: "
        + BLANK_NAME.format(what=what, text="")
    ]


def test_a_harness_step_naming_no_wire_list_says_so_at_its_key(tmp_path: Path) -> None:
    # it used to load as valid and the step was left out of the plan, proving nothing
    shutil.copy(SEQUENCES / "harness" / "harness-proof.toml", tmp_path / "proof.toml")
    sequence = renamed(tmp_path / "proof.toml", '"wire-list.csv"', '""')
    with pytest.raises(ConfigError) as caught:
        load_sequence(sequence)
    what = "the harness's wire list (.csv)"
    assert [str(p) for p in caught.value.problems] == [
        f"{sequence}:{line_of(sequence, 'wire_list =')} [steps[1].wire_list]: "
        + BLANK_NAME.format(what=what, text="")
    ]
