"""The ``rig`` command line.  Bad input is reported as text naming file and key, never as a
traceback; exit codes: 0 pass, 1 fail, 2 bad input, 3 aborted or instrument fault."""

from __future__ import annotations

import argparse
import logging
import math
import signal
import sys
import threading
from pathlib import Path
from types import FrameType
from typing import TYPE_CHECKING

from rig import __version__
from rig.cautions import HARNESS_CAUTION, WELL_CAUTION, cautions_for
from rig.cli_output import Output, show, show_limits
from rig.commands._bench_control import add_port_args
from rig.commands._record_text import add_record_text_args, record_text_problem
from rig.commands._store_args import ArgumentProblem
from rig.errors import ConfigError, Problem, RigError
from rig.events import NOT_READINGS
from rig.judge.decision import Verdict, tur_text
from rig.quantity import format_quantity
from rig.signed_values import join_signed_values, value_options

if TYPE_CHECKING:
    from rig.analysis.model_tur import ModelTur
    from rig.analysis.settling import RouteSettling
    from rig.config.fixture import FixtureMap
    from rig.config.station import Station
    from rig.config.unit_file import UnitModel
    from rig.engine import RunSummary
    from rig.plan import Plan, PlannedStep
    from rig.screening import ScreenDecision
    from rig.steps import StepSpec
    from rig.store_sync import SyncReport

EXIT_PASS, EXIT_FAIL, EXIT_BAD_INPUT, EXIT_ABORTED = 0, 1, 2, 3
RELAYS_SHOWN_CHARS = 40
"""Widest relay list `rig check` prints in its table; a longer one is given as a count."""


def main(argv: list[str] | None = None) -> int:
    parser = _parser()
    words = sys.argv[1:] if argv is None else argv
    args = parser.parse_args(join_signed_values(words, value_options(parser)))
    # what a technician must act on is said as `warning:` lines by the commands themselves; the
    # library's own log shows only its errors, in rig's words, unless --verbose asks for all
    logging.basicConfig(
        level=logging.DEBUG if args.verbose else logging.ERROR,
        format="%(levelname)s %(name)s: %(message)s" if args.verbose else "rig: %(message)s",
    )
    out = Output()
    _sigterm_as_interrupt()
    try:
        return int(args.func(args, out))
    except ConfigError as exc:
        out.error("rig: the input has problems:")
        for problem in exc.problems:
            out.error(f"  {problem}")
        return EXIT_BAD_INPUT
    except ArgumentProblem as exc:  # an option naming no usable file or place: bad input too
        out.error(f"rig: {exc}")
        return EXIT_BAD_INPUT
    except RigError as exc:
        out.error(f"rig: {exc}")
        return EXIT_ABORTED
    except KeyboardInterrupt:
        out.error("rig: interrupted; the bench was brought to the safe state")
        return EXIT_ABORTED


