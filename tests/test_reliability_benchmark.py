"""The short pass of ``tests/benchmarks/reliability.py``: it runs, prints the fault table, and its
JSON line reports the figures the reliability page promises (losses, tracebacks and interlock
violations zero; every injected fault survived)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

SCRIPT = Path(__file__).resolve().parent / "benchmarks" / "reliability.py"
KEYS = {
    "kill_points",
    "readings_lost",
    "faults_injected",
    "faults_survived",
    "fuzz_cases",
    "tracebacks",
    "interlock_violations",
}


@pytest.mark.slow
@pytest.mark.timeout(600)
def test_quick_pass_reports_no_losses_tracebacks_or_violations() -> None:
    done = subprocess.run(
        [sys.executable, str(SCRIPT), "--quick"],
        capture_output=True,
        text=True,
        timeout=580,
        check=False,
    )
    assert done.returncode == 0, done.stderr[-2000:]
    lines = done.stdout.strip().splitlines()
    assert lines[0].startswith("fault") and "safe s" in lines[0], "the fault table comes first"
    figures = json.loads(lines[-1])
    assert not KEYS - set(figures), KEYS - set(figures)
    assert figures["kill_points"] >= 1 and figures["fuzz_cases"] >= 80
    assert figures["faults_injected"] >= 8
    assert figures["faults_survived"] == figures["faults_injected"], done.stdout
    assert figures["readings_lost"] == 0 and figures["tracebacks"] == 0, done.stdout
    assert figures["interlock_violations"] == 0, done.stdout
