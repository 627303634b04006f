"""How quickly the operator console answers keys while the engine works: prints a table, then one
JSON object as its very last line.

Goals (not asserted, this is a benchmark): a key is handled within 100 ms while a slow reading
(50 NPLC on the virtual bench's real timing) is in progress; emptying the inbox during a run of
500 steps never takes the screen more than a few tens of milliseconds per tick.
``--quick`` runs fewer key presses and a 100-step run (the smoke run of the test suite).

Usage: python tests/benchmarks/console_keys.py [--quick]
"""

from __future__ import annotations

import argparse
import asyncio
import json
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from console_helpers import (
    console_on_bench,
    finish,
    long_sequence,
    slow_sequence,
    start_run,
    wait_for,
)

import rig.console.app
from rig.console.screens.run import RunScreen
from rig.console.widgets import StatusPanel
from rig.sim.timing import Timing


class TimedRunScreen(RunScreen):
    """The run view, keeping how long each inbox drain took and when each key reached it."""

    drain_ms: list[float] = []  # noqa: RUF012 (one list for the benchmark)
    keys_at: list[float] = []  # noqa: RUF012

    def on_key(self) -> None:
        TimedRunScreen.keys_at.append(time.perf_counter())

    def drain(self) -> None:
        start = time.perf_counter()
        super().drain()
        TimedRunScreen.drain_ms.append((time.perf_counter() - start) * 1000)


async def key_latencies(folder: Path, presses: int) -> tuple[list[float], int]:
    """Milliseconds from sending a key until the run view handles it, during slow readings; and
    how many of the presses fell while the run was still going."""
    sequence = slow_sequence(folder, steps=6)
    with console_on_bench("pressure-circuit", folder, sequence, timing=Timing.REAL) as (app, _b):
        async with app.run_test(size=(120, 40)) as pilot:
            screen = await start_run(pilot, "BENCH-KEYS")
            panel = screen.query_one(StatusPanel)
            await wait_for(pilot, lambda: "live:" in str(panel.render()), "a live reading")
            latencies, mid_step = [], 0
            for _ in range(presses):
                seen = len(TimedRunScreen.keys_at)
                start = time.perf_counter()
                await pilot.press("x")  # no binding: the key travels up to the run view
                if len(TimedRunScreen.keys_at) > seen:  # from sending the key to the screen
                    latencies.append((TimedRunScreen.keys_at[seen] - start) * 1000)
                mid_step += int(screen.running)
                await pilot.pause(0.02)
            await pilot.press("f8")
            await finish(pilot, screen)
    return latencies, mid_step


async def long_run(folder: Path, steps: int) -> tuple[float, int]:
    """Wall seconds of a ``steps``-step run shown in the console, and the table updates it took."""
    sequence = long_sequence(folder, steps)
    with console_on_bench("ntc-sender", folder, sequence) as (app, _bench):
        async with app.run_test(size=(120, 40)) as pilot:
            start = time.perf_counter()
            screen = await start_run(pilot, "BENCH-LONG")
            await finish(pilot, screen)
            return time.perf_counter() - start, len(screen.batches)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true")
    args = parser.parse_args()
    presses, steps = (10, 100) if args.quick else (50, 500)
    rig.console.app.RunScreen = TimedRunScreen  # type: ignore[misc]
    with tempfile.TemporaryDirectory() as tmp:
        for name in ("keys", "long"):
            (Path(tmp) / name).mkdir()
        latencies, mid_step = asyncio.run(key_latencies(Path(tmp) / "keys", presses))
        TimedRunScreen.drain_ms.clear()
        wall_s, batches = asyncio.run(long_run(Path(tmp) / "long", steps))
    drains = TimedRunScreen.drain_ms or [0.0]
    figures = {
        "key_ms_median": round(statistics.median(latencies), 2),
        "key_ms_max": round(max(latencies), 2),
        "keys_during_reading": mid_step,
        "steps": steps,
        "run_s": round(wall_s, 2),
        "table_updates": batches,
        "drain_ms_max": round(max(drains), 2),
        "drain_ms_median": round(statistics.median(drains), 3),
    }
    print(f"{'figure':<22} value")
    for key, value in figures.items():
        print(f"{key:<22} {value}")
    print(json.dumps(figures))
    return 0


if __name__ == "__main__":
    sys.exit(main())
