"""Run time against the physical limit of the instruments, side by side with a hand-written script.

On the virtual bench in real timing (relays take their operate and release time, readings their
integration time, autorange its penalty), for three workloads: the shipped sensor screen, the
shipped harness test and a generated 200-reading sequence.  For each, measured in one run,
interleaved (rig first on even repetitions, the script first on odd ones), medians:

- ``wall_over_limit``: wall time of the rig run over ``Plan.physical_limit_s()`` (goal <= 1.05):
  relays, readings, autorange, the sequence's waits and the settle each change of route needs (the
  sequence's stated settle time, or one proving integration where it states none);
- ``script_over_rig``: the hand-written script's wall time over rig's (goal >= 3), beside
  ``script_floor_over_limit``, the script's own instrument time over the limit: the most that
  ratio can be, even for a controller that sits on the limit;
- relay operations per run, rig's (counted by the box) against file order with everything opened
  between readings (what the script does);
- controller overhead per step: wall time minus the instrument time the bench spent, per step.

The wall time is that of ``Engine.run`` on opened instruments (safe state at start and end, the
results store, every read-back), as ``rig run`` spends it after start-up; the script's is its loop
on opened connections.  Opening connections and starting Python are left out of both.  Both run in
a process of their own (``controller_process.py``), as a controller runs apart from real
instruments; the virtual bench stays in this one.  ``--same-process`` times them in the bench's
process instead, to show what sharing its interpreter costs.  Figures are wall-clock on a shared
machine: read them as ratios from one run, not as absolute speeds.

The host is set up for timing as a station's controller PC would be (``host_tuning``: the
controller on a core of its own, CPUs kept out of deep idle, where the host allows it); the
first line printed says what was applied, and ``--as-is`` leaves the host alone.

Usage: python tests/benchmarks/throughput.py [--quick] [--repeat N] [--same-process] [--as-is]
"""

from __future__ import annotations

import argparse
import json
import statistics
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from bench_helpers import SEQUENCES, shipped_bench
from controller_process import ControllerProcess, ControllerSide, hand_table
from data.many_readings import write_sequence
from handwritten_script import SETTLE_S, HandReading
from host_tuning import tuned_host

from drivers.visa_session import VisaSession
from rig.plan import InstrumentTiming, Plan
from rig.runner import load_plan
from rig.sim.bench import VirtualBench
from rig.sim.timing import Timing


@dataclass(frozen=True)
class Workload:
    name: str
    sequence: Path | None
    """None: the generated sequence, written into the run's folder."""
    unit: str


WORKLOADS = (
    Workload("sensor-screen", SEQUENCES / "ntc-sender-screen.toml", "ntc-sender"),
    Workload("harness", SEQUENCES / "temp-circuit-check.toml", "temp-circuit"),
    Workload("generated-200", None, "temp-circuit"),
)


@dataclass
class Samples:
    """What one workload measured, repetition by repetition."""

    rig_wall_s: list[float] = field(default_factory=list)
    rig_instrument_s: list[float] = field(default_factory=list)
    rig_relay_ops: list[int] = field(default_factory=list)
    rig_readings: list[int] = field(default_factory=list)
    rig_round_trips: list[int] = field(default_factory=list)
    """Queries rig waited for an answer to, across the three instruments, in one run."""
    script_wall_s: list[float] = field(default_factory=list)
    script_relay_ops: list[int] = field(default_factory=list)


def box_operations(bench: VirtualBench) -> int:
    return sum(bench.relay_box.operation_counts().values())


def round_trips(bench: VirtualBench) -> int:
    """Queries answered by the three instruments (every relay-box command is answered)."""
    return bench.dmm.lines_answered + bench.supply.lines_answered + bench.relay_box.lines_handled


Controller = ControllerSide | ControllerProcess


def time_one(
    bench: VirtualBench, side: Controller, request: dict[str, object], s: Samples, who: str
) -> None:
    """Open (untimed), then the timed work with the bench's counters read on either side."""
    side.answer(request)
    try:
        ops, spent, trips = box_operations(bench), bench.clock.spent_s, round_trips(bench)
        done = side.answer({"go": True})
        if who == "rig":
            s.rig_wall_s.append(float(done["wall_s"]))
            s.rig_instrument_s.append(bench.clock.spent_s - spent)
            s.rig_relay_ops.append(box_operations(bench) - ops)
            s.rig_round_trips.append(round_trips(bench) - trips)
            s.rig_readings.append(int(done["readings"]))
        else:
            s.script_wall_s.append(float(done["wall_s"]))
            s.script_relay_ops.append(box_operations(bench) - ops)
    finally:
        side.answer({"close": True})


