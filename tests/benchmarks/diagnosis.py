"""Accuracy and speed of fault diagnosis: random single faults (seeded) injected into the virtual
bench (instant timing, real drivers), each run diagnosed from its stored readings.  Three cases in
four are on the shipped sensor circuit (temp-circuit-check on units/temp-circuit.toml), the rest
on the pressure circuit.  Prints one line per miss and one per unit, then one JSON object as its
last line.

Goals (not asserted, this is a benchmark): the true fault first in at least 90 % of cases and in
the top three in at least 98 %; a diagnosis (``diagnose_run``: reading the store, every fit, the
next check) under 100 ms (median).  ``diagnose_run`` keeps the hypothesis set of the last few
plans, as a console diagnosing run after run would; ``first_ms`` is the first case, which also
builds it.

How cases are counted: a hypothesis matches when its kind and wires/sensor are the injected ones
(the fitted value is reported separately, as the median relative error).  When the sequence cannot
tell several faults apart, the diagnosis lists them as one group (``same_as``) with one rank; the
true fault counts as found at that rank when it is anywhere in the group.  Faults that leave every
reading as a good unit would read are not excluded: the draw avoids values too small to matter
(series from 0.2 ohm, drift from 2 %), and any case the diagnosis misses counts as a miss.

Usage: python tests/benchmarks/diagnosis.py [--quick] [--cases N] [--seed S]
"""

from __future__ import annotations

import argparse
import copy
import json
import math
import statistics
import tempfile
import time
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from rig.analysis.diagnose import Hypothesis, diagnose_run
from rig.analysis.fault_set import single_faults
from rig.bench_open import close_bench, open_bench
from rig.config.fixture import load_fixture
from rig.config.station import load_station
from rig.config.unit_file import NtcSensor, UnitModel, load_unit
from rig.engine import Engine
from rig.faults import Fault
from rig.runner import load_plan
from rig.sim.bench import VirtualBench
from rig.store import ResultStore

SEQUENCES = Path(__file__).resolve().parents[2] / "sequences"
UNITS = {"temp-circuit": "temp-circuit-check", "pressure-circuit": "pressure-circuit-check"}
"""The shipped sensor circuit (three cases in four) and the pressure circuit."""
SERIES_OHM = (0.2, 2000.0)
DRIFT_PCT = (2.0, 40.0)


def draw(unit: UnitModel, rng: np.random.Generator) -> Fault:
    """One single fault: a kind of the unit's fault set, uniformly; log-uniform values."""
    shapes = sorted({(f.kind, f.targets) for f in single_faults(unit, None, series_ohm=1.0)})
    kind, targets = shapes[int(rng.integers(len(shapes)))]
    if kind == "series":
        return Fault(kind, targets, float(f"{math.exp(rng.uniform(*np.log(SERIES_OHM))):.3g}"))
    if kind == "drift":
        sign = 1.0 if rng.random() < 0.5 else -1.0
        return Fault(
            kind, targets, sign * float(f"{math.exp(rng.uniform(*np.log(DRIFT_PCT))):.3g}")
        )
    return Fault(kind, targets)


def rank(truth: Fault, hypotheses: list[Hypothesis]) -> int | None:
    """1-based rank of the group holding the true fault (value ignored), None if absent."""
    wanted = f"{truth.kind}:{','.join(truth.targets)}"
    for position, h in enumerate(hypotheses, start=1):
        if any(spec.split("=")[0] == wanted for spec in (h.spec, *h.same_as)):
            return position
    return None


@dataclass
class Tally:
    ranks: list[int | None] = field(default_factory=list)
    times: list[float] = field(default_factory=list)
    fit_errors: list[float] = field(default_factory=list)
    first_s: list[float] = field(default_factory=list)

    def pct(self, best: int) -> float:
        return 100.0 * sum(r is not None and r <= best for r in self.ranks) / len(self.ranks)


