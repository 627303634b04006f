"""Reliability figures: instrument faults, controller kills, hostile input and load.

    python tests/benchmarks/reliability.py           # the full pass (several minutes)
    python tests/benchmarks/reliability.py --quick   # the short pass the test suite runs

Prints the fault table (fault x point -> outcome, time to safe state), the crash, fuzz and load
figures, and last one JSON line with kill_points, readings_lost, faults_injected,
faults_survived, fuzz_cases, tracebacks and interlock_violations.
"""

from __future__ import annotations

import argparse
import json
import logging
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from fuzz_inputs import TARGETS
from hypothesis import HealthCheck, given, settings

from rig.sim.crash_drill import run_crash_drill
from rig.sim.fault_drill import FAULTS, POINTS, run_drill, table
from rig.sim.load_drill import run_load

FULL = {"points": list(POINTS), "modes": (False, True), "kills": 20, "fuzz": 1300, "runs": 50}
QUICK = {"points": ["middle"], "modes": (False,), "kills": 1, "fuzz": 10, "runs": 3}


def fuzz(cases_per_target: int) -> tuple[int, int, list[str]]:
    """Run every fuzz target; (cases, misbehaviours, first few descriptions)."""
    count, bad = 0, []
    for _, (strategy, check) in sorted(TARGETS.items()):
        count += _fuzz_one(strategy, check, cases_per_target, bad)
    return count, len(bad), bad[:3]


def _fuzz_one(strategy: Any, check: Any, examples: int, bad: list[str]) -> int:
    ran = 0

    @settings(
        max_examples=examples,
        deadline=None,
        derandomize=True,
        database=None,
        suppress_health_check=list(HealthCheck),
    )
    @given(strategy)
    def case(value: Any) -> None:
        nonlocal ran
        ran += 1
        found = check(value)
        if found:
            bad.append(found)

    case()
    return ran


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true")
    args = parser.parse_args()
    plan = QUICK if args.quick else FULL
    logging.disable(logging.CRITICAL)  # the drills provoke warnings on purpose
    figures: dict[str, Any] = {}
    with tempfile.TemporaryDirectory(prefix="rig-reliability-") as scratch:
        folder = Path(scratch)
        started = time.monotonic()
        drills = [
            run_drill(f, p, persistent=m, folder=folder / f"{f}-{p}-{m}")
            for f in FAULTS
            for p in plan["points"]
            for m in plan["modes"]
        ]
        print("\n".join(table(drills)))
        figures["faults_injected"] = len(drills)
        figures["faults_survived"] = sum(d.survived for d in drills)
        figures["fault_drill_s"] = round(time.monotonic() - started, 1)
        figures["safe_s_max"] = round(max(d.safe_s for d in drills), 2)

        crash = run_crash_drill(plan["kills"], seed=20261201, folder=folder / "crash")
        print(
            f"\ncrash: {crash.kill_points} kills, {crash.readings_reported} readings reported, "
            f"{crash.readings_lost} lost, {crash.steps_lost} steps lost, watchdog at most "
            f"{crash.watchdog_max_s:.2f} s after a kill, {crash.runs_complete}/{crash.runs} runs "
            f"finished by continuing, problems: {crash.problems or 'none'}"
        )
        figures["kill_points"] = crash.kill_points
        figures["readings_lost"] = crash.readings_lost + crash.steps_lost
        figures["watchdog_max_s"] = round(crash.watchdog_max_s, 3)

        cases, tracebacks, examples = fuzz(plan["fuzz"])
        print(
            f"fuzz: {cases} cases over {len(TARGETS)} targets, {tracebacks} misbehaved {examples}"
        )
        figures["fuzz_cases"] = cases
        figures["tracebacks"] = tracebacks

        load = run_load(plan["runs"], folder / "load")
        print(
            f"load: {load.runs} runs in {load.seconds:.1f} s; fds {load.fds_before}->"
            f"{load.fds_after}, threads {load.threads_before}->{load.threads_after}, traced "
            f"memory +{load.traced_growth_kib:.0f} KiB, RSS +{load.rss_growth_kib:.0f} KiB"
        )
        figures["load_runs"] = load.runs
        figures["load_fd_growth"] = load.fds_after - load.fds_before
        figures["load_thread_growth"] = load.threads_after - load.threads_before
        figures["load_traced_kib"] = round(load.traced_growth_kib)
        figures["interlock_violations"] = crash.interlock_violations + sum(
            d.interlock_violations for d in drills
        )
    print(json.dumps(figures))
    return 0


if __name__ == "__main__":
    sys.exit(main())