def _sigterm_as_interrupt() -> None:
    def handler(signum: int, frame: FrameType | None) -> None:
        raise KeyboardInterrupt

    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGTERM, handler)


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="rig", description="Automated bench test rig controller")
    parser.add_argument("--version", action="version", version=f"rig {__version__}")
    parser.add_argument("-v", "--verbose", action="store_true", help="debug logging")
    sub = parser.add_subparsers(dest="command", required=True)

    demo = sub.add_parser("demo", help="run the demo sequences on a virtual bench")
    demo.add_argument("--json", action="store_true", help="one machine-readable summary")
    demo.add_argument(
        "--data-dir",
        type=Path,
        default=Path("rig-data/demo"),
        help="where the demo's store, station files and reports go (rig-data/demo)",
    )
    demo.set_defaults(func=cmd_demo)

    check = sub.add_parser(
        "check",
        help="validate a sequence against a station and show its plan, or check a station, unit "
        "or fixture file alone",
        description="rig check SEQUENCE --station STATION [--unit UNIT] checks a sequence against "
        "a station and shows its plan; without a sequence, each file given by --station, --unit "
        "or --fixture is checked alone (a station with its fixture, a unit with its fixture).",
    )
    check.add_argument("sequence", type=Path, nargs="?", help="the sequence file to check")
    check.add_argument("--station", type=Path, help="the station file")
    check.add_argument(
        "--unit",
        type=Path,
        help="a unit file: also show each route's settling time on its model against `settle`",
    )
    check.add_argument(
        "--fixture", type=Path, help="a fixture file to check alone (without a sequence)"
    )
    check.add_argument(
        "--wire-list",
        type=Path,
        help="a wire list (CSV) to check alone, joined to the fixture given with --fixture",
    )
    check.set_defaults(func=cmd_check)

    run = sub.add_parser("run", help="run a sequence on a station")
    run.add_argument("sequence", type=Path, help="the sequence file to run")
    run.add_argument("--station", type=Path, required=True, help="the station file")
    run.add_argument("--serial", required=True, help="the unit's serial number")
    run.add_argument("--operator", default="", help="who runs the test, for the record")
    run.add_argument(
        "--unit",
        type=Path,
        help="the unit file of what is tested, recorded with the run (rig diagnose reads it)",
    )
    run.add_argument("--yes", action="store_true", help="confirm operator prompts automatically")
    run.add_argument("--json", action="store_true", help="one machine-readable summary")
    run.add_argument(
        "--readings",
        action="store_true",
        help="print every reading once it is stored (settle-proof readings marked)",
    )
    run.add_argument("--study-part", default="", help="gauge study: the part measured")
    run.add_argument("--study-trial", type=int, help="gauge study: this trial's number (1, 2, ...)")
    add_record_text_args(run)
    run.set_defaults(func=cmd_run)

    sim = sub.add_parser("sim", help="serve a virtual bench for a unit file")
    sim.add_argument("--unit", type=Path, required=True, help="the unit file to serve")
    sim.add_argument(
        "--fault",
        action="append",
        default=[],
        metavar="SPEC",
        help="a fault to build into the unit, e.g. open:signal (repeatable; docs/fault-specs.md)",
    )
    sim.add_argument(
        "--timing",
        choices=("instant", "real"),
        default="instant",
        help="instruments answer at once, or take their real relay and integration times",
    )
    sim.add_argument(
        "--station-out",
        default="rig-data/virtual-station.toml",
        help="where to write the station file that names this bench (a folder, or a path "
        "ending with /: the file virtual-station.toml in it, the folder made if need be)",
    )
    sim.add_argument(
        "--state-file",
        help="a JSON file rewritten on every change: closed relays, outputs on, faults",
    )
    add_port_args(sim)
    sim.add_argument("--seed", type=int, default=0, help="seed of the simulated noise")
    sim.set_defaults(func=cmd_sim)

    from rig.commands import register_all

    register_all(sub)
    return parser


def _exit_code(verdict: Verdict, status: str) -> int:
    if status != "complete" or verdict is Verdict.ERROR:
        return EXIT_ABORTED
    if verdict in (Verdict.FAIL, Verdict.CONDITIONAL_FAIL):
        return EXIT_FAIL
    return EXIT_PASS


# --- rig demo ---------------------------------------------------------------------------------


def cmd_demo(args: argparse.Namespace, out: Output) -> int:
    from rig.demo import run_demo

    if not args.json:  # the demo proves a harness and screens senders in a well: both cautions
        out.line(HARNESS_CAUTION)
        out.line(WELL_CAUTION)
        out.line("Demo: a virtual bench with invented units and faults (no hardware needed).")
        out.line()
    store_path, runs = run_demo(args.data_dir.resolve())
    if args.json:
        out.json(
            {
                "store": str(store_path),
                "runs": [
                    {
                        "run_id": r.summary.run_id,
                        "serial": r.case.serial,
                        "sequence": r.case.sequence,
                        "unit": r.case.unit,
                        "faults": list(r.case.faults),
                        "verdict": r.summary.verdict.value,
                        "status": r.summary.status,
                        "failed_steps": r.summary.failed_steps,
                        "likely_fault": r.likely_fault,
                    }
                    for r in runs
                ],
            }
        )
        return 0
    for r in runs:
        faults = ", ".join(r.case.faults) or "none"
        out.line(
            f"run {r.summary.run_id:<3} {r.case.serial}  {r.case.sequence:<24} "
            f"faults: {faults:<26} -> {r.summary.verdict.value.upper()}"
        )
        for result in r.summary.results:
            if result.step_id in r.summary.failed_steps and result.unit == "faults":
                out.line(f"      {result.step_id}: {result.note}")
            elif result.step_id in r.summary.failed_steps:
                out.line(
                    f"      {result.step_id}: {show(result.value, result.unit)} "
                    f"(limits {show_limits(result.limits, result.unit)})"
                )
        if r.summary.reason:
            out.line(f"      reason: {r.summary.reason}")
        if r.likely_fault:
            out.line(f"      likely fault (rig diagnose): {r.likely_fault}")
    out.line()
    ids = f" (runs {runs[0].summary.run_id} to {runs[-1].summary.run_id})" if runs else ""
    out.line(f"{len(runs)} runs stored in {store_path}{ids}")
    out.line(
        f"station files (one per unit, all naming that store): {store_path.parent}/station-*.toml;"
        " try: rig report RUN --station FILE, rig stats --station FILE,"
        " rig diagnose RUN_ID --station FILE"
    )
    return 0