def within_tolerance(unit: UnitModel, rng: np.random.Generator) -> UnitModel:
    """The unit with every tolerance its file states drawn uniformly (GUM 4.3.7's rectangular
    model): what a real good unit is, and what the diagnosis does not model."""

    def spread(pct: float) -> float:
        return 1.0 + float(rng.uniform(-pct, pct)) / 100.0

    drawn = copy.copy(unit)
    drawn.resistors = {
        n: replace(r, r_ohm=r.r_ohm * spread(r.tolerance_pct)) for n, r in unit.resistors.items()
    }
    drawn.wires = {
        n: replace(
            w,
            length_m=w.length_m * spread(w.length_tolerance_pct),
            area_mm2=w.area_mm2 * spread(w.area_tolerance_pct),
        )
        for n, w in unit.wires.items()
    }
    if unit.controller is not None:
        drawn.controller = replace(
            unit.controller,
            sources=[
                replace(x, volts=x.volts * spread(x.tolerance_pct)) for x in unit.controller.sources
            ],
        )
    drawn.sensors = {
        n: replace(
            x,
            r25_ohm=x.r25_ohm * spread(x.r25_tolerance_pct),
            beta_k=x.beta_k * spread(x.beta_tolerance_pct),
        )
        if isinstance(x, NtcSensor) and x.r25_ohm is not None and x.beta_k is not None
        else x
        for n, x in unit.sensors.items()
    }
    return drawn


def run_cases(
    unit_name: str, sequence: str, count: int, rng: np.random.Generator, tolerances: bool
) -> Tally:
    """``count`` random faults on one shipped unit, each run and diagnosed."""
    unit = load_unit(SEQUENCES / "units" / f"{unit_name}.toml")
    tally = Tally()
    with (
        tempfile.TemporaryDirectory() as folder,
        VirtualBench(unit, load_fixture(unit.fixture_path)) as bench,
    ):
        station = load_station(bench.write_station(Path(folder) / "station.toml"))
        plan = load_plan(SEQUENCES / f"{sequence}.toml", station)
        store = ResultStore(Path(folder) / "runs.sqlite")
        instruments = open_bench(station)
        try:
            engine = Engine(plan, instruments, store)
            for case in range(count):
                truth = draw(unit, rng)
                if tolerances:  # the bench's unit drawn anew; the diagnosis keeps the file's
                    bench.probe.unit = within_tolerance(unit, rng)
                bench.set_faults([truth])
                run = engine.run(f"BENCH-{case:03d}", unit=unit.name, faults=(truth.spec,))
                started = time.perf_counter()
                found = diagnose_run(store, run.run_id, unit, plan)
                elapsed = time.perf_counter() - started
                (tally.first_s if case == 0 else tally.times).append(elapsed)
                position = rank(truth, found.hypotheses)
                tally.ranks.append(position)
                top = found.hypotheses[0]
                if position == 1 and truth.value and top.fitted:
                    tally.fit_errors.append(abs(top.fitted - truth.value) / abs(truth.value))
                if position != 1:
                    shown = ", ".join(f"{h.spec} {h.probability:.2f}" for h in found.hypotheses[:3])
                    print(f"{unit_name} case {case}: {truth.spec} ranked {position}; top: {shown}")
        finally:
            close_bench(instruments)
            store.close()
    return tally


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--cases", type=int, default=200)
    parser.add_argument("--seed", type=int, default=2026)
    parser.add_argument(
        "--tolerances",
        action="store_true",
        help="draw the bench's unit within its stated tolerances for every case",
    )
    args = parser.parse_args()
    cases = 12 if args.quick else args.cases
    rng = np.random.default_rng(args.seed)
    share = {
        name: count for name, count in zip(UNITS, (cases - cases // 4, cases // 4), strict=True)
    }
    tallies = {
        name: run_cases(name, UNITS[name], share[name], rng, args.tolerances) for name in UNITS
    }
    every = Tally()
    for tally in tallies.values():
        every.ranks += tally.ranks
        every.times += tally.times
        every.fit_errors += tally.fit_errors
        every.first_s += tally.first_s
    median_ms = statistics.median(every.times) * 1000
    for name, tally in tallies.items():
        print(
            f"{name}: {len(tally.ranks)} cases, top-1 {tally.pct(1):.1f} %, "
            f"top-3 {tally.pct(3):.1f} %, median {statistics.median(tally.times) * 1000:.1f} ms, "
            f"first (builds the hypotheses) {tally.first_s[0] * 1000:.1f} ms"
        )
    print(
        json.dumps(
            {
                "cases": len(every.ranks),
                "seed": args.seed,
                "tolerances": args.tolerances,
                "top1_pct": round(every.pct(1), 2),
                "top3_pct": round(every.pct(3), 2),
                "median_ms": round(median_ms, 2),
                "max_ms": round(max(every.times) * 1000, 2),
                "first_ms": round(max(every.first_s) * 1000, 2),
                "median_fit_error_pct": round(100 * statistics.median(every.fit_errors), 3)
                if every.fit_errors
                else None,
                "by_unit": {
                    name: {"cases": len(t.ranks), "top1_pct": round(t.pct(1), 2)}
                    for name, t in tallies.items()
                },
            }
        )
    )


if __name__ == "__main__":
    main()
