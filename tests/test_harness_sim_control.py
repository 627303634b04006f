"""`rig harness sim` on fixed ports with a control channel: build faults added and cleared over
real TCP while the bench runs, checked by `rig harness check` through the real stack (pyvisa-py
over TCP, pyserial on a pty, a real SQLite store) against the one station file written at the
start.  Fault cases are invented for the tests."""

from __future__ import annotations

import json
import signal
import socket
from pathlib import Path

import pytest
from harness_helpers import one_blas_thread
from postgres_server import free_port
from sim_process import control, served

from rig.cli import EXIT_ABORTED, EXIT_BAD_INPUT, EXIT_FAIL, EXIT_PASS, main
from rig.config.fixture import load_fixture
from rig.config.station import load_station
from rig.harness.wire_list import load_wire_list
from rig.sim.control import handle_command
from rig.sim.harness_bench import HarnessBuild, HarnessFaults

one_blas_thread()

SHIPPED = Path(__file__).resolve().parent.parent / "sequences" / "harness"
WIRE_LIST = SHIPPED / "wire-list.csv"
FIXTURE = SHIPPED / "fixture.toml"


def _check(
    station: Path, serial: str, capsys: pytest.CaptureFixture[str]
) -> tuple[int, list[str], list[str]]:
    """Exit code, findings and warnings of one `rig harness check`."""
    args = ["harness", "check", str(WIRE_LIST), "--station", str(station), "--serial", serial]
    code = main([*args, "--ambient", "23 degC", "--json"])
    report = json.loads(capsys.readouterr().out)
    return code, list(report["notes"]), list(report["warnings"])


@pytest.mark.slow
def test_build_faults_change_over_the_control_channel_of_a_running_harness_bench(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    station = tmp_path / "harness-station.toml"
    dmm, supply, port = free_port(), free_port(), free_port()
    args = ["harness", "sim", str(WIRE_LIST), "--fixture", str(FIXTURE)]
    args += ["--station-out", str(station), "--dmm-port", str(dmm)]
    args += ["--supply-port", str(supply), "--control-port", str(port)]
    with served(args) as (proc, lines):
        assert f"  control    127.0.0.1:{port}\n" in lines, lines
        written = station.read_text(encoding="utf-8")
        loaded = load_station(station)
        assert loaded.instruments["dmm"].resource == f"TCPIP::127.0.0.1::{dmm}::SOCKET"
        assert loaded.instruments["supply"].resource == f"TCPIP::127.0.0.1::{supply}::SOCKET"
        assert control(port, "faults") == {"faults": []}
        code, notes, warnings = _check(station, "H-GOOD", capsys)
        assert code == EXIT_PASS, notes

        # two faults at once, one that moves wires (the harness is rebuilt) and one thin wire
        reply = control(port, "add swap:W4,W5 thin:W7")
        assert reply == {"faults": ["swap:W4,W5", "thin:W7"]}
        code, notes, warnings = _check(station, "H-TWO", capsys)
        assert code == EXIT_FAIL
        assert any("J2-4 and J2-5 are swapped" in n for n in notes), notes
        assert any("(wire W7, violet)" in n and "0.35 mm2 for 0.5 mm2" in n for n in notes), notes

        # refusals come back as JSON, name the spec, add nothing, and the bench serves on
        error = str(control(port, "add open:W99 thin:W1")["error"])
        assert "control channel [open:W99]: no wire 'W99' in wire-list.csv" in error
        error = str(control(port, "add swap:W5,W4")["error"])
        assert "already built with swap:W4,W5" in error  # a second swap would undo the first
        assert "expected one of" in str(control(port, "add bend:W1")["error"])
        assert "takes no value" in str(control(port, "add thin:W1=0.5mm2")["error"])
        assert "unknown instrument" in str(control(port, "instrument psu drop")["error"])
        state = control(port, "state")
        assert state["faults"] == ["swap:W4,W5", "thin:W7"]
        assert state["closed_relays"] == [] and state["outputs_on"] == []

        # an instrument fault, as on `rig sim`: the DMM drops every connection until cleared,
        # and the check ends aborted (exit 3), never with a verdict it did not measure
        assert control(port, "instrument dmm drop 0") == {"injected": "dmm", "kind": "drop"}
        # a meter that drops every connection is refused when the bench opens, before any run
        args = ["harness", "check", str(WIRE_LIST), "--station", str(station)]
        code = main([*args, "--serial", "H-DROP", "--ambient", "23 degC", "--json"])
        said = capsys.readouterr()
        assert code != EXIT_PASS and said.out == "", said
        assert "[dmm] at " in said.err and "nothing was run" in said.err, said.err

        # clear takes away the build faults and the instrument fault: the same harness passes
        assert control(port, "clear") == {"faults": []}
        code, notes, warnings = _check(station, "H-CLEARED", capsys)
        assert code == EXIT_PASS and warnings == [], (notes, warnings)
        assert station.read_text(encoding="utf-8") == written  # one station file throughout
        proc.send_signal(signal.SIGTERM)
        assert proc.wait(timeout=10) == 0
        assert proc.stderr is not None and "Traceback" not in proc.stderr.read()


@pytest.mark.parametrize("option", ["--supply-port", "--control-port"])
def test_harness_sim_on_a_port_in_use_says_so_and_leaves_nothing_listening(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], option: str
) -> None:
    dmm = free_port()
    with socket.create_server(("127.0.0.1", 0)) as taken:
        port = taken.getsockname()[1]
        args = ["harness", "sim", str(WIRE_LIST), "--fixture", str(FIXTURE)]
        args += ["--station-out", str(tmp_path / "s.toml"), "--dmm-port", str(dmm)]
        code = main([*args, option, str(port)])
    err = capsys.readouterr().err
    assert code == EXIT_ABORTED and "Traceback" not in err
    assert f"cannot listen on 127.0.0.1:{port}" in err
    with socket.create_server(("127.0.0.1", dmm)):  # the DMM served first, and was stopped
        pass


