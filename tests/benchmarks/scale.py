"""Cost of ``rig check`` (loading, planning, interlocks) and of the engine per step, by size.

Two sweeps on generated data: 10 to 5,000 steps on a 32-pin fixture, and 8 to 256 pins with 500
steps.  The fixture gives every pin a DMM HI and a DMM LO relay; the unit is a resistor ladder fed
with 5 V; the sequence is volts steps between random pin pairs, reordering allowed.  Printed per
size: check time in total and per step, and the engine's cost per step on the virtual bench in
instant timing, both as wall time and as the engine thread's own CPU time (which leaves out the
simulated instruments serving in their own threads).  The goal is flat per-step figures.

Usage: python tests/benchmarks/scale.py [--quick]
"""

from __future__ import annotations

import argparse
import json
import random
import statistics
import tempfile
import time
from pathlib import Path

from rig.bench_open import close_bench, open_bench
from rig.config.fixture import load_fixture
from rig.config.station import Station, load_station
from rig.config.unit_file import load_unit
from rig.engine import Engine
from rig.runner import load_plan
from rig.sim.bench import VirtualBench
from rig.store import ResultStore


def pin(index: int) -> str:
    return f"P{index:03d}"


def write_fixture(folder: Path, pins: int) -> Path:
    lines = [
        "[fixture]",
        f'name = "scale-{pins}"',
        f"relay_count = {2 * pins}",
        "max_closed = 6",
        "rated_operations = 10000000",
        "",
    ]
    for i in range(pins):
        lines += [f"[pins.{pin(i)}]", 'connector = "J1"', f"dmm_hi = {2 * i + 1}"]
        lines += [f"dmm_lo = {2 * i + 2}"]
        if i == pins - 1:
            lines += ["ground = true", "bench_ground = true"]
        lines.append("")
    path = folder / "fixture.toml"
    path.write_text("\n".join(lines), encoding="utf-8")
    return path


def write_unit(folder: Path, pins: int) -> Path:
    last = pin(pins - 1)
    lines = [
        "[unit]",
        f'name = "ladder-{pins}"',
        'fixture = "fixture.toml"',
        "[controller]",
        f'ground = "{last}"',
        "[controller.sources.reference]",
        f'node = "{pin(0)}"',
        'voltage = "5.0 V"',
    ]
    for i in range(pins - 1):
        lines += [f"[resistors.r{i:03d}]", f'between = ["{pin(i)}", "{pin(i + 1)}"]']
        lines += ['value = "1 kohm"']
    path = folder / "unit.toml"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def write_sequence(folder: Path, pins: int, steps: int, seed: int = 7) -> Path:
    rng = random.Random(seed)
    lines = ["[sequence]", f'name = "scale-{pins}-{steps}"', "reorder = true", ""]
    for n in range(steps):
        hi, lo = rng.sample(range(pins), 2)
        lines += ["[[steps]]", f'id = "s{n:05d}"', 'kind = "volts"']
        lines += [f'hi = "{pin(hi)}"', f'lo = "{pin(lo)}"', 'low = "-6 V"', 'high = "6 V"', ""]
    path = folder / f"sequence-{steps}.toml"
    path.write_text("\n".join(lines), encoding="utf-8")
    return path


def time_check(sequence: Path, station: Station, repeat: int) -> float:
    """Median seconds to load and plan the sequence (what ``rig check`` does before printing)."""
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        load_plan(sequence, station)
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def time_engine(sequence: Path, station: Station, folder: Path) -> tuple[float, float]:
    """(wall, engine-thread CPU) seconds per step for one run in instant timing."""
    plan = load_plan(sequence, station)
    instruments = open_bench(station)
    store = ResultStore(folder / "results.db")
    try:
        engine = Engine(plan, instruments, store)
        wall, cpu = time.perf_counter(), time.thread_time()
        summary = engine.run("SCALE")
        wall, cpu = time.perf_counter() - wall, time.thread_time() - cpu
    finally:
        close_bench(instruments)
        store.close()
    if summary.status != "complete":
        raise RuntimeError(f"scale run did not complete: {summary.reason}")
    steps = len(plan.steps)
    return wall / steps, cpu / steps


def measure(folder: Path, pins: int, steps: int, engine: bool) -> dict[str, object]:
    folder.mkdir(parents=True, exist_ok=True)
    fixture = load_fixture(write_fixture(folder, pins))
    unit = load_unit(write_unit(folder, pins))
    sequence = write_sequence(folder, pins, steps)
    with VirtualBench(unit, fixture) as bench:
        station = load_station(bench.write_station(folder / "station.toml"))
        check_s = time_check(sequence, station, 3 if steps <= 1000 else 1)
        row: dict[str, object] = {
            "pins": pins,
            "steps": steps,
            "check_ms": round(check_s * 1000, 1),
            "check_us_per_step": round(check_s / steps * 1e6, 1),
        }
        if engine:
            wall, cpu = time_engine(sequence, station, folder)
            row["engine_ms_per_step"] = round(wall * 1000, 2)
            row["engine_cpu_ms_per_step"] = round(cpu * 1000, 2)
    return row


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="small sizes only (smoke run)")
    args = parser.parse_args()
    step_sizes = (10, 100) if args.quick else (10, 100, 1000, 5000)
    pin_sizes = (8, 32) if args.quick else (8, 32, 128, 256)
    pin_steps = 50 if args.quick else 500
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for steps in step_sizes:
            rows.append(measure(Path(tmp) / f"s{steps}", 32, steps, engine=True))
        for pins in pin_sizes:
            rows.append(measure(Path(tmp) / f"p{pins}", pins, pin_steps, engine=True))
    print(f"{'pins':>5}{'steps':>7}{'check ms':>10}{'us/step':>9}{'engine ms/step':>16}{'cpu':>7}")
    for r in rows:
        print(
            f"{r['pins']:>5}{r['steps']:>7}{r['check_ms']:>10}{r['check_us_per_step']:>9}"
            f"{r.get('engine_ms_per_step', '-'):>16}{r.get('engine_cpu_ms_per_step', '-'):>7}"
        )
    summary = {
        "check_us_per_step_max": max(float(str(r["check_us_per_step"])) for r in rows),
        "engine_cpu_ms_per_step_max": max(float(str(r["engine_cpu_ms_per_step"])) for r in rows),
        "sizes": rows,
    }
    print(json.dumps(summary))


if __name__ == "__main__":
    main()
