"""Speed of the Monte Carlo of good units: prints a table, then one JSON object as its last line.

Goal (not asserted, this is a benchmark): at least 100,000 good units per second for each shipped
demo sequence on its unit, every reading the steps judge included (drawing the tolerances, the
readings, the meter's error and the steps' values).  ``samples_per_s`` is the slowest demo's figure,
the median over repetitions.  ``--quick`` draws few units (the smoke run of the test suite).

Usage: python tests/benchmarks/montecarlo.py [--quick]
"""

from __future__ import annotations

import argparse
import json
import statistics
import sys
import time
from pathlib import Path

from rig.analysis.montecarlo import SequenceMonteCarlo
from rig.analysis.predict import SequencePredictor
from rig.commands.limits import load_station_or_virtual
from rig.config.sequence import load_sequence
from rig.config.unit_file import load_unit
from rig.plan import build_plan

ROOT = Path(__file__).resolve().parents[2]

DEMOS = (
    ("temp-circuit-check", "temp-circuit"),
    ("pressure-circuit-check", "pressure-circuit"),
    ("ntc-sender-screen", "ntc-sender"),
)


def bench_demo(sequence: str, unit_name: str, samples: int, repeat: int) -> dict[str, float]:
    folder = ROOT / "sequences"
    unit = load_unit(folder / "units" / f"{unit_name}.toml")
    plan = build_plan(
        load_sequence(folder / f"{sequence}.toml"), load_station_or_virtual(None, unit)
    )
    started = time.perf_counter()
    mc = SequenceMonteCarlo(plan, unit, SequencePredictor(plan, unit).run())
    setup_s = time.perf_counter() - started
    times = []
    for seed in range(repeat):
        started = time.perf_counter()
        mc.run(samples, seed)
        times.append(time.perf_counter() - started)
    run_s = statistics.median(times)
    return {
        "setup_ms": setup_s * 1e3,
        "run_s": run_s,
        "samples_per_s": samples / run_s,
        "readings": float(len(mc.readings)),
    }


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a smoke run with few units")
    args = parser.parse_args()
    samples, repeat = (5_000, 1) if args.quick else (200_000, 3)
    figures = {}
    print(f"{'demo':<24} {'setup ms':>9} {'run s':>7} {'units/s':>10} {'readings':>9}")
    for sequence, unit_name in DEMOS:
        f = bench_demo(sequence, unit_name, samples, repeat)
        figures[sequence] = f
        print(
            f"{sequence:<24} {f['setup_ms']:>9.1f} {f['run_s']:>7.3f} "
            f"{f['samples_per_s']:>10.0f} {f['readings']:>9.0f}"
        )
    slowest = min(figures.values(), key=lambda f: f["samples_per_s"])
    print(
        json.dumps(
            {
                "samples": samples,
                "samples_per_s": round(slowest["samples_per_s"]),
                "per_demo_samples_per_s": {
                    k: round(f["samples_per_s"]) for k, f in figures.items()
                },
                "goal_samples_per_s": 100_000,
            }
        )
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