# --- rig check --------------------------------------------------------------------------------


def _check_arguments(args: argparse.Namespace) -> str:
    """Why the files given to ``rig check`` do not make a check, or empty when they do."""
    if args.sequence is not None and args.sequence.suffix.lower() == ".csv":
        return (
            f"rig check: {args.sequence} is a wire list, not a sequence: check it with "
            f"--wire-list {args.sequence} --fixture FIXTURE"
        )
    if args.wire_list is not None and (args.sequence is not None or args.fixture is None):
        return (
            "rig check: --wire-list is checked alone, joined to its fixture: give --fixture "
            "FIXTURE and no sequence"
        )
    if args.sequence is None:
        if args.station is None and args.unit is None and args.fixture is None:
            return (
                "rig check: give a sequence and --station STATION, or a file to check alone: "
                "--station, --unit, --fixture or --wire-list with --fixture"
            )
        return ""
    if args.station is None:
        return f"rig check: {args.sequence} is checked against a station; give --station STATION"
    if args.fixture is not None:
        return (
            "rig check: --fixture checks a fixture file alone; with a sequence, the fixture is "
            "the one its station names"
        )
    return ""


def _check_alone(args: argparse.Namespace, out: Output) -> int:
    """Each of a station, unit and fixture file checked by itself (a station and a unit with
    the fixture each names): every problem of all of them, or one line each when valid."""
    from rig.config import load_collecting
    from rig.config.fixture import fixture_of, load_fixture
    from rig.config.station import load_station
    from rig.config.unit_file import load_unit
    from rig.harness.wire_list import load_wire_list

    def unit_and_fixture(path: Path) -> tuple[UnitModel, FixtureMap]:
        unit = load_unit(path)
        return unit, fixture_of(unit)  # the fixture `rig sim --unit` loads

    problems: list[Problem] = []
    station = load_collecting(load_station, args.station, problems)
    unit = load_collecting(unit_and_fixture, args.unit, problems)
    fixture = load_collecting(load_fixture, args.fixture, problems)
    wires = None
    if args.wire_list is not None and fixture is not None:  # joined to a fixture that loads
        wires = load_collecting(
            lambda path: load_wire_list(path, fixture), args.wire_list, problems
        )
    if problems:
        raise ConfigError(problems)
    if station is not None:
        out.line(
            f"station {station.name} ({args.station}): valid, with fixture "
            f"{station.fixture.name} ({station.fixture.path.name})"
        )
        _show_probe(station, out)
    if unit is not None:
        model, on = unit
        out.line(f"unit {model.name} ({args.unit}): valid, on fixture {on.name} ({on.path.name})")
        _show_unit_warnings(model, on, out)
    if fixture is not None:
        out.line(
            f"fixture {fixture.name} ({args.fixture}): valid, {len(fixture.pins)} pins on "
            f"{fixture.relay_count} relays"
        )
    if wires is not None:
        out.line(
            f"wire list {args.wire_list}: valid, {len(wires.rows)} rows in {len(wires.nets)} nets, "
            f"every fixture end on fixture {args.fixture.name}"
        )
        if wires.ignored:
            out.line(wires.ignored_note())
    return 0


