"""Cost of ``rig check`` (loading, planning, interlocks) and of the engine per step, by size.

Two sweeps on generated data: 10 to 5,000 steps on a 128-pin fixture (every step on a pin pair
of its own), and 8 to 256 pins with 500 steps.  The fixture gives every pin a DMM HI and a DMM LO
relay; the unit is a resistor ladder fed with 5 V; the sequence is volts steps between pin pairs,
reordering allowed.  In the pin sweep the pairs come from 8 pins spread across the fixture at
every size, so that each size does the same relay work and only the fixture's size changes.
Printed per size: check time in total and per step, and the engine's cost per step on the virtual
bench in instant timing, both as wall time and as the engine thread's own CPU time (which leaves
out the simulated instruments serving in their own threads).  The goal is flat per-step figures.
Every figure is the median of ``--repeat`` runs (default 3): a shared host's figures move by up to
twice between back-to-back runs.

Usage: python tests/benchmarks/scale.py [--quick] [--repeat N]
"""

from __future__ import annotations

import argparse
import json
import random
import statistics
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

from rig.bench_open import close_bench, open_bench
from rig.config.fixture import load_fixture
from rig.config.station import Station, load_station
from rig.config.unit_file import load_unit
from rig.engine import Engine
from rig.runner import load_plan
from rig.sim.bench import VirtualBench
from rig.store import ResultStore

STEP_SWEEP_PINS = 128
"""The step sweep's fixture: 8,128 pin pairs, enough for 5,000 steps on routes of their own."""

PIN_SWEEP_SPREAD = 8
"""The pin sweep draws its routes from this many pins at every size: 28 distinct pairs."""


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


def write_sequence(
    folder: Path, pins: int, steps: int, *, spread: int = 0, distinct: bool = False, seed: int = 7
) -> Path:
    """Volts steps between random pin pairs, reordering allowed.

    ``spread``: the pairs come from that many pins only, spaced across the fixture, so that every
    fixture size gets the same routes and the same relay work: the pin sweep then compares the
    cost of a bigger fixture, not of a workload with more routes.
    ``distinct``: no two steps share a pair, so that no step can ride on another's route or
    reading and every step of the step sweep does the same work.
    """
    rng = random.Random(seed)
    pool = [round(i * (pins - 1) / (spread - 1)) for i in range(spread)] if spread else range(pins)
    if distinct:
        pairs = [(a, b) for a in pool for b in pool if a < b]
        if len(pairs) < steps:
            raise ValueError(f"{pins} pins give {len(pairs)} distinct pairs; {steps} asked")
        chosen = [(a, b) if rng.random() < 0.5 else (b, a) for a, b in rng.sample(pairs, steps)]
    else:
        chosen = [
            (pool[i], pool[j]) for i, j in (rng.sample(range(len(pool)), 2) for _ in range(steps))
        ]
    lines = ["[sequence]", f'name = "scale-{pins}-{steps}"', "reorder = true", ""]
    for n, (hi, lo) in enumerate(chosen):
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


def time_engine(sequence: Path, station: Station, folder: Path) -> tuple[float, float, int]:
    """(wall s, engine-thread CPU s, planned relay operations) for one run in instant timing."""
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
    return wall, cpu, plan.relay_ops


@dataclass
class Size:
    """One size's totals; per-step figures are worked out when printing."""

    sweep: str
    pins: int
    steps: int
    check_s: float
    engine_s: float
    engine_cpu_s: float
    relay_ops: int


def median_engine(
    sequence: Path, station: Station, folder: Path, repeat: int
) -> tuple[float, float, int]:
    """Median wall and median engine-thread CPU time over ``repeat`` runs, and the relay ops."""
    runs = [time_engine(sequence, station, folder) for _ in range(repeat)]
    walls, cpus, ops = zip(*runs, strict=True)
    return statistics.median(walls), statistics.median(cpus), ops[0]


