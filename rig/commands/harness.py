"""``rig harness check|capture|sim``: prove a harness against its wire list, capture a wire list
from a known-good harness, or serve a harness as built on the virtual bench.

``check`` and ``capture`` run one ``harness-proof`` step through the engine, so every reading is
stored and the bench ends in the safe state exactly as with ``rig run``.
"""

from __future__ import annotations

import argparse
import hashlib
import json
from pathlib import Path

from rig.cautions import HARNESS_CAUTION, cautions_for
from rig.cli_output import Output
from rig.commands._bench_control import add_port_args
from rig.commands._record_text import add_record_text_args, record_text_problem
from rig.errors import Problem
from rig.quantity import QuantityError, parse_quantity


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    parser = sub.add_parser("harness", help="prove, capture or simulate a wiring harness")
    verbs = parser.add_subparsers(dest="harness_command", required=True)

    check = verbs.add_parser("check", help="prove a harness on the fixture against a wire list")
    check.add_argument("wire_list", type=Path, help="the wire list (CSV) to prove against")
    _common(check)
    check.add_argument(
        "--isolation-method",
        choices=("groups", "pairs", "off"),
        default="groups",
        help="isolation by group testing (default), pair by pair, or not at all",
    )
    check.add_argument("--isolation", default="1 Mohm", help="per pair minimum (default 1 Mohm)")
    check.add_argument("--contact-allowance", default="5 mohm", help="per contact (5 mohm)")
    check.set_defaults(func=cmd_check)

    capture = verbs.add_parser("capture", help="write a wire list from a known-good harness")
    capture.add_argument("--out", required=True, help="the wire list to write")  # text: a / kept
    capture.add_argument("--connectors", default="", help="comma-separated; default all pins")
    _common(capture)
    capture.set_defaults(func=cmd_capture)

    sim = verbs.add_parser(
        "sim",
        help="serve a harness as built on a virtual bench",
        description="Serve a harness as built on a virtual bench.  Its control channel (faults, "
        "add SPEC, clear, instrument NAME KIND [N], state; docs/harness.md) changes the build "
        "faults while it runs, behind the same ports and station file.",
    )
    sim.add_argument("wire_list", type=Path, help="the wire list of the harness to serve")
    sim.add_argument("--fixture", type=Path, required=True, help="the fixture file")
    sim.add_argument(
        "--fault",
        action="append",
        default=[],
        metavar="SPEC",
        help="a build fault, e.g. swap:W4,W5 or thin:W4 (repeatable; docs/harness.md); "
        "faults can be added and cleared on the control channel while the bench runs",
    )
    sim.add_argument("--ambient", type=float, default=23.0, help="degC (default 23)")
    sim.add_argument("--probe", default="", help="FORCE_HI,SENSE_HI,FORCE_LO,SENSE_LO pins")
    sim.add_argument(
        "--station-out",
        default="rig-data/harness-station.toml",
        help="where to write the station file that names this bench (a folder, or a path "
        "ending with /: the file harness-station.toml in it, the folder made if need be)",
    )
    add_port_args(sim)
    sim.add_argument("--seed", type=int, default=0, help="seed of the simulated noise")
    sim.set_defaults(func=cmd_sim)