def script_floor_s(table: list[HandReading], plan: Plan) -> float:
    """The script's own instrument time: per reading, all open (a release when anything was
    closed), the route closed (an operate), the fixed sleep, autorange, the integration; then all
    open at the end.  Its wall time cannot be shorter, so script/rig cannot exceed this over the
    limit."""
    t, line_hz = plan.timing, plan.station.line_hz
    total, closed = 0.0, False
    for reading in table:
        total += (t.relay_release_s if closed else 0.0) + (
            t.relay_operate_s if reading.relays else 0.0
        )
        total += SETTLE_S + t.autorange_s + reading.nplc / line_hz + t.reading_overhead_s
        closed = bool(reading.relays)
    return total + (t.relay_release_s if closed else 0.0)


def round_trip_ms(resource: str, count: int = 50, idle_s: float = 0.0) -> float:
    """Median SCPI round trip (``*IDN?``) through rig's own session, in ms, each after
    ``idle_s`` of doing nothing (as a query after a reading's integration is)."""
    session = VisaSession("dmm", resource, {})
    try:
        times = []
        for _ in range(count):
            if idle_s:
                time.sleep(idle_s)
            start = time.perf_counter()
            session.query("*IDN?")
            times.append(time.perf_counter() - start)
        return statistics.median(times) * 1000
    finally:
        session.close()


