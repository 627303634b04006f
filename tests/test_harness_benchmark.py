"""The isolation benchmark's quick run reports what the issue asks for, in budget."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

SCRIPT = Path(__file__).resolve().parent / "benchmarks" / "isolation.py"


def test_quick_run_reports_cases_within_budget_and_every_short_found() -> None:
    done = subprocess.run(
        [sys.executable, str(SCRIPT), "--quick"],
        capture_output=True,
        text=True,
        timeout=300,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    figures = json.loads(done.stdout.strip().splitlines()[-1])
    assert [c["shorts"] for c in figures["cases"]] == [0, 1, 2, 3]
    for case in figures["cases"]:
        assert {"nets", "shorts", "readings", "pairwise_readings", "all_found"} <= set(case)
        assert case["all_found"] is True
        # N + ceil(log2 N) + 4 k ceil(log2 N), with N = 32: ceil(log2 32) = 5
        assert case["readings"] <= 32 + 5 + 4 * case["shorts"] * 5
        assert case["pairwise_readings"] == 32 * 31 // 2
