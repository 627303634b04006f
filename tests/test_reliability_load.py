"""50 runs back to back in one process on one virtual bench: no growth in open file descriptors,
threads or memory beyond the stated bounds (figures in ``tests/benchmarks/reliability.py``)."""

from __future__ import annotations

from pathlib import Path

import pytest

from rig.sim.load_drill import run_load

RUNS = 50
FD_GROWTH_MAX = 2
"""A socket or pty the operating system has not yet torn down; a leak would show 50 or more."""
THREAD_GROWTH_MAX = 1
"""A thread that is ending as it is counted; a thread leaked per run would show 50."""
TRACED_GROWTH_MAX_KIB = 2048
"""Python allocations still live after the runs: caches that fill once (SQLite statements,
pyvisa's registry); a leak of even 40 KiB a run would exceed it."""
RSS_GROWTH_MAX_KIB = 32 * 1024
"""Resident memory also counts the allocator's own reserve, so it is bounded loosely."""


@pytest.mark.slow
@pytest.mark.timeout(600)
def test_fifty_runs_leak_no_descriptors_threads_or_memory(tmp_path: Path) -> None:
    figures = run_load(RUNS, tmp_path)
    assert len(figures.verdicts) == RUNS and set(figures.verdicts) == {"pass"}, figures
    assert figures.fds_after - figures.fds_before <= FD_GROWTH_MAX, figures
    assert figures.threads_after - figures.threads_before <= THREAD_GROWTH_MAX, figures
    assert figures.traced_growth_kib <= TRACED_GROWTH_MAX_KIB, figures
    assert figures.rss_growth_kib <= RSS_GROWTH_MAX_KIB, figures
