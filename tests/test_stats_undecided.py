"""The failure Pareto of ``rig stats`` counts part failures only: a run the screen does not decide
(a question answered no, the bench's reference failed) and the bench's own reference step are no
failures of the part, as the runs-not-decided table and docs/reports-and-stats.md say.

Real runs of the shipped NTC screen on the virtual bench, with the sender's lead open (both
sender steps then fail on every run), into a real SQLite file; the counts are recomputed here
from the stored steps in plain Python."""

from __future__ import annotations

import io
import json
import re
import sys
from collections import Counter
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_bench

from rig.cli import main
from rig.store import ResultStore

SCREEN = SEQUENCES / "ntc-sender-screen.toml"


def _cold_reference_copy(folder: Path) -> Path:
    """The shipped screen with its well's top limit put under the bench's 23 degC (the unit
    file's ambient): an edited version of the same sequence whose bench reference fails."""
    text = SCREEN.read_text(encoding="utf-8")
    edited = text.replace('high = "40 degC"', 'high = "22 degC"', 1)
    assert edited != text
    path = folder / "ntc-sender-screen-cold.toml"
    path.write_text(edited, encoding="utf-8")
    return path


def test_the_pareto_leaves_out_runs_not_decided_and_the_benchs_reference(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    cold = _cold_reference_copy(tmp_path)
    with shipped_bench("ntc-sender", ("open:lead_a",), folder=tmp_path) as (_, station):
        base = ["--station", str(station.path)]
        assert main(["run", str(SCREEN), *base, "--serial", "U-1", "--yes"]) == 1  # decided
        monkeypatch.setattr(sys, "stdin", io.StringIO("n\n"))  # the operator answers no
        assert main(["run", str(SCREEN), *base, "--serial", "U-2"]) == 1
        assert main(["run", str(cold), *base, "--serial", "U-3", "--yes"]) == 1
        capsys.readouterr()
        store = ResultStore(station.store_path)
        try:
            runs = {r["serial"]: r for r in store.runs()}
            steps = {serial: store.steps(r["id"]) for serial, r in runs.items()}
        finally:
            store.close()
        assert main(["stats", *base, "--json"]) == 0
        data = json.loads(capsys.readouterr().out)
        assert main(["stats", *base]) == 0
        text = capsys.readouterr().out
    verdicts = {s: {x["step_id"]: x["verdict"] for x in rows} for s, rows in steps.items()}
    # what the bench did: all three completed with the sender's steps failed on the open lead
    assert all(r["status"] == "complete" and r["verdict"] == "fail" for r in runs.values())
    assert verdicts["U-2"]["place"] == "fail"  # the no
    assert verdicts["U-3"]["well-temperature"] == "fail"  # 23 degC over 22 degC
    assert {v["sender-4wire"] for v in verdicts.values()} == {"fail"}
    # recomputed from the stored steps: fails in runs with no question answered no and no
    # failed reference-temperature step, the reference step itself left out
    decides = {
        s
        for s, rows in steps.items()
        if not any(x["unit"] == "" and x["verdict"] == "fail" for x in rows)
        and not any(x["kind"] == "reference-temperature" and x["verdict"] == "fail" for x in rows)
    }
    expected = Counter(
        f"ntc-sender-screen / {x['step_id']}"
        for s in decides
        for x in steps[s]
        if x["verdict"] in ("fail", "conditional fail") and x["kind"] != "reference-temperature"
    )
    assert decides == {"U-1"}
    assert expected == {
        "ntc-sender-screen / sender-4wire": 1,
        "ntc-sender-screen / sender-resistance": 1,
    }
    pareto = {r["step"]: r["count"] for r in data["pareto_by_step"]}
    assert pareto == expected
    assert {r["cause"]: r["runs"] for r in data["not_decided"]} == {
        "an operator answered no": 1,
        "the bench's reference failed": 1,
    }
    # and the diagnosis of failed runs is asked of the decided one only
    assert data["fault_kind_note"] == "most likely fault of each of 1 failed runs"
    assert sum(r["count"] for r in data["pareto_by_fault_kind"]) == 1
    # the same on the terminal: no bench reference among the part failures
    section = text.split("Failure Pareto by step")[1].split("Runs not decided")[0]
    assert "well-temperature" not in section
    assert re.search(r"ntc-sender-screen / sender-4wire\s+1\s+50.0 %", section)
    assert "the bench's reference failed" in text.split("Runs not decided")[1]
