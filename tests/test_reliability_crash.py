"""SIGKILL of the controller at 20 seeded random points during real runs on a virtual bench.

The controller is a real ``rig run`` / ``rig continue`` subprocess; the bench runs here in real
timing with a 1 s relay watchdog.  See ``rig.sim.crash_drill`` for what is checked after each kill.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from rig.sim.crash_drill import run_crash_drill

KILLS = 20
SEED = 20261201


@pytest.mark.slow
@pytest.mark.timeout(900)
def test_sigkill_at_20_points_loses_nothing_and_leaves_the_bench_safe(tmp_path: Path) -> None:
    report = run_crash_drill(KILLS, seed=SEED, folder=tmp_path)
    detail = "\n".join(report.problems)
    assert report.kill_points == KILLS
    assert report.readings_reported > 0, "the controller reported no stored reading"
    assert report.readings_lost == 0 and report.steps_lost == 0, detail
    assert report.watchdog_late == 0, detail
    assert report.unsafe_restarts == 0, detail
    assert report.not_marked_incomplete == 0, detail
    assert report.repeated_or_missing_steps == 0, detail
    assert report.runs == report.runs_complete, detail
    assert report.interlock_violations == 0
    # the checks above were exercised, not vacuous
    assert report.kills_with_relays_closed > 0 and report.opened_by_watchdog > 0
    assert report.restarts_with_supply_on > 0
    assert report.continued > 0