def _show_unit_warnings(
    unit: UnitModel, fixture: FixtureMap, out: Output, plan: Plan | None = None
) -> None:
    """What a unit file allows but likely does not mean (a node that misses its fixture pin),
    and where the sequence checked with it reads its reference probe or an RTD sensor with
    another r0."""
    from rig.config.unit_nodes import node_warnings
    from rig.probe_match import probe_r0_warnings, rtd_r0_warnings

    for key, message in node_warnings(unit, fixture.pins):
        out.line(f"warning: {unit.problem(key, message)}")
    if plan is None:
        return
    for problem in [*probe_r0_warnings(plan.sequence, unit), *rtd_r0_warnings(plan.sequence, unit)]:
        out.line(f"warning: {problem}")


def cmd_check(args: argparse.Namespace, out: Output) -> int:
    from rig.analysis.model_tur import model_step_turs
    from rig.analysis.settling import route_settling
    from rig.harness.wire_list import WireList
    from rig.runner import load_inputs
    from rig.supply_wires import supply_wire_warnings

    problem = _check_arguments(args)
    if problem:
        out.error(problem)
        return EXIT_BAD_INPUT
    if args.sequence is None:
        return _check_alone(args, out)
    plan, unit = load_inputs(args.sequence, args.station, args.unit)
    station = plan.station
    settling = None if unit is None else route_settling(plan, unit)
    turs = {} if unit is None else model_step_turs(plan, unit)
    out.line(f"sequence {plan.sequence.name} ({args.sequence}) on station {station.name}: valid")
    if station.operator_required:
        out.line("operator: required by the station (operator_required); run with --operator NAME")
    _show_probe(station, out, reads_probe=plan.reads_reference_probe)
    rows = []
    for step in plan.steps:
        spec = step.spec
        relays = " | ".join(",".join(str(r) for r in sorted(rs)) for rs in step.relay_sets)
        if len(step.relay_sets) > 4 and len(relays) > RELAYS_SHOWN_CHARS:  # a harness proof
            relays = f"{len(step.relay_sets)} routes"
        range_cell, u_cell, tur_cell = _estimate(plan, step, turs.get(spec.id))
        rows.append(
            [
                spec.id,
                spec.kind,
                " ".join(f"{k}={v}" for k, v in spec.pins.items()),
                relays or "-",
                "ok",
                _limits_text(spec),
                range_cell,
                u_cell,
                tur_cell,
            ]
        )
    headers = ["step", "kind", "pins", "relays", "interlocks", "limits", "range", "U (k=2)", "TUR"]
    out.table(headers, rows)
    for found in turs.values():
        out.line(model_tur_note(found, args.unit.name))
    wire_lists = []
    for step in plan.steps:
        wires = step.spec.params.get("wires")
        if isinstance(wires, WireList):
            wire_lists.append(wires)
            if wires.ignored:
                out.line(f"{step.spec.id}: {wires.ignored_note()}")
    _show_supply(plan, out)
    for warning in supply_wire_warnings(plan.sequence, unit, wire_lists):
        out.line(f"warning: {warning}")
    out.line()
    out.line(
        f"relay operations: {plan.relay_ops} as planned "
        f"({plan.relay_ops_file_order()} in file order, {plan.relay_ops_unordered()} opening "
        "everything between readings)"
    )
    limit = plan.physical_limit()
    out.line(
        f"duration at the physical limit: {limit.total_s * 1000:.1f} ms "
        f"(relays {limit.relays_s * 1000:.1f} ms in {limit.transitions} changes, "
        f"{limit.readings} readings {limit.readings_s * 1000:.1f} ms, "
        f"autorange {limit.autorange_s * 1000:.1f} ms, waits {limit.waits_s * 1000:.1f} ms, "
        f"stated settle {limit.settle_s * 1000:.1f} ms, settle proof "
        f"{limit.settle_proof_s * 1000:.1f} ms)"
    )
    if limit.settle_proof_s:
        out.line(
            "  steps that state no settle time are proved settled by a second reading after "
            "each change of route; state `settle` where the circuit's time constant is known"
        )
    if settling is not None:
        _show_settling(settling, args.unit, out)
    if unit is not None:
        _show_unit_warnings(unit, station.fixture, out, plan)
    for warning in plan.warnings:
        out.line(f"warning: {warning}")
    if station.store_path.exists():
        from rig.engine import wear_warnings
        from rig.store_open import open_file_for_reading

        store = open_file_for_reading(station.store_path)
        try:
            for warning in wear_warnings(store.relay_wear(station.name), station.fixture):
                out.line(f"warning: {warning}")
        finally:
            store.close()
    return 0


