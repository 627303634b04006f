"""SIGTERM in the middle of a run: the controller opens every relay, switches the supply off,
records the run as aborted and exits with 3 (the bench's own state file is the witness)."""

from __future__ import annotations

import json
import os
import re
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

from bench_helpers import SEQUENCES

from rig.config.fixture import load_fixture
from rig.config.unit_file import load_unit
from rig.sim.bench import VirtualBench

SEQUENCE = """
[sequence]
name = "held"
reorder = false
[[steps]]
id = "signal"
kind = "volts"
hi = "C_SIG"
lo = "C_GND"
low = "0.6 V"
high = "4.8 V"
[[steps]]
id = "hold"
kind = "soak"
duration = "30 s"
"""


def test_sigterm_mid_run_leaves_bench_safe_and_run_aborted(tmp_path: Path) -> None:
    unit = load_unit(SEQUENCES / "units" / "temp-circuit.toml")
    state = tmp_path / "state.json"
    seq = tmp_path / "held.toml"
    seq.write_text(SEQUENCE, encoding="utf-8")
    with VirtualBench(unit, load_fixture(unit.fixture_path), state_file=state) as bench:
        station = bench.write_station(tmp_path / "station.toml", data_dir=str(tmp_path / "data"))
        proc = subprocess.Popen(
            [
                sys.executable,
                "-m",
                "rig.cli",
                "run",
                str(seq),
                "--station",
                str(station),
                "--serial",
                "T-1",
            ],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
            env={**os.environ, "PYTHONUNBUFFERED": "1"},
        )
        try:
            deadline = time.monotonic() + 20
            while time.monotonic() < deadline:  # wait until the soak holds relays closed
                data = json.loads(state.read_text(encoding="utf-8"))
                if data["closed_relays"]:
                    break
                time.sleep(0.05)
            assert data["closed_relays"], "the run never closed a relay"
            time.sleep(0.3)
            proc.send_signal(signal.SIGTERM)
            printed, errors = proc.communicate(timeout=15)
            code = proc.returncode
        finally:
            if proc.poll() is None:
                proc.kill()
                proc.wait()
        final = json.loads(state.read_text(encoding="utf-8"))
        assert bench.relay_box.closed() == frozenset()
    assert code == 3
    assert final["closed_relays"] == [] and final["outputs_on"] == []
    db = sqlite3.connect(tmp_path / "data" / "results.sqlite")
    status, reason = db.execute("SELECT status, reason FROM runs").fetchone()
    readings = db.execute("SELECT COUNT(*) FROM readings").fetchone()[0]
    db.close()
    assert status == "aborted" and "SIGTERM" in reason
    assert readings >= 1  # the reading taken before the signal is kept
    # said as any other run's end: its steps, its decision, where it is recorded
    assert "rig: interrupted; run 1 is recorded as aborted" in errors
    assert re.search(r"^verdict: \w+  \(aborted\)$", printed, re.MULTILINE)
    assert "screen decision: undecided" in printed and "record: run 1 in " in printed