def _common(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--station", type=Path, required=True, help="the station file")
    parser.add_argument("--serial", required=True, help="the harness's serial number")
    parser.add_argument("--operator", default="", help="who runs the test, for the record")
    parser.add_argument("--ambient", required=True, help="ambient temperature, e.g. '23 degC'")
    parser.add_argument("--json", action="store_true", help="one machine-readable summary")
    add_record_text_args(parser)


def harness_source(what: str, subject: Path) -> Path:
    """What a harness run records in its sequence's place (``runs.sequence_path``): the verb and
    the wire list, for a reader of the record and for ``harness_run_of``."""
    return Path(f"rig harness {what} of {subject} {_COMMAND_LINE}")


_COMMAND_LINE = "(command line)"


def harness_sequence_name(what: str, subject: Path) -> str:
    """The sequence name a harness run is recorded under, which ``rig stats`` groups by: the
    list's folder and file name, and for a check the start of the list's SHA-256, so two
    different lists of one name (another folder of that name, an edited revision) never share
    a row, and one list stays one row wherever it is kept."""
    named = f"rig harness {what}: {subject.parent.name}/{subject.name}"
    if what != "check":  # a capture's subject is the file it is about to write
        return named
    try:
        digest = hashlib.sha256(subject.read_bytes()).hexdigest()[:8]
    except OSError:  # unreadable: the list's own loading says why
        return named
    return f"{named} (list {digest})"


def harness_run_of(sequence_path: str) -> tuple[str, str] | None:
    """The verb (check, capture) and wire list of a run ``rig harness`` made, from what its
    record keeps as its sequence (``harness_source``); None for a run of a sequence file."""
    head, tail = "rig harness ", f" {_COMMAND_LINE}"
    if not (sequence_path.startswith(head) and sequence_path.endswith(tail)):
        return None
    what, of, subject = sequence_path[len(head) : -len(tail)].partition(" of ")
    return (what, subject) if of and what in ("check", "capture") else None


_OPTIONS = {
    "temperature": ("--ambient", "degC", "a temperature such as '23 degC'"),
    "isolation": ("--isolation", "ohm", "a resistance such as '1 Mohm'"),
    "contact_allowance": ("--contact-allowance", "ohm", "a resistance such as '5 mohm'"),
}
"""The step's keys that the command line's options fill: option, unit, what it takes."""


def _option_problem(key: str, value: object) -> Problem | None:
    """A problem with an option that fills one of the step's quantities, named by the option
    (the step is built from the command line, not read from a file), or None."""
    if key not in _OPTIONS:
        return None
    option, unit, expected = _OPTIONS[key]
    try:
        parse_quantity(value, unit)
    except QuantityError as exc:
        return Problem(option, "", f"{exc.reason}; expected {expected}")
    return None


def _as_option(problem: Problem) -> Problem:
    """A problem the step found in a key an option filled, named by that option."""
    key = problem.key.removeprefix("steps[0].")
    if key not in _OPTIONS:
        return problem
    return Problem(_OPTIONS[key][0], "", problem.message)


def _sequence_text(name: str, keys: dict[str, object]) -> str:
    lines = ["[sequence]", f"name = {json.dumps(name)}", "", "[[steps]]", 'id = "harness"']
    lines.append('kind = "harness-proof"')
    lines += [f"{key} = {json.dumps(value)}" for key, value in keys.items()]
    return "\n".join(lines) + "\n"


def _run(
    args: argparse.Namespace, out: Output, keys: dict[str, object], what: str, subject: Path
) -> int:
    """One harness-proof step through the engine.  Its record names ``subject`` (the wire list
    checked against, or the one a capture writes): in the sequence's name, so that statistics
    keep each wire list's harnesses apart, and in the sequence's place."""
    from rig.cli import EXIT_BAD_INPUT, _exit_code, serial_option_problem
    from rig.config.reader import TomlDoc
    from rig.config.sequence import parse_sequence
    from rig.config.station import load_station
    from rig.errors import ConfigError
    from rig.plan import build_plan
    from rig.run_admission import operator_problem
    from rig.runner import run_plan
    from rig.tested_before import ask_server, tested_before

    station = load_station(args.station)
    problem = (
        serial_option_problem(args.serial)
        or record_text_problem(args)
        or operator_problem(station, args.operator)
    )
    if problem:
        out.error(f"rig: {problem}")
        return EXIT_BAD_INPUT
    keys = {**keys, "temperature": args.ambient}
    unreadable = [p for p in (_option_problem(k, v) for k, v in keys.items()) if p is not None]
    if unreadable:
        raise ConfigError(unreadable)
    source = harness_source(what, subject)
    named = harness_sequence_name(what, subject)
    doc = TomlDoc(source, _sequence_text(named, keys))
    sequence = parse_sequence(doc)
    if doc.problems:  # a value the step refuses (below absolute zero): named by its option
        raise ConfigError([_as_option(p) for p in doc.problems])
    plan = build_plan(sequence, station)
    on_server = None
    if args.json:
        out.quiet = True
    else:
        for caution in cautions_for([plan]):  # a harness proof's: as rig run and the console
            out.line(caution)
        for seen in tested_before(station.store_path, args.serial, plan.sequence.name, args.claim):
            out.line(seen)
        on_server = ask_server(station.name, args.serial, plan.sequence.name, out.line, args.claim)
    summary = run_plan(
        plan,
        args.serial,
        operator=args.operator,
        listener=out.on_event,
        claim=args.claim,
        remark=args.remark,
        on_server=on_server,
    )
    result = next((r for r in summary.results if r.step_id == "harness"), None)
    findings = [] if result is None or not result.note else result.note.split("; ")
    if args.json:
        out.quiet = False
        out.json(
            {
                "run_id": summary.run_id,
                "status": summary.status,
                "verdict": summary.verdict.value,
                "reason": summary.reason,
                "end_cause": summary.end_cause.value,
                "claim": summary.claim,
                "remark": summary.remark,
                "notes": findings,
                "warnings": summary.warnings,
                "extras": {} if result is None else result.extras,
                "store": str(station.store_path),
            }
        )
    else:
        out.line()
        for text in findings:
            out.line(f"  {text}")
        out.line(f"verdict: {summary.verdict.value.upper()}  ({summary.status})")
        if summary.reason:
            out.line(f"reason: {summary.reason}")
        out.warnings(summary.warnings)
        out.line(f"record: run {summary.run_id} in {station.store_path}")
    return _exit_code(summary.verdict, summary.status)


def cmd_check(args: argparse.Namespace, out: Output) -> int:
    from rig.config.station import load_station
    from rig.harness.wire_list import load_wire_list

    load_wire_list(args.wire_list, load_station(args.station).fixture)  # row-level errors first
    keys = {
        "wire_list": str(args.wire_list.resolve()),
        "isolation_method": args.isolation_method,
        "isolation": args.isolation,
        "contact_allowance": args.contact_allowance,
    }
    return _run(args, out, keys, "check", args.wire_list.resolve())


def cmd_capture(args: argparse.Namespace, out: Output) -> int:
    from rig.commands._store_args import file_to_write
    from rig.config.station import load_station
    from rig.errors import ConfigError
    from rig.harness.capture import connector_problems

    # before anything opens; a folder, or a name ending with /, is refused (no default name)
    target = file_to_write(args.out, "--out", kind="a wire list (.csv) to write").resolve()
    keys: dict[str, object] = {"capture_to": str(target)}
    connectors = [c.strip() for c in args.connectors.split(",") if c.strip()]
    if connectors:
        fixture = load_station(args.station).fixture
        problems = connector_problems(fixture, connectors, "--connectors")
        if problems:  # before anything is opened
            raise ConfigError(problems)
        keys["capture_connectors"] = connectors
    return _run(args, out, keys, "capture", target)


def virtual_station_name(wire_list: Path) -> str:
    """A virtual harness bench's station name, from its wire list's folder and file name: runs
    and relay wear stay apart from other benches written into the same store."""
    return f"virtual-{wire_list.resolve().parent.name}-{wire_list.stem}"


def cmd_sim(args: argparse.Namespace, out: Output) -> int:
    from rig.commands._bench_control import serve_with_control
    from rig.commands._store_args import file_to_write
    from rig.config.fixture import load_fixture
    from rig.errors import ConfigError, Problem
    from rig.harness.as_built import parse_build_faults
    from rig.harness.wire_list import load_wire_list
    from rig.sim.harness_bench import HarnessBuild, HarnessFaults

    fixture = load_fixture(args.fixture)
    wires = load_wire_list(args.wire_list, fixture)
    faults = parse_build_faults(args.fault, wires, fixture.pins)  # every bad spec at once
    probe = None
    if args.probe:
        pins = [p.strip() for p in args.probe.split(",")]
        if len(pins) != 4 or any(p not in fixture.pins for p in pins):
            raise ConfigError(
                [Problem("--probe", args.probe, "expected four fixture pins FH,SH,FL,SL")]
            )
        probe = (pins[0], pins[1], pins[2], pins[3])
    station_out = file_to_write(args.station_out, "--station-out", name="harness-station.toml")
    built = HarnessFaults(
        HarnessBuild(wires, fixture, args.ambient, args.seed, probe),
        faults,
        dmm_port=args.dmm_port,
        supply_port=args.supply_port,
    )
    serve_with_control(
        out,
        built,
        control_port=args.control_port,
        station_out=station_out,
        station_name=virtual_station_name(wires.path),
        title=f"virtual bench: harness {wires.path.name} on fixture {fixture.name}",
        preface=HARNESS_CAUTION,
    )
    return 0