def _show_probe(station: Station, out: Output, reads_probe: bool = True) -> None:
    """The reference thermometer the station states, as a run's record will name it, and any
    instrument or probe past its calibration due date: a station file can be valid while every
    run on it is refused, and ``rig check`` is where that should be found, not at the bench.
    With a sequence, the probe's date counts only if the sequence reads the probe."""
    from rig.bench_open import CalibrationPastDue, check_calibration

    probe = station.reference_probe
    if probe is not None:
        due = probe.calibration_due.isoformat() if probe.calibration_due else "not given"
        out.line(
            f"reference probe: {probe.identity}, {probe.accuracy_text()}, calibration due {due}"
        )
    try:
        allowed = check_calibration(station, reads_probe=reads_probe)
    except CalibrationPastDue as exc:
        out.line(f"warning: rig run will refuse to start on this station: {exc}")
        return
    for note in allowed:
        out.line(f"warning: {note}")


def _limits_text(spec: StepSpec) -> str:
    """A step's limits as the file sets them: fixed, or around the model's prediction, which is
    made at run time (the ratiometric tolerance is in points of the supply, not of the value; an
    rtd step's class is in degC, turned into ohms at the temperature the run judges at)."""
    from rig.steps import KINDS

    unit = str(spec.params.get("unit", KINDS[spec.kind].unit))  # an NTC read as a voltage: V
    if spec.kind == "prompt":  # and what a no does where it ends the run
        return "confirmed, or stop" if spec.params.get("declined") == "stop" else "confirmed"
    if spec.limits is not None:
        return show_limits(spec.limits, unit)
    tolerance = spec.params.get("tolerance")
    if isinstance(tolerance, tuple):
        how, amount = tolerance
        return f"model ± {amount:g} %" if how == "pct" else f"model ± {show(amount, unit)}"
    points = spec.params.get("tolerance_pct")
    if isinstance(points, int | float):
        return f"model ± {points:g} % of supply"
    cls = spec.params.get("tolerance_class")  # an rtd step's IEC 60751 class, in degC at T
    if isinstance(cls, str):
        return f"model ± class {cls}"
    return "-"


def _show_supply(plan: Plan, out: Output) -> None:
    """What each powered step programs into the supply, so that a voltage or current limit
    that is wrong for the unit is seen before anything is powered."""
    powered = [step.spec for step in plan.steps if step.spec.supply is not None]
    if not powered:
        return
    caps = plan.station.supply_caps
    stated = [
        f"{what} {show(cap, unit)}"
        for what, cap, unit in (
            ("voltage", caps.max_voltage, "V"),
            ("limit", caps.max_current, "A"),
        )
        if cap is not None
    ]
    out.line()
    out.line("the supply, step by step (it drives current into the unit: keep each limit low):")
    out.line(
        "  the station allows at most " + " and ".join(stated)
        if stated
        else "  the station states no max_voltage or max_current for its supply"
    )
    rows = [
        [
            spec.id,
            spec.supply.pos,
            spec.supply.neg,
            show(spec.supply.volts, "V"),
            show(spec.supply.limit_a, "A"),
        ]
        for spec in powered
        if spec.supply is not None
    ]
    out.table(["step", "+", "-", "voltage", "current limit"], rows)


