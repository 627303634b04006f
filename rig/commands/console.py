"""``rig console``: the full-screen operator console on a station, or on a virtual demo bench."""

from __future__ import annotations

import argparse
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING

from rig.cli_output import Output

if TYPE_CHECKING:
    from rig.console import ConsoleSetup
    from rig.sim.bench import VirtualBench

DEMO_UNIT = "ntc-sender"
DEMO_DATA = Path("rig-data/console-demo")


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    console = sub.add_parser(
        "console",
        help="open the operator console (full-screen) on a station",
        description=(
            "Scan or type a serial, confirm the sequence, watch each step and read the verdict. "
            "Give --station and the sequences to offer, or --demo to try it on a virtual bench."
        ),
    )
    console.add_argument("sequences", type=Path, nargs="*", metavar="SEQUENCE")
    where = console.add_mutually_exclusive_group(required=True)
    where.add_argument("--station", type=Path, help="station file of the bench")
    where.add_argument(
        "--demo",
        nargs="?",
        const=DEMO_UNIT,
        metavar="UNIT",
        help=f"a virtual bench with a shipped demo unit (default {DEMO_UNIT}; values invented)",
    )
    console.add_argument("--operator", default="", help="recorded with each run")
    console.add_argument(
        "--unit",
        type=Path,
        metavar="UNIT_FILE",
        help="the unit model of what is tested here, for the diagnosis of failed runs",
    )
    console.add_argument(
        "--fault", action="append", default=[], metavar="SPEC", help="demo only: inject a fault"
    )
    console.add_argument(
        "--timing",
        choices=("instant", "real"),
        default="real",
        help="demo only: instrument timing of the virtual bench (default real)",
    )
    console.add_argument(
        "--data-dir",
        type=Path,
        default=DEMO_DATA,
        help="demo only: where the demo station and its results go",
    )
    console.set_defaults(func=cmd_console)


def cmd_console(args: argparse.Namespace, out: Output) -> int:
    from rig.cli import EXIT_BAD_INPUT
    from rig.console import ConsoleApp
    from rig.run_admission import operator_problem

    problem = _argument_problem(args)
    if problem:
        out.error(f"rig console: {problem}")
        return EXIT_BAD_INPUT
    with _opened(args) as setup:
        problem = operator_problem(setup.station, setup.operator)  # before the first run
        if problem:
            out.error(f"rig console: {problem}")
            return EXIT_BAD_INPUT
        ConsoleApp(setup).run()
    return 0


def _argument_problem(args: argparse.Namespace) -> str:
    from rig.demo import sequences_dir

    if args.demo is None:
        if not args.sequences:
            return "name at least one sequence file to offer: rig console --station S SEQ..."
        if args.fault or args.data_dir != DEMO_DATA:
            return "--fault and --data-dir are for --demo only"
        return ""
    if args.unit is not None:
        return "--unit is for --station; --demo knows its unit"
    units = sequences_dir() / "units"
    if not (units / f"{args.demo}.toml").is_file():
        known = ", ".join(sorted(p.stem for p in units.glob("*.toml")))
        return f"--demo: no demo unit {args.demo!r}; choose one of {known}"
    return ""


@contextmanager
def _opened(args: argparse.Namespace) -> Iterator[ConsoleSetup]:
    """The console's setup: from the station file, or from a virtual bench started here."""
    from rig.console import ConsoleSetup
    from rig.runner import load_plan

    if args.station is not None:
        from rig.config.station import load_station
        from rig.config.unit_file import load_unit

        station = load_station(args.station)
        plans = [load_plan(path, station) for path in args.sequences]
        unit = load_unit(args.unit) if args.unit is not None else None
        unit_file = args.unit.resolve() if args.unit is not None else None
        yield ConsoleSetup(station, plans, operator=args.operator, unit=unit, unit_file=unit_file)
        return
    with _demo_bench(args) as (bench, station_path):
        from rig.config.station import load_station
        from rig.demo import CASES, sequences_dir

        station = load_station(station_path)
        unit = bench.unit
        paths = list(args.sequences) or [
            sequences_dir() / f"{name}.toml"
            for name in dict.fromkeys(c.sequence for c in CASES if c.unit == unit.name)
        ]
        faults = tuple(f.spec for f in bench.faults)
        label = (
            f"Virtual bench: demo unit {unit.name} ({args.timing} timing), faults: "
            f"{', '.join(faults) or 'none'}. All values are invented; no hardware is used."
        )
        yield ConsoleSetup(
            station,
            [load_plan(path, station) for path in paths],
            operator=args.operator or "demo",
            unit=unit,
            faults=faults,
            bench_label=label,
        )


@contextmanager
def _demo_bench(args: argparse.Namespace) -> Iterator[tuple[VirtualBench, Path]]:
    from rig.config.fixture import load_fixture
    from rig.config.unit_file import load_unit
    from rig.demo import sequences_dir
    from rig.faults import parse_faults
    from rig.sim.bench import VirtualBench
    from rig.sim.timing import Timing

    unit = load_unit(sequences_dir() / "units" / f"{args.demo}.toml")
    fixture = load_fixture(unit.fixture_path)
    faults = parse_faults(list(args.fault), unit, source="--fault")
    data_dir = args.data_dir.resolve()
    with VirtualBench(unit, fixture, faults=faults, timing=Timing(args.timing)) as bench:
        station = bench.write_station(data_dir / "virtual-station.toml", data_dir=str(data_dir))
        yield bench, station
