"""Readings that isolation by group testing uses, against pair by pair: prints a table, then one
JSON object as its very last line.

Cases: 32, 64 and 128 two-pin nets (invented harnesses) with 0 to 3 shorts between random nets
(seeded).  The planner (``rig.harness.isolation``) runs against the virtual bench's own circuit
(relay contacts, relay and meter leakage, the harness's copper) through a direct port, without the
sockets.  Goal, per case: at most N + ceil(log2 N) + 4 k ceil(log2 N) readings for k shorts, and
every short found; pair by pair takes N (N - 1) / 2.  ``--quick`` runs the 32-net cases only.

Usage: python tests/benchmarks/isolation.py [--quick]
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # a small solve gains nothing from threads

import argparse
import json
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from rig.harness.as_built import BuildFault
from rig.harness.isolation import budget, isolate_by_groups
from rig.harness.scan import HarnessSettings, island_reader
from rig.sim.harness_bench import ProbePort, write_invented

THRESHOLD_OHM = 1e6


def one_case(folder: Path, nets: int, shorts: int, seed: int) -> dict[str, object]:
    wires, fixture = write_invented(folder, nets, seed=seed, spare=0)
    rng = np.random.default_rng(seed * 100 + shorts)
    chosen = rng.choice(nets, size=2 * shorts, replace=False) + 1
    pairs = [(int(chosen[2 * i]), int(chosen[2 * i + 1])) for i in range(shorts)]
    faults = [BuildFault("short", f"W{a}", other=f"W{b}") for a, b in pairs]
    port = ProbePort(wires, fixture, faults, seed=seed)
    islands = [net.pins[:1] for net in wires.nets]
    settings = HarnessSettings(temp_c=23.0, isolation_ohm=THRESHOLD_OHM)
    _, read = island_reader(port, islands, settings)
    started = time.perf_counter()
    result = isolate_by_groups(nets, read, THRESHOLD_OHM, ceiling_ohm=settings.isolation_range_ohm)
    elapsed = time.perf_counter() - started
    expected = sorted(sorted((a - 1, b - 1)) for a, b in pairs)
    found = sorted(sorted(g) for g in result.groups)
    return {
        "nets": nets,
        "shorts": shorts,
        "readings": len(result.readings),
        "budget": budget(nets, shorts),
        "pairwise_readings": nets * (nets - 1) // 2,
        "all_found": found == expected,
        "proven_ohm": result.proven_ohm,
        "seconds": round(elapsed, 3),
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--quick", action="store_true", help="the 32-net cases only")
    args = parser.parse_args(argv)
    sizes = (32,) if args.quick else (32, 64, 128)
    cases = []
    with tempfile.TemporaryDirectory() as tmp:
        for nets in sizes:
            for shorts in range(4):
                cases.append(one_case(Path(tmp) / f"n{nets}", nets, shorts, seed=nets))
    print(f"{'nets':>5} {'shorts':>6} {'readings':>8} {'budget':>6} {'pairwise':>8} found  seconds")
    for c in cases:
        print(
            f"{c['nets']:>5} {c['shorts']:>6} {c['readings']:>8} {c['budget']:>6} "
            f"{c['pairwise_readings']:>8} {'yes' if c['all_found'] else 'NO':>5}  {c['seconds']}"
        )
    within = all(int(str(c["readings"])) <= int(str(c["budget"])) for c in cases)
    print(
        json.dumps(
            {
                "cases": cases,
                "within_budget": within,
                "all_found": all(bool(c["all_found"]) for c in cases),
            }
        )
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
