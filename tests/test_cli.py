"""The command line as a user meets it: exit codes, messages without tracebacks, JSON output,
and `rig sim` as a real subprocess with its state file and control channel."""

from __future__ import annotations

import json
import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_bench

from rig.cli import main


def test_demo_json_lists_every_run_with_its_verdict(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["demo", "--json", "--data-dir", str(tmp_path)]) == 0
    data = json.loads(capsys.readouterr().out)
    assert Path(data["store"]).exists()
    runs = data["runs"]
    assert {"run_id", "serial", "sequence", "unit", "faults", "verdict", "failed_steps"} <= set(
        runs[0]
    )
    for run in runs:
        if run["faults"]:
            assert run["verdict"] in ("fail", "conditional fail", "error"), run
            assert run["failed_steps"], run
            # the diagnosis names the fault the virtual bench injected (the fitted value of a
            # parametric fault may differ in its last digits, so compare kind and target)
            # (whole-harness proofs name their findings in the step note instead)
            injected = run["faults"][0].split("=")[0]
            if run["unit"] != "harness":
                assert injected in run["likely_fault"], run
        else:
            assert run["verdict"] in ("pass", "conditional pass"), run
            assert run["failed_steps"] == []


def test_check_shows_routes_and_physical_limit(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        code = main(
            ["check", str(SEQUENCES / "temp-circuit-check.toml"), "--station", str(station.path)]
        )
        assert bench.relay_box.closed() == frozenset()  # check moves nothing
    out = capsys.readouterr().out
    assert code == 0
    assert "signal-wire-drop" in out and "interlocks" in out
    assert "duration at the physical limit" in out


def test_run_exit_codes_and_json(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    seq = str(SEQUENCES / "temp-circuit-check.toml")
    with shipped_bench("temp-circuit", folder=tmp_path / "good") as (_, station):
        assert main(["run", seq, "--station", str(station.path), "--serial", "A1", "--json"]) == 0
        good = json.loads(capsys.readouterr().out)
    assert good["verdict"] == "pass" and good["safe"] is True
    with shipped_bench("temp-circuit", ("open:ground",), folder=tmp_path / "bad") as (_, station):
        code = main(["run", seq, "--station", str(station.path), "--serial", "A2"])
        out = capsys.readouterr().out
    assert code == 1
    assert "FAIL" in out and "record: run" in out


def test_broken_sequence_is_refused_with_file_and_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    bad = tmp_path / "bad.toml"
    bad.write_text(
        '[sequence]\nname = "x"\n\n[[steps]]\nid = "a"\nkind = "volts"\nhi = "NOPE"\n'
        'lo = "C_GND"\nlow = "0.6 kohm"\nhigh = "4.8 V"\n',
        encoding="utf-8",
    )
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        code = main(["run", str(bad), "--station", str(station.path), "--serial", "Z"])
        assert bench.relay_box.operation_counts() == {
            r: 0 for r in bench.relay_box.operation_counts()
        }
    err = capsys.readouterr().err
    assert code == 2
    assert "Traceback" not in err
    assert f"{bad}:9 [steps[0].low]" in err and "expected a value in V" in err


def test_toml_syntax_error_names_the_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    bad = tmp_path / "broken.toml"
    bad.write_text('[sequence]\nname = "x\n', encoding="utf-8")
    assert main(["check", str(bad), "--station", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "broken.toml:2" in err and "Traceback" not in err


def _control(port: int, command: str) -> dict[str, object]:
    with socket.create_connection(("127.0.0.1", port), timeout=5) as sock:
        stream = sock.makefile("rw", encoding="utf-8", newline="\n")
        stream.write(command + "\n")
        stream.flush()
        return dict(json.loads(stream.readline()))


@pytest.mark.slow
def test_sim_subprocess_serves_writes_state_and_stops_on_sigterm(tmp_path: Path) -> None:
    station = tmp_path / "station.toml"
    state = tmp_path / "state.json"
    proc = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "rig.cli",
            "sim",
            "--unit",
            str(SEQUENCES / "units" / "temp-circuit.toml"),
            "--fault",
            "open:signal",
            "--station-out",
            str(station),
            "--state-file",
            str(state),
        ],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env={**os.environ, "PYTHONUNBUFFERED": "1"},
    )
    try:
        lines = []
        deadline = time.monotonic() + 20
        while time.monotonic() < deadline:
            line = proc.stdout.readline() if proc.stdout else ""
            lines.append(line)
            if "Ctrl-C" in line:
                break
        port = int(next(li for li in lines if "control" in li).rsplit(":", 1)[1])
        assert station.exists()
        data = json.loads(state.read_text(encoding="utf-8"))
        assert data["faults"] == ["open:signal"] and data["closed_relays"] == []
        assert data["outputs_on"] == [] and data["watchdog_tripped"] is False
        assert _control(port, "add series:ground=1ohm")["faults"] == [
            "open:signal",
            "series:ground=1ohm",
        ]
        assert "error" in _control(port, "add open:nowire")
        assert _control(port, "clear")["faults"] == []
        assert json.loads(state.read_text(encoding="utf-8"))["faults"] == []
        proc.send_signal(signal.SIGTERM)
        assert proc.wait(timeout=10) == 0
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
