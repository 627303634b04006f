"""Speed of fault coverage: the full single-fault set of the shipped sensor circuit
(sequences/temp-circuit-check.toml on units/temp-circuit.toml, station from the virtual bench),
solved without instruments.  Prints the fault x step matrix, then one JSON object as its last line.

Goal (not asserted, this is a benchmark): the whole set, series search included, under 5 s.
``--quick`` runs it once (the smoke run of the test suite); otherwise the median of 5 runs.

Usage: python tests/benchmarks/coverage.py [--quick]
"""

from __future__ import annotations

import argparse
import json
import statistics
import tempfile
import time
from pathlib import Path

from rig.analysis.coverage import CoverageReport, fault_coverage
from rig.config.fixture import load_fixture
from rig.config.station import load_station
from rig.config.unit_file import load_unit
from rig.runner import load_plan
from rig.sim.bench import VirtualBench

SEQUENCES = Path(__file__).resolve().parents[2] / "sequences"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true")
    args = parser.parse_args()
    unit = load_unit(SEQUENCES / "units" / "temp-circuit.toml")
    with (
        tempfile.TemporaryDirectory() as folder,
        VirtualBench(unit, load_fixture(unit.fixture_path)) as bench,
    ):
        station = load_station(bench.write_station(Path(folder) / "station.toml"))
    plan = load_plan(SEQUENCES / "temp-circuit-check.toml", station)
    times = []
    report: CoverageReport | None = None
    for _ in range(1 if args.quick else 5):
        started = time.perf_counter()
        report = fault_coverage(plan, unit)
        times.append(time.perf_counter() - started)
    assert report is not None
    pct = report.coverage_pct
    assert pct is not None, report.no_coverage_reason
    for row in report.rows:
        print(f"{row.fault.spec:<26}", " ".join(f"{v.value:<5}" for v in row.verdicts))
    seconds = statistics.median(times)
    print(f"{len(report.rows)} faults, {pct:.1f} % detected, {seconds:.3f} s")
    print(
        json.dumps(
            {
                "faults": len(report.rows),
                "detected": len(report.detected),
                "coverage_pct": round(pct, 2),
                "seconds": round(seconds, 4),
            }
        )
    )


if __name__ == "__main__":
    main()