def measure(
    folder: Path,
    sweep: str,
    pins: int,
    steps: int,
    repeat: int,
    *,
    spread: int = 0,
    distinct: bool = False,
) -> Size:
    folder.mkdir(parents=True, exist_ok=True)
    fixture = load_fixture(write_fixture(folder, pins))
    unit = load_unit(write_unit(folder, pins))
    sequence = write_sequence(folder, pins, steps, spread=spread, distinct=distinct)
    with VirtualBench(unit, fixture) as bench:
        station = load_station(bench.write_station(folder / "station.toml"))
        wall, cpu, relay_ops = median_engine(sequence, station, folder, repeat)
    check_s = time_check(sequence, station, repeat)  # with the bench's threads gone
    return Size(sweep, pins, steps, check_s, wall, cpu, relay_ops)


def rows_of(sizes: list[Size]) -> list[dict[str, object]]:
    """Per-step figures; in the step sweep also the cost of each step added since the last size,
    which leaves out the run's fixed cost (opening, safe state, the run record) that a 10-step
    run spreads over only 10 steps."""
    rows: list[dict[str, object]] = []
    previous: Size | None = None
    for size in sizes:
        row: dict[str, object] = {
            "sweep": size.sweep,
            "pins": size.pins,
            "steps": size.steps,
            "relay_ops": size.relay_ops,
            "check_ms": round(size.check_s * 1000, 1),
            "check_us_per_step": round(size.check_s / size.steps * 1e6, 1),
            "engine_ms_per_step": round(size.engine_s / size.steps * 1000, 2),
            "engine_cpu_ms_per_step": round(size.engine_cpu_s / size.steps * 1000, 2),
        }
        if previous is not None and previous.sweep == size.sweep == "steps":
            added = size.steps - previous.steps
            row["check_us_per_added_step"] = round(
                (size.check_s - previous.check_s) / added * 1e6, 1
            )
            row["engine_cpu_ms_per_added_step"] = round(
                (size.engine_cpu_s - previous.engine_cpu_s) / added * 1000, 2
            )
        rows.append(row)
        previous = size
    return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="small sizes only (smoke run)")
    parser.add_argument("--repeat", type=int, default=3, help="runs per size; medians are kept")
    args = parser.parse_args()
    if args.repeat < 1:
        parser.error(f"--repeat must be a whole number of runs >= 1, got {args.repeat}")
    repeat = 1 if args.quick else args.repeat
    step_sizes = (10, 100) if args.quick else (10, 100, 1000, 5000)
    pin_sizes = (8, 32) if args.quick else (8, 32, 128, 256)
    pin_steps = 50 if args.quick else 500
    sizes = []
    with tempfile.TemporaryDirectory() as tmp:
        for steps in step_sizes:
            folder = Path(tmp) / f"s{steps}"
            sizes.append(measure(folder, "steps", STEP_SWEEP_PINS, steps, repeat, distinct=True))
        for pins in pin_sizes:
            folder = Path(tmp) / f"p{pins}"
            sizes.append(measure(folder, "pins", pins, pin_steps, repeat, spread=PIN_SWEEP_SPREAD))
    rows = rows_of(sizes)
    print(
        f"{'pins':>5}{'steps':>7}{'relay ops':>10}{'check ms':>10}{'us/step':>9}{'added':>8}"
        f"{'engine ms/step':>16}{'cpu':>7}{'added':>8}"
    )
    for r in rows:
        print(
            f"{r['pins']:>5}{r['steps']:>7}{r['relay_ops']:>10}{r['check_ms']:>10}"
            f"{r['check_us_per_step']:>9}{r.get('check_us_per_added_step', '-'):>8}"
            f"{r['engine_ms_per_step']:>16}{r['engine_cpu_ms_per_step']:>7}"
            f"{r.get('engine_cpu_ms_per_added_step', '-'):>8}"
        )
    summary = {
        "repeat": repeat,
        "check_us_per_step_max": max(float(str(r["check_us_per_step"])) for r in rows),
        "engine_cpu_ms_per_step_max": max(float(str(r["engine_cpu_ms_per_step"])) for r in rows),
        "sizes": rows,
    }
    print(json.dumps(summary))


if __name__ == "__main__":
    main()
