"""A quick smoke run of every benchmark: it runs, prints a table and ends with one JSON object.

The figures themselves are not asserted (speed is not a pass/fail test); only that the script
works and reports the keys the README lists.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

BENCHMARKS = Path(__file__).resolve().parent / "benchmarks"
EXPECTED_KEYS = {
    "solver.py": {"solve_300_ms", "batch_10k_s", "read_roundtrip_ms"},
    "coverage.py": {"faults", "seconds"},
    "diagnosis.py": {"cases", "top1_pct", "top3_pct", "median_ms"},
    "montecarlo.py": {"samples_per_s"},
    "stats.py": {"readings", "stats_s", "stats_filtered_s"},
    "throughput.py": {"repetitions", "wall_over_limit_max", "script_over_rig_min"},
    "handwritten_script.py": {"readings", "relay_ops", "wall_ms"},
    "scale.py": {"check_us_per_step_max", "engine_cpu_ms_per_step_max"},
    "console_keys.py": {"key_ms_median", "key_ms_max", "keys_during_reading", "run_s"},
}


HELPERS = {"controller_process.py", "host_tuning.py"}
"""Not benchmarks: used by one (throughput.py runs the controller's side through the first and
sets the host up for timing with the second)."""


@pytest.mark.parametrize(
    "script", sorted(p.name for p in BENCHMARKS.glob("*.py") if p.name not in HELPERS)
)
def test_benchmark_smoke(script: str) -> None:
    done = subprocess.run(
        [sys.executable, str(BENCHMARKS / script), "--quick"],
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    lines = done.stdout.strip().splitlines()
    assert len(lines) >= 2, "a table, then the JSON line"
    figures = json.loads(lines[-1])
    missing = EXPECTED_KEYS.get(script, set()) - set(figures)
    assert not missing, f"{script} did not report {missing}"
    for key in EXPECTED_KEYS.get(script, set()):
        assert isinstance(figures[key], int | float) and figures[key] > 0
    if script == "throughput.py":  # the keys each workload must carry (issue #10's last line)
        wanted = {
            "name",
            "wall_over_limit",
            "script_over_rig",
            "relay_ops",
            "relay_ops_unordered",
            "overhead_ms_per_step",
        }
        names = [w["name"] for w in figures["workloads"]]
        assert names == ["sensor-screen", "harness", "generated-200"]
        assert all(wanted <= set(w) for w in figures["workloads"])