def _show_settling(found: list[RouteSettling], unit_path: Path, out: Output) -> None:
    """Each route's time constant on the unit model, what settling to 1 ppm takes, and the
    settle the sequence states, so an engineer can state it from the circuit."""
    from rig.analysis.settling import PPM_TIME_CONSTANTS

    out.line()
    out.line(
        f"settling on the unit model {unit_path.name} (to 1 ppm: {PPM_TIME_CONSTANTS:.1f} time "
        "constants):"
    )
    rows = []
    for r in found:
        stated = "proved" if r.stated_s is None else _duration(r.stated_s)
        verdict = "short" if r.short else "ok"
        rows.append(
            [
                r.step_id,
                ",".join(str(n) for n in sorted(r.relays)),
                r.function.value,
                _duration(r.tau_s),
                _duration(r.needed_s),
                stated,
                verdict,
            ]
        )
    out.table(["step", "relays", "function", "tau", "1 ppm", "settle", "verdict"], rows)
    for r in found:
        if r.short:
            out.line(
                f"warning: step {r.step_id} states settle {_duration(r.stated_s or 0.0)} but its "
                f"route needs {_duration(r.needed_s)} on this unit: readings would be taken early"
            )


def _duration(seconds: float) -> str:
    """A short time in the unit that reads best: 0 s, 4.7 us, 1.6 ms, 2.5 s."""
    if seconds == 0:
        return "0 s"
    for scale, unit in ((1.0, "s"), (1e-3, "ms"), (1e-6, "us")):
        if abs(seconds) >= scale:
            return f"{seconds / scale:.3g} {unit}"
    return f"{seconds / 1e-9:.3g} ns"


def model_tur_note(found: ModelTur, unit_file: str) -> str:
    """Where a model step's U and TUR come from, and the TUR at the other end of the range."""
    worst = found.worst
    others = [
        f"{at.temp_c:g} degC: {tur_text(at.tur)}" for at in found.at if at.temp_c != worst.temp_c
    ]
    where = (
        f"at {worst.temp_c:g} degC, the worst end of {unit_file}'s temperature_range"
        if others
        else f"at {worst.temp_c:g} degC, the ambient of {unit_file}"
    )
    tail = f" ({'; '.join(others)})" if others else ""
    stated = (
        ""
        if found.pressure_pa is None
        else f" at its stated pressure, {format_quantity(found.pressure_pa, 'Pa')}"
    )
    return f"{found.step_id}: limits around the prediction{stated}: U and TUR {where}{tail}"


def _estimate(
    plan: Plan, step: PlannedStep, model_tur: ModelTur | None = None
) -> tuple[str, str, str]:
    """The planned range, and the expanded uncertainty and TUR at the upper (or lower) limit;
    for limits around a prediction, at the worst temperature the unit file allows."""
    from rig.config.station import FUNCTIONS
    from rig.step_judging import SUPPLY_CURRENT, uncertainty_at_limit
    from rig.steps import KINDS

    spec = step.spec
    kind = KINDS[spec.kind]
    function = kind.meter_function(spec)
    if spec.kind == SUPPLY_CURRENT:  # the supply's own readback, as the run takes its U
        readback = plan.station.supply_accuracy.get("current")
        found = uncertainty_at_limit(plan.station, spec, None)
        if readback is None or found is None:
            return "-", "-", "-"
        expanded, tur = found
        return show(readback[0], "A"), show(expanded, kind.unit), tur_text(tur)
    if function is None:
        return "-", "-", "-"  # nothing measured with the meter (a prompt, a soak)
    range_text = "auto" if step.range_ is None else show(step.range_, FUNCTIONS[function.value])
    if model_tur is not None:
        worst = model_tur.worst
        return range_text, show(worst.expanded, model_tur.unit), tur_text(worst.tur)
    if step.range_ is None:
        return range_text, "-", "-"
    found = uncertainty_at_limit(plan.station, spec, step.range_)
    if found is None:  # a temperature or a fraction: the meter's U is not in its unit
        return range_text, "-", "-"
    expanded, tur = found
    return range_text, show(expanded, kind.unit), tur_text(tur)


# --- rig run ----------------------------------------------------------------------------------


def _diagnosable(summary: RunSummary) -> bool:
    """Whether ``rig diagnose`` has something to explain: a run that went to its end with a step
    that failed on a reading.  An aborted run failed on the bench, not the unit; a declined
    prompt is an operator's answer, and a harness proof names its own findings."""
    failed = [r for r in summary.results if r.step_id in summary.failed_steps]
    return summary.status == "complete" and any(
        r.verdict is not Verdict.ERROR and r.unit not in NOT_READINGS for r in failed
    )


