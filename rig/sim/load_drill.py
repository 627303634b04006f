"""Load drill: many runs back to back in one process on one virtual bench, watching for leaks.

After a few warm-up runs (first-use caches: the pyvisa resource manager, imports, SQLite pages),
the open file descriptors, live threads, traced Python memory and resident set size are taken;
then ``runs`` more runs; then the same figures again.  A controller that leaks a socket, a serial
port, a heartbeat thread or a cache entry per run shows it as growth proportional to ``runs``.
"""

from __future__ import annotations

import gc
import os
import threading
import time
import tracemalloc
from dataclasses import dataclass
from pathlib import Path

from rig.config.fixture import load_fixture
from rig.config.unit_file import load_unit
from rig.runner import load_plan, run_plan
from rig.sim.bench import VirtualBench

SEQUENCES = Path(__file__).resolve().parents[2] / "sequences"
WARM_UP_RUNS = 3


@dataclass(frozen=True)
class LoadFigures:
    runs: int
    seconds: float
    fds_before: int
    fds_after: int
    threads_before: int
    threads_after: int
    traced_growth_kib: float
    rss_growth_kib: float
    verdicts: tuple[str, ...]


def _fds() -> int:
    return len(os.listdir("/proc/self/fd"))


def _rss_kib() -> float:
    with open("/proc/self/statm", encoding="ascii") as handle:
        pages = int(handle.read().split()[1])
    return pages * os.sysconf("SC_PAGE_SIZE") / 1024


def _settle() -> tuple[int, int]:
    """Let finished threads end and sockets close before counting."""
    for _ in range(50):
        gc.collect()
        if threading.active_count() <= _settle.baseline_threads:  # type: ignore[attr-defined]
            break
        time.sleep(0.02)
    return _fds(), threading.active_count()


def run_load(runs: int, folder: Path) -> LoadFigures:
    unit = load_unit(SEQUENCES / "units" / "temp-circuit.toml")
    bench = VirtualBench(unit, load_fixture(unit.fixture_path))
    bench.start()
    try:
        station = bench.write_station(folder / "station.toml", data_dir=str(folder / "data"))
        plan = load_plan(SEQUENCES / "temp-circuit-check.toml", station)
        for n in range(WARM_UP_RUNS):
            run_plan(plan, f"WARM-{n}")
        _settle.baseline_threads = threading.active_count()  # type: ignore[attr-defined]
        fds_before, threads_before = _settle()
        gc.collect()
        tracemalloc.start()
        traced_before = tracemalloc.get_traced_memory()[0]
        rss_before = _rss_kib()
        started = time.monotonic()
        verdicts = tuple(run_plan(plan, f"LOAD-{n}").verdict.value for n in range(runs))
        seconds = time.monotonic() - started
        fds_after, threads_after = _settle()
        gc.collect()
        traced_after = tracemalloc.get_traced_memory()[0]
        tracemalloc.stop()
        rss_after = _rss_kib()
    finally:
        bench.stop()
    return LoadFigures(
        runs,
        seconds,
        fds_before,
        fds_after,
        threads_before,
        threads_after,
        (traced_after - traced_before) / 1024,
        rss_after - rss_before,
        verdicts,
    )