def measure(
    workload: Workload,
    folder: Path,
    repeat: int,
    generated: int,
    same_process: bool,
    controller_cpu: int | None,
) -> dict[str, object]:
    folder.mkdir(parents=True, exist_ok=True)
    timing = InstrumentTiming()
    with shipped_bench(
        workload.unit,
        folder=folder,
        timing=Timing.REAL,
        relay_operate_s=timing.relay_operate_s,
        relay_release_s=timing.relay_release_s,
    ) as (bench, station):
        path = workload.sequence or write_sequence(folder / "generated.toml", generated)
        plan = load_plan(path, station)
        table = hand_table(plan)
        results = folder / "results.db"
        side: Controller = (
            ControllerSide(station.path, path, results)
            if same_process
            else ControllerProcess(station.path, path, results, controller_cpu)
        )
        samples = Samples()
        assert bench.endpoints is not None
        script = {
            "open": "script",
            "dmm": bench.endpoints.dmm_resource,
            "relays": bench.endpoints.relay_port,
            "csv": str(folder / "hand.csv"),
        }
        try:
            runs = [
                lambda: time_one(bench, side, {"open": "rig", "serial": "SN-RIG"}, samples, "rig"),
                lambda: time_one(bench, side, script, samples, "script"),
            ]
            for rep in range(repeat):
                for n in range(len(runs)):  # rotate who goes first
                    runs[(rep + n) % len(runs)]()
            rtt_ms = round_trip_ms(bench.endpoints.dmm_resource)
            rtt_idle_ms = round_trip_ms(bench.endpoints.dmm_resource, count=20, idle_s=0.02)
        finally:
            side.shut()
    limit = plan.physical_limit()
    rig_wall = statistics.median(samples.rig_wall_s)
    overheads = [w - i for w, i in zip(samples.rig_wall_s, samples.rig_instrument_s, strict=True)]
    steps = len(plan.steps)
    return {
        "name": workload.name,
        "sequence": plan.sequence.name,
        "steps": steps,
        "readings_planned": limit.readings,
        "readings_taken": statistics.median(samples.rig_readings),
        "limit_ms": round(limit.total_s * 1000, 1),
        "strict_limit_ms": round(limit.strict_s * 1000, 1),
        "settle_ms": round((limit.settle_s + limit.settle_proof_s) * 1000, 1),
        "rig_wall_ms": round(rig_wall * 1000, 1),
        "script_wall_ms": round(statistics.median(samples.script_wall_s) * 1000, 1),
        "wall_over_limit": round(rig_wall / limit.total_s, 3),
        "instrument_ms": round(statistics.median(samples.rig_instrument_s) * 1000, 1),
        "script_over_rig": round(statistics.median(samples.script_wall_s) / rig_wall, 2),
        "script_floor_over_limit": round(script_floor_s(table, plan) / limit.total_s, 2),
        "relay_ops": int(statistics.median(samples.rig_relay_ops)),
        "relay_ops_planned": plan.relay_ops,
        "relay_ops_unordered": plan.relay_ops_unordered(),
        "relay_ops_script": int(statistics.median(samples.script_relay_ops)),
        "overhead_ms_per_step": round(statistics.median(overheads) / steps * 1000, 2),
        "round_trips": int(statistics.median(samples.rig_round_trips)),
        "link_ms": round(statistics.median(samples.rig_round_trips) * rtt_idle_ms, 1),
        "scpi_round_trip_ms": round(rtt_ms, 3),
        "scpi_round_trip_after_idle_ms": round(rtt_idle_ms, 3),
        "repetitions": repeat,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="one repetition, 20 generated steps")
    parser.add_argument("--repeat", type=int, default=7, help="repetitions (median of these)")
    parser.add_argument(
        "--same-process",
        action="store_true",
        help="time rig and the script in the bench's own process (shows what sharing it costs)",
    )
    parser.add_argument(
        "--as-is",
        action="store_true",
        help="leave the host alone: no cores of their own, idle states as they are",
    )
    args = parser.parse_args()
    repeat = 1 if args.quick else max(5, args.repeat)
    generated = 20 if args.quick else 200
    timing = InstrumentTiming()
    results = []
    tune = not (args.as_is or args.quick)
    with tempfile.TemporaryDirectory() as tmp, tuned_host(tune, pin=not args.same_process) as host:
        for workload in WORKLOADS:
            folder = Path(tmp) / workload.name
            results.append(
                measure(workload, folder, repeat, generated, args.same_process, host.controller_cpu)
            )
    print(host.describe())
    ms = {k: v * 1000 for k, v in vars(timing).items()}
    print(
        f"instrument figures: relay operate {ms['relay_operate_s']:g} ms, release "
        f"{ms['relay_release_s']:g} ms; mains 50 Hz; meter {ms['reading_overhead_s']:g} ms a "
        f"reading + NPLC/50 Hz, autorange {ms['autorange_s']:g} ms; script settle "
        f"{SETTLE_S * 1000:g} ms; SCPI round trip {results[0]['scpi_round_trip_ms']} ms back to "
        f"back, "
        f"{results[0]['scpi_round_trip_after_idle_ms']} ms after 20 ms idle (measured)"
    )
    head = (
        f"{'workload':<15}{'steps':>6}{'reads':>6}{'strict ms':>10}{'settle ms':>10}"
        f"{'limit ms':>9}{'rig ms':>9}{'script ms':>10}{'rig/limit':>10}{'script/rig':>11}"
        f"{'(cap)':>7}{'relay ops':>10}{'unordered':>10}{'ovh ms/step':>12}{'trips':>6}"
        f"{'links ms':>9}"
    )
    print(head)
    for r in results:
        print(
            f"{r['name']:<15}{r['steps']:>6}{r['readings_taken']:>6}{r['strict_limit_ms']:>10}"
            f"{r['settle_ms']:>10}{r['limit_ms']:>9}{r['rig_wall_ms']:>9}{r['script_wall_ms']:>10}"
            f"{r['wall_over_limit']:>10}{r['script_over_rig']:>11}"
            f"{r['script_floor_over_limit']:>7}{r['relay_ops']:>10}{r['relay_ops_unordered']:>10}"
            f"{r['overhead_ms_per_step']:>12}{r['round_trips']:>6}{r['link_ms']:>9}"
        )
    print(
        "(cap): the script's own instrument time over the limit, the most script/rig can be "
        "for a controller on the limit; trips: queries rig waited on in one run; links ms: trips x "
        "the round trip after idle (what waiting on the links alone costs on this machine)"
    )
    summary = {
        "repetitions": repeat,
        "host": host.as_json(),
        "wall_over_limit_max": max(float(str(r["wall_over_limit"])) for r in results),
        "script_over_rig_min": min(float(str(r["script_over_rig"])) for r in results),
        "workloads": results,
    }
    print(json.dumps(summary))


if __name__ == "__main__":
    main()
