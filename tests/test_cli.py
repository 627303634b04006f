"""The command line as a user meets it: exit codes, messages without tracebacks, JSON output,
and `rig sim` as a real subprocess with its state file and control channel."""

from __future__ import annotations

import json
import signal
import sqlite3
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_bench
from sim_process import control, control_port, served

from rig.cautions import HARNESS_CAUTION, WELL_CAUTION
from rig.cli import main
from rig.config.station import load_station


def test_demo_says_the_harness_and_the_well_cautions_first(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # the demo proves a harness and screens senders read against a well's temperature: both
    # cautions come before anything else, as rig run would say them for those sequences
    assert main(["demo", "--data-dir", str(tmp_path)]) == 0
    head = capsys.readouterr().out.split("Demo:")[0]
    assert HARNESS_CAUTION in head and WELL_CAUTION in head


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
    # one store, one bench per unit: each keeps its own station name (runs, relay wear)
    with sqlite3.connect(data["store"]) as db:
        names = dict(db.execute("SELECT DISTINCT unit, station FROM runs").fetchall())
    db.close()
    assert len(set(names.values())) == len(names) > 1, names


def test_a_virtual_harness_bench_is_named_after_its_wire_list() -> None:
    from rig.commands.harness import virtual_station_name

    assert virtual_station_name(SEQUENCES / "harness" / "wire-list.csv") == (
        "virtual-harness-wire-list"
    )


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


@pytest.mark.slow
def test_sim_subprocess_serves_writes_state_and_stops_on_sigterm(tmp_path: Path) -> None:
    station = tmp_path / "station.toml"
    state = tmp_path / "state.json"
    unit = str(SEQUENCES / "units" / "temp-circuit.toml")
    args = ["sim", "--unit", unit, "--fault", "open:signal", "--station-out", str(station)]
    with served([*args, "--state-file", str(state)]) as (proc, lines):
        port = control_port(lines)
        assert station.exists()
        # named after the unit it serves: a second bench written into the same store (another
        # unit, a harness) keeps its runs and relay wear apart (docs/reliability.md)
        assert load_station(station).name == "virtual-temp-circuit"
        data = json.loads(state.read_text(encoding="utf-8"))
        assert data["faults"] == ["open:signal"] and data["closed_relays"] == []
        assert data["outputs_on"] == [] and data["watchdog_tripped"] is False
        assert control(port, "add series:ground=1ohm")["faults"] == [
            "open:signal",
            "series:ground=1ohm",
        ]
        assert "error" in control(port, "add open:nowire")
        assert control(port, "clear")["faults"] == []
        assert json.loads(state.read_text(encoding="utf-8"))["faults"] == []
        proc.send_signal(signal.SIGTERM)
        assert proc.wait(timeout=10) == 0


def test_run_prints_relay_wear_under_the_verdict_and_in_json(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # A fixture whose relays are rated for 4 operations (invented: a relay worn nearly out):
    # after one run, the next run's record warns, and so must what the technician reads.
    seq = str(SEQUENCES / "temp-circuit-check.toml")
    fixture = tmp_path / "worn-fixture.toml"
    text = (SEQUENCES / "demo-fixture.toml").read_text(encoding="utf-8")
    worn = text.replace("rated_operations = 10000000", "rated_operations = 4")
    assert worn != text
    fixture.write_text(worn, encoding="utf-8")
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        station_text = station.path.read_text(encoding="utf-8")
        station.path.write_text(
            station_text.replace(str(station.fixture.path), str(fixture)), encoding="utf-8"
        )
        run = ["run", seq, "--station", str(station.path), "--serial"]
        assert main([*run, "W1"]) == 0
        first = capsys.readouterr().out
        assert main([*run, "W2"]) == 0
        second = capsys.readouterr().out
        assert main([*run, "W3", "--json"]) == 0
        third = json.loads(capsys.readouterr().out)
    assert "warning:" not in first  # no operations recorded before the first run
    verdict, record = second.index("verdict: PASS"), second.index("record: run 2")
    shown = [line for line in second[verdict:record].splitlines() if line.startswith("warning: ")]
    assert shown and all("of its rated 4 operations; plan to replace it" in s for s in shown)
    assert third["warnings"] and all("plan to replace it" in w for w in third["warnings"])
    assert set(third["warnings"]) <= set(third["notes"])


def test_run_readings_prints_every_stored_reading_marking_the_settle_proof(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # With no stated settle, each route is proved settled by readings until two agree: those
    # that only prove it are stored too (nothing measured is thrown away), and --readings must
    # print each stored reading once, the proof marked, as the store flags it (settled = 0).
    text = (SEQUENCES / "temp-circuit-check.toml").read_text(encoding="utf-8")
    unsettled = "\n".join(t for t in text.splitlines() if not t.startswith("settle = "))
    assert unsettled != text
    sequence = tmp_path / "proved.toml"
    sequence.write_text(unsettled, encoding="utf-8")
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        run = ["run", str(sequence), "--station", str(station.path), "--serial", "P1"]
        assert main([*run, "--readings"]) == 0
    printed = []
    for line in capsys.readouterr().out.splitlines():
        if line.startswith("    stored "):
            _, step, role, value, rest = line.split(maxsplit=4)
            printed.append((step, role, float(value), 0 if rest.endswith("(settle proof)") else 1))
    with sqlite3.connect(station.store_path) as db:
        stored = db.execute("SELECT step_id, role, value, settled FROM readings").fetchall()
    assert any(row[3] == 0 for row in stored)  # the proof was needed on this sequence
    assert sorted(printed) == sorted(stored)