def test_harness_sim_refuses_a_thin_wire_it_cannot_build_and_a_fault_given_twice(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    wires = tmp_path / "wires.csv"
    wires.write_text(
        "# Invented wire list for a test.\n"
        "wire,net,from_connector,from_pin,to_connector,to_pin,gauge,length_m,colour\n"
        "W1,N1,J1,1,J2,1,0.13 mm2,1.0,red\n"
        "W2,N2,J1,2,J2,2,56 AWG,1.0,red\n",
        encoding="utf-8",
    )
    args = ["harness", "sim", str(wires), "--fixture", str(FIXTURE)]
    args += ["--station-out", str(tmp_path / "s.toml"), "--fault", "thin:W1"]
    args += ["--fault", "thin:W2", "--fault", "open:W1", "--fault", "open:W1"]
    assert main(args) == EXIT_BAD_INPUT
    err = capsys.readouterr().err
    assert "--fault [thin:W1]: no standard size below 0.13 mm2 (wire W1)" in err
    assert "--fault [thin:W2]: no standard size below 56 AWG (wire W2)" in err
    assert "--fault [open:W1]: the harness is already built with open:W1" in err
    assert "Traceback" not in err and not (tmp_path / "s.toml").exists()


def test_a_harness_rebuilt_on_the_control_channel_keeps_its_contacts(tmp_path: Path) -> None:
    """The same seed draws the same contacts whatever the faults: after `clear` the bench reads
    as it did before any fault, so a case proved after another is not a different harness."""
    fixture = load_fixture(FIXTURE)
    built = HarnessFaults(HarnessBuild(load_wire_list(WIRE_LIST, fixture), fixture, seed=3))
    before = dict(built.bench.unit.resistors)
    assert handle_command(built, "add misplaced:W5=J3-4 high:W1=0.2ohm")["faults"] == [
        "misplaced:W5=J3-4",
        "high:W1=0.2ohm",
    ]
    assert built.bench.unit.resistors["contact:W5:1"].a == "J3-4"
    assert [f.spec for f in built.bench.faults] == ["series:W1=0.2ohm"]
    assert handle_command(built, "clear") == {"faults": []}
    assert built.bench.unit.resistors == before and built.bench.faults == []
