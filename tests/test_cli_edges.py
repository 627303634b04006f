"""The command line where the user's surroundings are unusual: no terminal to answer a prompt,
a reader that stops reading, a blank serial number.  Each ends in a sentence and an exit code,
never a traceback, and a run that had started still ends safe and recorded."""

from __future__ import annotations

import io
import json
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest
from bench_helpers import MIDWAY_STOP, SEQUENCES, shipped_bench, shipped_plan

from rig.cli import EXIT_ABORTED, EXIT_BAD_INPUT, EXIT_PASS, main
from rig.cli_output import Output
from rig.events import StepResult
from rig.judge.decision import DecisionRule, Limits, Verdict
from rig.runner import run_plan

SENSOR_SCREEN = SEQUENCES / "ntc-sender-screen.toml"  # begins with an operator prompt


def test_a_prompt_with_no_one_to_answer_ends_the_run_aborted_and_recorded(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(sys, "stdin", io.StringIO(""))  # a script's input that has ended
    with shipped_bench("ntc-sender", folder=tmp_path) as (bench, station):
        code = main(["run", str(SENSOR_SCREEN), "--station", str(station.path), "--serial", "N1"])
        assert bench.relay_box.closed() == frozenset()
        assert bench.state()["outputs_on"] == []
    captured = capsys.readouterr()
    assert code == EXIT_ABORTED
    assert "Traceback" not in captured.err
    assert "got no answer: standard input ended" in captured.out
    assert "--yes" in captured.out
    with sqlite3.connect(station.store_path) as db:
        status, reason = db.execute("SELECT status, reason FROM runs").fetchone()
    assert status == "aborted" and "got no answer" in reason
    # its diagnosis says what its report says, not that it found nothing to diagnose
    assert main(["diagnose", "1", "--station", str(station.path)]) == 0
    said = capsys.readouterr().out
    assert "no diagnosis is made of an aborted run" in said, said


@pytest.mark.parametrize(
    ("serial", "said"),
    [
        ("", "--serial: the unit's serial number is blank"),
        ("   ", "--serial: the unit's serial number is blank"),
        # a scanner set to send a tab: the console refuses it, and so must the command line
        (
            "HG 001\tx",
            "--serial: the serial number holds a control character (U+0009) at "
            "character 7; expected printable text on one line",
        ),
        ("S" * 65, "--serial: a serial number has at most 64 characters; this one has 65"),
    ],
)
def test_a_serial_that_cannot_be_filed_is_refused_before_anything_moves(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], serial: str, said: str
) -> None:
    with shipped_bench("ntc-sender", folder=tmp_path) as (bench, station):
        run = ["run", str(SENSOR_SCREEN), "--station", str(station.path), "--serial", serial]
        assert main([*run, "--yes"]) == EXIT_BAD_INPUT
        assert sum(bench.relay_box.operation_counts().values()) == 0
    assert said in capsys.readouterr().err
    assert not station.store_path.exists() or _runs(station.store_path) == 0


def _runs(store: Path) -> int:
    with sqlite3.connect(store) as db:
        return int(db.execute("SELECT COUNT(*) FROM runs").fetchone()[0])


def test_a_reader_that_stops_reading_gets_no_traceback(tmp_path: Path) -> None:
    # `rig check ... | head -1`: the reader's end is closed before rig writes (EPIPE); rig stops
    # writing and exits as usual (Python documentation, signal module, "Note on SIGPIPE").
    with shipped_bench("ntc-sender", folder=tmp_path) as (_, station):
        check = [sys.executable, "-m", "rig.cli", "check", str(SENSOR_SCREEN)]
        proc = subprocess.Popen(
            [*check, "--station", str(station.path)],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
        )
        assert proc.stdout is not None and proc.stderr is not None
        proc.stdout.close()  # gone before rig's first line
        err = proc.stderr.read().decode()
        code = proc.wait(timeout=60)
    assert "Traceback" not in err and "BrokenPipeError" not in err, err
    assert code == 0, err


