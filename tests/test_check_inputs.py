"""``rig check`` checks every file it is given before it prints anything, and checks a station,
unit or fixture file alone.

A bad unit file given with ``--unit`` used to be read only once the plan had been printed under
"valid"; and the pages' "Check it with" commands were ``python -c`` one-liners that ended in a
traceback on a bad file.  Source: the project's own conventions (exit code 2 for bad input, every
problem listed as ``FILE:LINE [KEY]: message``, never a traceback).
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest
from doc_blocks import write_complete_examples

from rig.cli import main

BAD_UNIT = """\
# invented for the test: one wire with a bare number for its length
[unit]
name = "bad"
fixture = "fixture.toml"

[wires.a]
between = ["S_SIG", "C_SIG"]
gauge = "20 AWG"
length = 1.5
"""


@pytest.fixture
def example(tmp_path: Path) -> dict[str, Path]:
    paths = write_complete_examples(tmp_path)
    paths["bad-unit.toml"] = tmp_path / "bad-unit.toml"
    paths["bad-unit.toml"].write_text(BAD_UNIT, encoding="utf-8")
    return paths


def check(capsys: pytest.CaptureFixture[str], *args: object) -> tuple[int, str, str]:
    code = main(["check", *(str(a) for a in args)])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def test_a_bad_unit_file_is_reported_before_anything_is_printed(
    example: dict[str, Path], capsys: pytest.CaptureFixture[str]
) -> None:
    code, out, err = check(
        capsys,
        example["sequence.toml"],
        "--station",
        example["station.toml"],
        "--unit",
        example["bad-unit.toml"],
    )
    assert code == 2
    assert out == ""  # no "valid", no plan
    assert "bad-unit.toml:9 [wires.a.length]: expected a string with a unit" in err


def test_every_input_is_reported_at_once(
    example: dict[str, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    sequence = tmp_path / "bad-sequence.toml"
    sequence.write_text('[sequence]\nname = "x"\n', encoding="utf-8")
    args = [sequence, "--station", example["station.toml"], "--unit", example["bad-unit.toml"]]
    code, out, err = check(capsys, *args)
    assert code == 2 and out == ""
    assert "bad-sequence.toml [steps]: no steps" in err
    assert "bad-unit.toml:9 [wires.a.length]" in err


@pytest.mark.parametrize(
    ("option", "name", "line"),
    [
        (
            "--station",
            "station.toml",
            "station bench-a (STATION): valid, with fixture bench-a (fixture.toml)",
        ),
        (
            "--unit",
            "unit.toml",
            "unit example-temp-circuit (UNIT): valid, on fixture bench-a (fixture.toml)",
        ),
        ("--fixture", "fixture.toml", "fixture bench-a (FIXTURE): valid, 9 pins on 16 relays"),
    ],
)
def test_a_file_alone_is_one_line_when_valid(
    example: dict[str, Path],
    capsys: pytest.CaptureFixture[str],
    option: str,
    name: str,
    line: str,
) -> None:
    code, out, err = check(capsys, option, example[name])
    assert (code, err) == (0, "")
    assert out.splitlines() == [line.replace(option[2:].upper(), str(example[name]))]


def _bad_station(example: dict[str, Path], tmp_path: Path) -> Path:
    """The docs' example station with one mistake: a watchdog time with no unit."""
    station = tmp_path / "bad-station.toml"
    text = example["station.toml"].read_text(encoding="utf-8")
    station.write_text(text.replace('watchdog = "2 s"', 'watchdog = "2"'), encoding="utf-8")
    return station


def test_several_files_alone_are_checked_together(
    example: dict[str, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    station = _bad_station(example, tmp_path)
    args = ["--station", station, "--unit", example["bad-unit.toml"]]
    code, out, err = check(capsys, *args, "--fixture", example["fixture.toml"])
    assert code == 2 and out == ""
    assert "bad-station.toml:8 [station.watchdog]: '2' has no unit" in err
    assert "bad-unit.toml:9 [wires.a.length]" in err


def test_a_unit_alone_is_checked_with_its_fixture(
    example: dict[str, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    unit = tmp_path / "elsewhere.toml"
    text = example["unit.toml"].read_text(encoding="utf-8")
    unit.write_text(text.replace('fixture = "fixture.toml"', 'fixture = "gone.toml"'))
    code, out, err = check(capsys, "--unit", unit)
    assert code == 2 and out == ""
    # the problem is put at the key that named the missing file (tests/test_named_files.py)
    assert f"[unit.fixture]: 'gone.toml' ({tmp_path / 'gone.toml'}): file not found" in err


@pytest.mark.parametrize(
    ("args", "says"),
    [
        ([], "give a sequence and --station STATION, or a file to check alone"),
        (["sequence.toml"], "is checked against a station; give --station STATION"),
        (
            ["sequence.toml", "--station", "station.toml", "--fixture", "fixture.toml"],
            "--fixture checks a fixture file alone",
        ),
    ],
)
def test_files_that_make_no_check_are_refused(
    example: dict[str, Path], capsys: pytest.CaptureFixture[str], args: list[str], says: str
) -> None:
    code, out, err = check(capsys, *(example.get(a, a) for a in args))
    assert code == 2 and out == ""
    assert err.startswith("rig check: ") and says in err


def test_a_bad_file_alone_ends_without_a_traceback(example: dict[str, Path]) -> None:
    proc = subprocess.run(
        [sys.executable, "-m", "rig", "check", "--unit", str(example["bad-unit.toml"])],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    assert proc.stderr.splitlines()[0] == "rig: the input has problems:"


def test_rig_run_reports_every_input_before_the_caution(
    example: dict[str, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    sequence = tmp_path / "bad-sequence.toml"
    sequence.write_text('[sequence]\nname = "x"\n', encoding="utf-8")
    args = ["run", str(sequence), "--station", str(example["station.toml"]), "--serial", "D1"]
    assert main([*args, "--unit", str(example["bad-unit.toml"]), "--yes"]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert "bad-sequence.toml [steps]: no steps" in captured.err
    assert "bad-unit.toml:9 [wires.a.length]" in captured.err


def test_coverage_reports_its_station_sequence_and_unit_together(
    example: dict[str, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    station = _bad_station(example, tmp_path)
    sequence = tmp_path / "bad-sequence.toml"
    sequence.write_text('[sequence]\nname = "x"\n', encoding="utf-8")
    args = ["coverage", str(sequence), "--station", str(station)]
    assert main([*args, "--unit", str(example["bad-unit.toml"])]) == 2
    err = capsys.readouterr().err
    assert "bad-station.toml:8 [station.watchdog]" in err
    assert "bad-sequence.toml [steps]: no steps" in err
    assert "bad-unit.toml:9 [wires.a.length]" in err


def test_check_warns_of_a_station_every_run_on_which_is_refused(
    example: dict[str, Path], capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    """A DMM past its calibration due date: the file is valid, but every run on it is refused
    (as `rig run` and the console refuse it); rig check, where a station is proved before it
    reaches the floor, says so, and who may allow an exception."""
    station = tmp_path / "past-due.toml"
    text = example["station.toml"].read_text(encoding="utf-8")
    assert text.count("calibration_due = ") >= 1
    first = text.index("calibration_due = ")
    end = text.index("\n", first)
    station.write_text(text[:first] + "calibration_due = 2020-01-31" + text[end:], "utf-8")
    code, out, err = check(capsys, "--station", station)
    assert (code, err) == (0, "")
    assert "rig run will refuse to start on this station" in out
    assert "was due for calibration on 2020-01-31" in out
    assert "only whoever answers for the station's calibration may allow it" in out