def _screen_decision(plan: Plan, summary: RunSummary) -> ScreenDecision | None:
    """The screen's decision on the unit from this run (``rig.screening``, the rule of
    ``rig stats``), or None where the sequence proves a harness; from its planned steps too, so
    a proof ended before its proof step is still one."""
    from rig.screening import StepEvidence, answered_no, evidence, is_screen, screen_decision
    from rig.steps import KINDS

    units = {KINDS[p.spec.kind].unit for p in plan.steps}
    if not is_screen(units):
        return None
    no = answered_no((r.unit, r.verdict.value) for r in summary.results)
    found = evidence(
        StepEvidence(
            r.kind,
            r.unit,
            r.value,
            None if r.limits is None else r.limits.low,
            None if r.limits is None else r.limits.high,
            r.expanded_u,
            r.verdict.value,
            r.step_id,
        )
        for r in summary.results
    )
    return screen_decision(summary.status, summary.verdict.value, found, answered_no=no)


def serial_option_problem(serial: str) -> str:
    """``entered_serial_problem`` in the words of the option that gave the serial."""
    from rig.run_admission import entered_serial_problem

    problem = entered_serial_problem(serial)
    return f"--serial: {problem}" if problem else ""


def _answer(question: str, *, to_stderr: bool) -> str:
    """The operator's answer to ``question``.  With ``--json`` the question goes to standard
    error, so that standard output stays one JSON document; ``EOFError`` when input has ended."""
    if not to_stderr:
        return input(question)
    sys.stderr.write(question)
    sys.stderr.flush()
    line = sys.stdin.readline()
    if not line:
        raise EOFError
    return line