POWERED = """
[sequence]
name = "powered-check"
[[steps]]
id = "feed"
kind = "volts"
hi = "P_5V"
lo = "P_GND"
nominal = "5 V"
tolerance = "5 %"
supply = { pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "LIMIT" }
[[steps]]
id = "confirm"
kind = "prompt"
text = "Is the unit's lamp lit?"
"""


def test_check_shows_what_the_supply_is_set_to_and_an_aborted_run_is_not_sent_to_diagnose(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    sequence = tmp_path / "powered.toml"
    sequence.write_text(POWERED.replace("LIMIT", "5 A"), encoding="utf-8")
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        assert main(["check", str(sequence), "--station", str(station.path)]) == 0
        shown = capsys.readouterr().out
        code = main(
            ["run", str(sequence), "--station", str(station.path), "--serial", "S5", "--yes"]
        )
        ran = capsys.readouterr().out
    table = shown.split("the supply, step by step")[1]
    assert "feed" in table and "5 V" in table and "5 A" in table
    prompt_row = next(line for line in shown.splitlines() if line.startswith("confirm"))
    assert "auto" not in prompt_row  # a prompt has no meter range
    # the virtual supply's limit stops at 3 A: the run is refused by the supply, not the unit
    assert code == EXIT_ABORTED
    assert "the supply refused the command 'CURR 5'" in ran
    assert "rig diagnose" not in ran


def test_the_results_table_gives_an_answer_and_a_fault_count_in_words(
    capsys: pytest.CaptureFixture[str],
) -> None:
    def result(kind: str, value: float, unit: str, limits: Limits) -> StepResult:
        return StepResult(
            1, kind, kind, "", {}, value, unit, limits, None, 0.0, 0.0, 2.0,
            DecisionRule.SIMPLE, Verdict.PASS, None, False, 1, 0.0,
        )  # fmt: skip

    Output().results(
        [
            result("prompt", 1.0, "", Limits(0.5, None)),  # as the prompt step gives it
            result("harness-proof", 2.0, "faults", Limits(None, 0.0)),  # as the harness proof
            result("volts", 2.5, "V", Limits(0.6, 4.8)),
        ]
    )
    rows = {line.split()[0]: line for line in capsys.readouterr().out.splitlines()[2:]}
    assert "confirmed" in rows["prompt"] and "0.5" not in rows["prompt"]
    assert "2 fault(s) found" in rows["harness-proof"] and "none allowed" in rows["harness-proof"]
    assert "2.5 V" in rows["volts"] and "600 mV .. 4.8 V" in rows["volts"]


def test_the_demo_names_each_run_by_the_id_rig_report_takes(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["demo", "--data-dir", str(tmp_path)]) == 0
    text = capsys.readouterr().out
    assert "12 runs stored in" in text and "(runs 1 to 12)" in text
    first = next(line for line in text.splitlines() if line.startswith("run 1 "))
    assert main(["report", "1", "--store", str(tmp_path / "results.sqlite"), "--out", "-",
                 "--format", "json"]) == 0  # fmt: skip
    assert json.loads(capsys.readouterr().out)["run"]["serial"] in first
    # the demo's harness station: the harness proof's many routes are counted, not listed
    harness = ["check", str(SEQUENCES / "harness" / "harness-proof.toml")]
    assert main([*harness, "--station", str(tmp_path / "station-harness.toml")]) == 0
    row = next(line for line in capsys.readouterr().out.splitlines() if line.startswith("harness "))
    assert " routes " in row and len(row) < 160
    assert " none allowed " in row and "-inf" not in row  # as rig run words it


def test_a_prompt_that_cannot_be_put_ends_the_run_aborted_and_recorded(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    def reader_gone(prompt: str = "") -> str:
        raise BrokenPipeError(32, "Broken pipe")  # what input() raises when its reader is gone

    monkeypatch.setattr("builtins.input", reader_gone)
    with shipped_bench("ntc-sender", folder=tmp_path / "cli") as (bench, station):
        code = main(["run", str(SENSOR_SCREEN), "--station", str(station.path), "--serial", "N2"])
        assert bench.relay_box.closed() == frozenset()
    assert code == EXIT_ABORTED and "Traceback" not in capsys.readouterr().err
    with sqlite3.connect(station.store_path) as db:
        assert db.execute("SELECT status FROM runs").fetchone()[0] == "aborted"

    # any front end whose question fails (a window closed under it) ends the run the same way
    def window_gone(text: str) -> bool:
        raise RuntimeError("the window was closed")

    with shipped_bench("ntc-sender", folder=tmp_path / "engine") as (bench, station):
        summary = run_plan(shipped_plan("ntc-sender-screen", station), "N3", ask=window_gone)
        assert bench.relay_box.closed() == frozenset()
    assert summary.status == "aborted" and "could not be put" in summary.reason


def test_a_declined_prompt_is_not_sent_to_diagnose(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(sys, "stdin", io.StringIO("n\n"))  # the operator answers no
    with shipped_bench("ntc-sender", folder=tmp_path) as (_, station):
        code = main(["run", str(SENSOR_SCREEN), "--station", str(station.path), "--serial", "N4"])
        out = capsys.readouterr().out
        report = ["report", "1", "--station", str(station.path), "--format", "json", "--out", "-"]
        assert main(report) == 0
        diagnosis = json.loads(capsys.readouterr().out)["diagnosis"]
    assert code == 1 and "declined" in out  # the run went on and failed on the answer
    assert "no stops the run" not in out  # a no that only fails its step is asked plainly
    assert "rig diagnose" not in out
    assert not diagnosis["available"] and "an operator's answer" in diagnosis["message"]


def test_a_no_to_a_prompt_that_stops_the_run_ends_it_aborted_and_says_so_as_it_asks(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    text = SENSOR_SCREEN.read_text(encoding="utf-8")
    asked = 'kind = "prompt"\n'
    sequence = tmp_path / "stopping.toml"
    sequence.write_text(text.replace(asked, asked + 'declined = "stop"\n', 1), encoding="utf-8")
    monkeypatch.setattr(sys, "stdin", io.StringIO("n\n"))  # the operator answers no
    with shipped_bench("ntc-sender", folder=tmp_path) as (bench, station):
        code = main(["run", str(sequence), "--station", str(station.path), "--serial", "N5"])
        assert bench.relay_box.closed() == frozenset()
        assert bench.state()["outputs_on"] == []
    out = capsys.readouterr().out
    assert code == EXIT_ABORTED
    assert "clip its two leads to T1 and T2. (no stops the run) [y/N]" in out
    assert "reason: step place: the operator declined 'Place the sender" in out
    assert "the sequence stops the run on a no" in out
    assert "sender-4wire" in out and "NOT RUN" in out  # what was never measured is listed
    with sqlite3.connect(station.store_path) as db:
        status, reason = db.execute("SELECT status, reason FROM runs").fetchone()
        readings = db.execute("SELECT COUNT(*) FROM readings").fetchone()[0]
    assert status == "aborted" and "declined" in reason and readings == 0
    assert main(["check", str(sequence), "--station", str(station.path)]) == 0
    assert "confirmed, or stop" in capsys.readouterr().out  # the plan says what a no does


def test_a_supply_setting_above_the_stations_caps_is_refused_before_anything_is_powered(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # Set the current limit no higher than the circuit needs (the project's cautions; common
    # practice, no published source): the station states what its wiring may carry.
    sequence = tmp_path / "powered.toml"
    sequence.write_text(POWERED.replace("LIMIT", "2 A"), encoding="utf-8")
    supply_line = next(n for n, t in enumerate(POWERED.splitlines(), 1) if t.startswith("supply"))
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        text = station.path.read_text(encoding="utf-8")
        capped = text.replace(
            "[supply]\n", '[supply]\nmax_voltage = "16 V"\nmax_current = "0.5 A"\n'
        )
        assert capped != text
        station.path.write_text(capped, encoding="utf-8")
        code = main(
            ["run", str(sequence), "--station", str(station.path), "--serial", "C1", "--yes"]
        )
        assert (
            bench.state()["outputs_on"] == []
            and sum(bench.relay_box.operation_counts().values()) == 0
        )
        err = capsys.readouterr().err
        sequence.write_text(POWERED.replace("LIMIT", "50 mA"), encoding="utf-8")
        assert main(["check", str(sequence), "--station", str(station.path)]) == 0
        shown = capsys.readouterr().out
    assert code == EXIT_BAD_INPUT
    assert f"powered.toml:{supply_line} [steps[0].supply.limit]" in err
    assert "2 A is above the station's max_current of 500 mA" in err
    assert "[steps[0].supply.voltage]" not in err  # 5 V is within 16 V
    assert "the station allows at most voltage 16 V and limit 500 mA" in shown


def test_check_shows_each_steps_limits_as_the_file_sets_them(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # the shipped pressure check: a fixed nominal +/- 5 % and a ratiometric tolerance, which is
    # in points of the supply (docs/sequence-file.md), said as such
    with shipped_bench("pressure-circuit", folder=tmp_path) as (_, station):
        check = ["check", str(SEQUENCES / "pressure-circuit-check.toml")]
        assert main([*check, "--station", str(station.path)]) == 0
    rows = {line.split()[0]: line for line in capsys.readouterr().out.splitlines() if line}
    assert "4.75 V .. 5.25 V" in rows["reference-at-sensor"]  # 5 V +/- 5 %
    assert "model ± 2 % of supply" in rows["output-fraction"]


def test_check_gives_an_ntc_read_as_a_voltage_its_tolerance_in_volts(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    text = (SEQUENCES / "temp-circuit-check.toml").read_text(encoding="utf-8")
    assert 'tolerance = "4 %"' in text
    sequence = tmp_path / "volts-tolerance.toml"
    sequence.write_text(text.replace('tolerance = "4 %"', 'tolerance = "0.1 V"'), encoding="utf-8")
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        assert main(["check", str(sequence), "--station", str(station.path)]) == 0
    row = next(line for line in capsys.readouterr().out.splitlines() if "signal-vs-curve" in line)
    assert "model ± 100 mV" in row


def test_python_dash_m_rig_runs_the_same_commands(tmp_path: Path) -> None:
    # For an environment whose scripts folder is not on the PATH: the module form reads the same
    # arguments and gives the same exit codes (2: bad input, naming the file).
    missing = tmp_path / "nowhere.toml"
    done = subprocess.run(
        [sys.executable, "-m", "rig", "check", str(missing), "--station", str(missing)],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert done.returncode == 2, done.stderr
    assert "nowhere.toml" in done.stderr and "Traceback" not in done.stderr


def test_an_aborted_run_lists_the_planned_steps_it_never_measured(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    # the run stops at its second step (no one to answer): the first is judged, the question is
    # cut short, the last two were never begun; the table and --json say so, and the store
    # keeps a row for the judged step only (nothing is made up for the others)
    sequence = tmp_path / "stops-midway.toml"
    sequence.write_text(MIDWAY_STOP, encoding="utf-8")
    monkeypatch.setattr(sys, "stdin", io.StringIO(""))
    with shipped_bench("ntc-sender", folder=tmp_path / "bench") as (_, station):
        run = ["run", str(sequence), "--station", str(station.path), "--serial", "M1"]
        assert main(run) == EXIT_ABORTED
        table = [line.strip() for line in capsys.readouterr().out.splitlines()]
        assert main([*run, "--json"]) == EXIT_ABORTED
        printed = capsys.readouterr().out
        data = json.loads(printed[printed.index("{") :])  # after the unanswered question
        with sqlite3.connect(station.store_path) as db:
            stored = db.execute("SELECT run_id, step_id FROM steps ORDER BY run_id").fetchall()
    header = next(n for n, line in enumerate(table) if line.startswith("step "))
    rows = {}
    for line in table[header + 2 :]:
        if not line:
            break
        rows[line.split()[0]] = line
    assert list(rows) == ["lead-check", "seated", "lead-check-4w", "hold"]  # in plan order
    assert rows["lead-check"].endswith("PASS")
    assert rows["seated"].endswith("NOT FINISHED")
    assert rows["lead-check-4w"].endswith("NOT RUN") and rows["hold"].endswith("NOT RUN")
    assert [s["id"] for s in data["steps"]] == ["lead-check"]
    assert data["cut_short"] == "seated" and data["not_run"] == ["lead-check-4w", "hold"]
    assert stored == [(1, "lead-check"), (2, "lead-check")]


def test_with_json_a_prompt_is_asked_on_stderr_and_stdout_stays_one_document(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    # A script reading `rig run --json` parses standard output: the question it answers on
    # standard input must not land in the middle of the JSON.
    monkeypatch.setattr(sys, "stdin", io.StringIO("y\n"))
    with shipped_bench("ntc-sender", folder=tmp_path) as (_, station):
        run = ["run", str(SENSOR_SCREEN), "--station", str(station.path), "--serial", "J1"]
        code = main([*run, "--json"])
    captured = capsys.readouterr()
    summary = json.loads(captured.out)
    assert code == 0 and summary["status"] == "complete"
    assert "[y/N]" in captured.err and "[y/N]" not in captured.out


def test_a_wire_list_is_checked_alone_against_its_fixture(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # a harness shop checks the list it was given before any bench is set up; a list given
    # where a sequence goes is named for what it is
    harness = SEQUENCES / "harness"
    wires, fixture = harness / "wire-list.csv", harness / "fixture.toml"
    assert main(["check", "--wire-list", str(wires), "--fixture", str(fixture)]) == 0
    assert "valid, 12 rows in 10 nets" in capsys.readouterr().out
    assert main(["check", str(wires), "--station", str(fixture)]) == EXIT_BAD_INPUT
    assert "is a wire list, not a sequence" in capsys.readouterr().err
    bad = tmp_path / "bad.csv"
    lines = wires.read_text(encoding="utf-8").splitlines()
    bad.write_text("\n".join(line.replace("J1", "J9") for line in lines) + "\n", encoding="utf-8")
    assert main(["check", "--wire-list", str(bad), "--fixture", str(fixture)]) == EXIT_BAD_INPUT
    err = capsys.readouterr().err
    assert f"{bad}:" in err and "Traceback" not in err


def test_a_value_written_like_a_negative_number_stays_with_its_option() -> None:
    # argparse reads '-1mohm' as an option (it is not a plain number); joined to the option
    # that takes it, only where that option takes a value and never after '--'
    from rig.signed_values import join_signed_values

    options = {"--contact-allowance", "--ambient"}
    assert join_signed_values(["--contact-allowance", "-1mohm", "--json", "-5"], options) == [
        "--contact-allowance=-1mohm",
        "--json",
        "-5",
    ]
    assert join_signed_values(["--ambient", "-.5degC"], options) == ["--ambient=-.5degC"]
    assert join_signed_values(["--ambient", "--json"], options) == ["--ambient", "--json"]
    assert join_signed_values(["--", "--ambient", "-1"], options) == ["--", "--ambient", "-1"]


def test_every_option_that_takes_a_value_is_known_to_the_joining() -> None:
    from rig.cli import _parser
    from rig.signed_values import value_options

    found = value_options(_parser())
    assert {"--contact-allowance", "--ambient", "--isolation", "--station"} <= found
    assert "--json" not in found and "--verbose" not in found


@pytest.mark.parametrize("option", ["--control-port", "--dmm-port"])
def test_sim_on_a_port_in_use_says_so_and_leaves_nothing_listening(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], option: str
) -> None:
    import socket

    with socket.create_server(("127.0.0.1", 0)) as taken:
        port = taken.getsockname()[1]
        unit = str(SEQUENCES / "units" / "ntc-sender.toml")
        args = ["sim", "--unit", unit, "--station-out", str(tmp_path / "s.toml"), option, str(port)]
        code = main(args)
    err = capsys.readouterr().err
    assert code == EXIT_ABORTED and "Traceback" not in err
    assert f"cannot listen on 127.0.0.1:{port}" in err


def test_the_librarys_log_shows_its_errors_in_rigs_words_and_keeps_its_warnings_quiet(
    tmp_path: Path,
) -> None:
    """What a technician must act on is said by the commands as `warning:` lines; the library's
    log (a driver's retry, a cleared trip) repeated them raw (`WARNING:drivers.relay_serial:...`).
    A process that ran a rig command logs errors as `rig: ...` and warnings not at all, unless
    --verbose."""
    script = (
        "import logging, sys\n"
        "from rig.cli import main\n"
        "main(sys.argv[1:])\n"
        "logging.getLogger('drivers.relay_serial').warning('a warning the commands say')\n"
        "logging.getLogger('drivers.relay_serial').error('heartbeat stopped')\n"
    )
    station = SEQUENCES / "units" / "ntc-sender.toml"
    for extra, warned in (([], False), (["--verbose"], True)):
        done = subprocess.run(
            [sys.executable, "-c", script, *extra, "check", "--unit", str(station)],
            capture_output=True,
            text=True,
            check=True,
        )
        assert ("a warning the commands say" in done.stderr) is warned, done.stderr
        assert "WARNING:drivers" not in done.stderr
        if not warned:
            assert "rig: heartbeat stopped" in done.stderr


def test_a_unit_tested_before_is_said_before_its_run_and_still_runs(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # a label scanned twice, or a unit back on the bench: a retest is normal (common practice,
    # no published source), so it is said, not refused, and every run is kept
    with shipped_bench("ntc-sender", folder=tmp_path) as (_, station):
        run = ["run", str(SENSOR_SCREEN), "--station", str(station.path), "--yes"]
        assert main([*run, "--serial", "DUP-1"]) == EXIT_PASS
        assert "note: DUP-1 has" not in capsys.readouterr().out
        assert main([*run, "--serial", "DUP-1"]) == EXIT_PASS
        second = capsys.readouterr().out
        assert main([*run, "--serial", "DUP-2"]) == EXIT_PASS
        other = capsys.readouterr().out
    assert (
        "note: DUP-1 has an earlier run of ntc-sender-screen on this station; the latest: run 1, "
        "pass (complete), started " in second
    )
    assert "note:" not in other and _runs(station.store_path) == 3


def test_a_claim_screened_before_is_said_before_its_run_whatever_the_serial(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # a returned unit's claim screened twice (a unit swapped, a label mistyped) is said, as a
    # serial tested before is, and the run goes on (common practice, no published source); a
    # claim typed with other letter case or spaces is the same claim, named as it is stored,
    # since rig runs --claim finds only that.  Claims and serials invented.
    with shipped_bench("ntc-sender", folder=tmp_path) as (_, station):
        run = ["run", str(SENSOR_SCREEN), "--station", str(station.path), "--yes"]
        assert main([*run, "--serial", "RET-1", "--claim", "RMA 2026/0042"]) == EXIT_PASS
        assert "note:" not in capsys.readouterr().out
        assert main([*run, "--serial", "RET-2", "--claim", "rma 2026/00 42"]) == EXIT_PASS
        swapped = capsys.readouterr().out
        assert main([*run, "--serial", "RET-2", "--claim", "RMA 2026/0042"]) == EXIT_PASS
        again = capsys.readouterr().out
        assert main([*run, "--serial", "RET-3", "--claim", "RMA 2026/00421"]) == EXIT_PASS
        other = capsys.readouterr().out
        assert main([*run, "--serial", "RET-4"]) == EXIT_PASS  # no claim: none is said
        unclaimed = capsys.readouterr().out
    assert (
        "note: claim 'rma 2026/00 42' was given to an earlier run of ntc-sender-screen on this "
        "station (serial RET-1); the latest: run 1, pass (complete), started "
    ) in swapped
    assert "; stored as 'RMA 2026/0042' (rig runs --claim matches exactly)\n" in swapped
    assert "note: RET-2 has" not in swapped  # a new serial
    assert "note: RET-2 has an earlier run of ntc-sender-screen on this station" in again
    assert (
        "note: claim 'RMA 2026/0042' was given to 2 earlier runs of ntc-sender-screen on this "
        "station (serials RET-1, RET-2); the latest: run 2, serial RET-2, pass (complete), "
        "started "
    ) in again
    assert "; stored as 'rma 2026/00 42' (rig runs" in again  # the exact one is not listed
    assert "note:" not in other and "note:" not in unclaimed
    assert _runs(station.store_path) == 5
