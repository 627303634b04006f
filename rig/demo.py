"""The shipped demo: a virtual bench in-process, the demo sequences on good and faulted units.

Every value in the demo files is invented; the scenario is our own.  Each case starts a virtual
bench for its unit (with its injected faults), writes a station file pointing at it, and runs the
sequence through the real drivers, so the demo exercises exactly what a real bench would.
"""

from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from rig.config.fixture import load_fixture
from rig.config.station import load_station
from rig.config.unit_file import UnitModel, load_unit
from rig.engine import RunSummary
from rig.events import Event
from rig.faults import parse_faults
from rig.plan import Plan
from rig.runner import load_plan, run_plan
from rig.sim.bench import VirtualBench
from rig.store import ResultStore


def sequences_dir() -> Path:
    """The shipped ``sequences/`` folder (``RIG_SEQUENCES`` overrides)."""
    override = os.environ.get("RIG_SEQUENCES")
    if override:
        return Path(override)
    return Path(__file__).resolve().parent.parent / "sequences"


@dataclass(frozen=True)
class DemoCase:
    serial: str
    sequence: str
    unit: str
    faults: tuple[str, ...]
    story: str


CASES = (
    DemoCase(
        "NTC-0001", "ntc-sender-screen", "ntc-sender", (), "a good sender returned by mistake"
    ),
    DemoCase(
        "NTC-0002",
        "ntc-sender-screen",
        "ntc-sender",
        ("drift:sender=+18%",),
        "a sender off its curve",
    ),
    DemoCase("NTC-0003", "ntc-sender-screen", "ntc-sender", ("open:lead_b",), "a broken lead"),
    DemoCase("HAR-0101", "temp-circuit-check", "temp-circuit", (), "a good rebuilt harness"),
    DemoCase(
        "HAR-0102", "temp-circuit-check", "temp-circuit", ("open:signal",), "signal wire open"
    ),
    DemoCase(
        "HAR-0103",
        "temp-circuit-check",
        "temp-circuit",
        ("short-ground:signal",),
        "signal wire chafed to ground",
    ),
    DemoCase(
        "HAR-0104",
        "temp-circuit-check",
        "temp-circuit",
        ("series:ground=0.15ohm",),
        "corroded ground pin",
    ),
    DemoCase(
        "PRS-0201", "pressure-circuit-check", "pressure-circuit", (), "a good pressure circuit"
    ),
    DemoCase(
        "PRS-0202",
        "pressure-circuit-check",
        "pressure-circuit",
        ("open:sensor_ground",),
        "sensor ground open",
    ),
    DemoCase(
        "PRS-0203",
        "pressure-circuit-check",
        "pressure-circuit",
        ("drift:map=+12%",),
        "sensor output drifted high",
    ),
)


HARNESS_CASES = (
    DemoCase(
        "WH-0301", "harness/harness-proof", "harness", (), "a good rebuilt harness, wire by wire"
    ),
    DemoCase(
        "WH-0302",
        "harness/harness-proof",
        "harness",
        ("swap:W4,W5",),
        "two wires on each other's pins",
    ),
)
"""Whole-harness proofs from the wire list in ``sequences/harness/`` (build faults, see
``rig.harness.as_built``)."""


@dataclass(frozen=True)
class DemoRun:
    case: DemoCase
    summary: RunSummary
    likely_fault: str = ""
    """For a failed run: the top diagnosis hypothesis in words, e.g. ``open:signal (93 %)``."""


def run_demo(
    data_dir: Path,
    *,
    listener: Callable[[Event], None] | None = None,
    cases: tuple[DemoCase, ...] = CASES + HARNESS_CASES,
) -> tuple[Path, list[DemoRun]]:
    """Run every demo case; returns the store path and the runs."""
    folder = sequences_dir()
    data_dir.mkdir(parents=True, exist_ok=True)
    store_path = data_dir / "results.sqlite"
    store = ResultStore(store_path)
    runs: list[DemoRun] = []
    try:
        for case in cases:
            bench, unit = _bench_for(case, folder)
            with bench:
                station_path = bench.write_station(
                    data_dir / f"station-{case.unit}.toml",
                    data_dir=str(data_dir),
                    name=f"demo-{case.unit}",  # one store, a bench (and its relay wear) per unit
                )
                station = load_station(station_path)
                plan = load_plan(folder / f"{case.sequence}.toml", station)
                summary = run_plan(
                    plan,
                    case.serial,
                    operator="demo",
                    unit=unit.name,
                    faults=case.faults,
                    listener=listener,
                    ask=lambda text: True,
                    store=store,
                )
            likely = "" if case.unit == "harness" else _likely_fault(store, summary, unit, plan)
            runs.append(DemoRun(case, summary, likely))
    finally:
        store.close()
    return store_path, runs


def _likely_fault(store: ResultStore, summary: RunSummary, unit: UnitModel, plan: Plan) -> str:
    """The top-ranked fault for a completed failed run (diagnosis from the same unit model)."""
    from rig.analysis.diagnose import diagnose_run

    if summary.status != "complete" or not summary.failed_steps:
        return ""
    diagnosis = diagnose_run(store, summary.run_id, unit, plan)
    if not diagnosis.hypotheses:
        return ""
    top = diagnosis.hypotheses[0]
    alike = f" (or {', '.join(top.same_as)})" if top.same_as else ""
    return f"{top.spec}{alike}, {top.probability:.0%}"


def _bench_for(case: DemoCase, folder: Path) -> tuple[VirtualBench, UnitModel]:
    """The virtual bench for a case: a unit file's circuit, or a harness built from the wire list
    with the case's build faults."""
    if case.unit == "harness":
        from rig.harness.as_built import parse_build_fault
        from rig.harness.wire_list import load_wire_list
        from rig.sim.harness_bench import harness_bench

        fixture = load_fixture(folder / "harness" / "fixture.toml")
        wires = load_wire_list(folder / "harness" / "wire-list.csv", fixture)
        build = [parse_build_fault(spec, source="demo") for spec in case.faults]
        bench = harness_bench(wires, fixture, build, probe=("PT_FH", "PT_SH", "PT_FL", "PT_SL"))
        return bench, bench.unit
    unit = load_unit(folder / "units" / f"{case.unit}.toml")
    fixture = load_fixture(unit.fixture_path)
    faults = parse_faults(list(case.faults), unit, source="demo")
    return VirtualBench(unit, fixture, faults=faults), unit