def cmd_run(args: argparse.Namespace, out: Output) -> int:
    from rig.end_cause import EndCause
    from rig.engine import RunInterrupted, StopRequested
    from rig.run_admission import operator_problem
    from rig.runner import load_inputs, run_plan
    from rig.stats.study import study_problem
    from rig.store_sync import around_a_run

    continuing = getattr(args, "resume", None) is not None  # its serial is the record's own
    problem = (
        ("" if continuing else serial_option_problem(args.serial))
        or study_problem(args.study_part, args.study_trial, args.operator)
        or record_text_problem(args)
    )
    if problem:
        out.error(f"rig: {problem}")
        return EXIT_BAD_INPUT
    # a unit file that does not load is named now, not at diagnosis
    plan, _ = load_inputs(args.sequence, args.station, getattr(args, "unit", None))
    problem = operator_problem(plan.station, args.operator)
    if problem:
        out.error(f"rig: {problem}")
        return EXIT_BAD_INPUT
    unit = "" if getattr(args, "unit", None) is None else str(args.unit.resolve())
    on_server = None  # the other stations' runs of the unit, asked of the server before the run
    if args.json:
        out.quiet = True
    else:
        for caution in cautions_for([plan]):
            out.line(caution)
        if not continuing:
            from rig.tested_before import ask_server, tested_before

            claim = getattr(args, "claim", "")
            for seen in tested_before(
                plan.station.store_path, args.serial, plan.sequence.name, claim
            ):
                out.line(seen)
            on_server = ask_server(
                plan.station.name, args.serial, plan.sequence.name, out.line, claim
            )

    def ask(text: str) -> bool:
        if args.yes:
            out.line(f"  prompt: {text} (confirmed by --yes)")
            return True
        stops = " (no stops the run)" if out.no_stops_run else ""
        try:
            answer = _answer(f"  {text}{stops} [y/N] ", to_stderr=args.json)
        except EOFError:  # input is not a terminal and has ended: nobody is there to answer
            raise StopRequested(
                f"the prompt {text!r} got no answer: standard input ended; run rig at a "
                "terminal, or confirm prompts with --yes",
                EndCause.NO_ANSWER,
            ) from None
        except OSError as exc:  # the terminal hung up, or the prompt's reader went away
            raise StopRequested(
                f"the prompt {text!r} could not be put: {exc}", EndCause.NO_ANSWER
            ) from None
        return answer.strip().lower() in ("y", "yes")

    out.show_readings = bool(getattr(args, "readings", False))
    synced: list[SyncReport] = []
    try:
        summary = run_plan(
            plan,
            args.serial,
            operator=args.operator,
            unit=unit,
            listener=out.on_event,
            ask=ask,
            resume=getattr(args, "resume", None),
            study_part=args.study_part,
            study_trial=args.study_trial,
            on_sync=synced.append,
            claim=getattr(args, "claim", ""),
            remark=getattr(args, "remark", ""),
            on_server=on_server,
        )
    except RunInterrupted as stopped:  # recorded and safe: said as any other run's end
        summary = stopped.summary
        out.error(f"rig: interrupted; run {summary.run_id} is recorded as aborted")
        interrupted: int | None = summary.run_id
    else:
        interrupted = None
    # the sends before and after the run, when a server is set; a run Ctrl-C ended waits
    server = around_a_run(synced, interrupted) if synced else None
    decision = _screen_decision(plan, summary)
    if args.json:
        out.quiet = False
        out.json(
            {
                "run_id": summary.run_id,
                "serial": summary.serial,
                "sequence": summary.sequence,
                "status": summary.status,
                "verdict": summary.verdict.value,
                "reason": summary.reason,
                "end_cause": summary.end_cause.value,
                "claim": summary.claim,
                "remark": summary.remark,
                "failed_steps": summary.failed_steps,
                "screen_decision": None
                if decision is None
                else {"decision": decision.word, "meaning": decision.meaning},
                "safe": summary.safe,
                "warnings": summary.warnings,
                "notes": summary.notes,
                "store": str(plan.station.store_path),
                "server": server,
                "steps": [
                    {
                        "id": r.step_id,
                        "value": None if math.isnan(r.value) else r.value,
                        "unit": r.unit,
                        "low": None if r.limits is None else r.limits.low,
                        "high": None if r.limits is None else r.limits.high,
                        "expanded_u": None if math.isnan(r.expanded_u) else r.expanded_u,
                        "verdict": r.verdict.value,
                    }
                    for r in summary.results
                ],
                "cut_short": summary.cut_short,
                "not_run": summary.not_run,
            }
        )
    else:
        out.line()
        out.results(summary.results, summary.cut_short, summary.not_run)
        for result in summary.results:  # what each step's record says beside its value
            if result.note:
                out.line(f"  {result.step_id}: " + "\n    ".join(result.note.split("; ")))
        out.line()
        out.line(f"verdict: {summary.verdict.value.upper()}  ({summary.status})")
        if decision is not None:
            from rig.screening import decision_line

            out.line(decision_line(decision))
        if summary.reason:
            out.line(f"reason: {summary.reason}")
        out.warnings(summary.warnings)
        out.line(f"record: run {summary.run_id} in {plan.station.store_path}")
        if _diagnosable(summary):
            from rig.commands.diagnose import suggestion

            command = suggestion(summary.run_id, args.station)
            if not unit:
                command += " --unit UNIT_FILE"
            out.line(f"to rank the likely faults: {command}")
        if server:
            out.line(server)
    return _exit_code(summary.verdict, summary.status)


# --- rig sim ----------------------------------------------------------------------------------


def cmd_sim(args: argparse.Namespace, out: Output) -> int:
    from rig.commands._bench_control import serve_with_control
    from rig.commands._store_args import file_to_write
    from rig.config.fixture import fixture_of
    from rig.config.unit_file import load_unit
    from rig.faults import parse_faults
    from rig.sim.bench import VirtualBench
    from rig.sim.control import UnitFaults
    from rig.sim.timing import Timing

    unit = load_unit(args.unit)
    fixture = fixture_of(unit)
    faults = parse_faults(args.fault, unit, source="--fault")
    station_out = file_to_write(args.station_out, "--station-out", name="virtual-station.toml")
    state_file = None
    if args.state_file is not None:
        state_file = file_to_write(args.state_file, "--state-file", kind="a JSON file to write")
    bench = VirtualBench(
        unit,
        fixture,
        faults=faults,
        timing=Timing(args.timing),
        seed=args.seed,
        state_file=state_file,
        dmm_port=args.dmm_port,
        supply_port=args.supply_port,
    )
    serve_with_control(
        out,
        UnitFaults(bench),
        control_port=args.control_port,
        station_out=station_out,
        station_name=f"virtual-{unit.name}",
        title=f"virtual bench for unit {unit.name} ({args.timing} timing)",
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
