"""``rig diagnose RUN --station STATION``: the most likely fault behind a stored run.

The run is found as ``rig report`` finds it (``rig.commands._run_ref``): with a results server,
any station's run by its record id, read from the server's record; the sequence is planned on
the station given, whose fixture and instruments stand in for those of the bench that made it.
"""

from __future__ import annotations

import argparse
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from rig.cli_output import Output
from rig.commands._run_ref import (
    FoundRun,
    close_run,
    locate_run,
    planned_elsewhere,
    run_ref,
    run_words,
)
from rig.commands._store_args import OpenedStore
from rig.errors import ConfigError, Problem

EXIT_BAD_INPUT = 2


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    p = sub.add_parser("diagnose", help="rank the faults that explain a stored run")
    p.add_argument(
        "run",
        type=run_ref,
        metavar="RUN",
        help="the run id rig run printed (the station's own), or the run's record id (32 hex "
        "digits, or its first 8 or more, as rig runs lists them: with a results server, any "
        "station's run)",
    )
    p.add_argument("--station", type=Path, required=True, help="the station file")
    p.add_argument(
        "--unit",
        type=Path,
        help="unit file (default: the one recorded with the run by rig run --unit, or for a "
        "demo run units/<unit name>.toml beside its sequence)",
    )
    p.add_argument("--sequence", type=Path, help="sequence file (default: the run's own)")
    p.add_argument(
        "--store",
        type=Path,
        help="results file (default: the station's results server where it has one, else its "
        "own file)",
    )
    p.add_argument("--top", type=int, default=5, help="hypotheses to show (5)")
    p.add_argument("--json", action="store_true", help="machine-readable output")
    p.set_defaults(func=cmd_diagnose)


def suggestion(run_id: int, station: Path) -> str:
    """The command a failed run points the operator to."""
    return f"rig diagnose {run_id} --station {station}"


def unit_not_found(who: str, run: Mapping[str, Any], elsewhere: bool) -> str:
    """Why no unit file is found for the run, and what to give: a unit file another station
    recorded is that bench's path, often not on this computer."""
    if not run["unit"]:
        return f"{who} names no unit; give --unit FILE"
    where = f" on this computer (station {run['station']} recorded it)" if elsewhere else ""
    return f"{who} records unit {run['unit']!r}, not found{where}; give --unit FILE"


def _with_alike(spec: str, same_as: tuple[str, ...] | list[str]) -> str:
    """A fault with those the sequence cannot tell from it: the probability is theirs together."""
    return f"{spec} (or {', '.join(same_as)})" if same_as else spec


def _other_unit(recorded: str, given: Path, name: str) -> str:
    """The unit the run was recorded with, where it is not the one given (empty otherwise): a
    diagnosis on another unit's model ranks faults of a circuit that was not tested."""
    if not recorded:
        return ""
    if recorded.endswith(".toml"):  # `rig run --unit` records the file itself
        return "" if Path(recorded).resolve() == given.resolve() else recorded
    return "" if recorded == name else recorded


def recorded_sequence(who: str, recorded: str, *, elsewhere: bool = False) -> Path:
    """The sequence file a run records, where it is still found (``sequence_not_found``)."""
    from reports.diagnosis import sequence_not_found

    missing = sequence_not_found(who, recorded, elsewhere=elsewhere)
    if missing:
        raise ConfigError([Problem("--sequence", "", missing)])
    return Path(recorded)


def _open_run(args: argparse.Namespace, out: Output) -> tuple[OpenedStore, FoundRun] | None:
    """The store(s) holding RUN, opened to read, with any note said; None (said) where RUN is
    in none of them.  ``--store`` reads that file alone; else the station's server, as
    ``rig report`` does, or its own file with a note when the server is out of reach."""
    from rig.commands._store_args import ArgumentProblem, open_from_args
    from rig.store_open import open_file_for_reading

    if args.store is not None:
        if not args.store.is_file():
            raise ArgumentProblem(f"--store {args.store}: no such results store file")
        opened = OpenedStore(open_file_for_reading(args.store), None, args.store.parent)
    else:
        opened = open_from_args(args, own_file_if_unreachable=True)
    found = locate_run(opened, args.run, out.error)
    return None if found is None else (opened, found)


def cmd_diagnose(args: argparse.Namespace, out: Output) -> int:
    from reports.diagnosis import find_unit_file, not_diagnosed
    from rig.analysis.diagnose import diagnose_run
    from rig.config.station import load_station
    from rig.config.unit_file import load_unit
    from rig.resume import same_sequence
    from rig.runner import load_plan

    station = load_station(args.station)
    located = _open_run(args, out)
    if located is None:
        return EXIT_BAD_INPUT
    opened, found = located
    store, run_id = found.store, found.run_id
    try:
        run = store.run(run_id)
        who = run_words(found, run)
        numbers = {"run_id": found.station_run, "record_id": run["run_uid"]}
        elsewhere = str(run["station"]) != station.name
        unfinished = not_diagnosed(run)
        if unfinished:  # the same words as the run's report
            if args.json:
                out.json({**numbers, "hypotheses": [], "message": unfinished})
            else:
                out.line(f"{who} (serial {run['serial']}): {unfinished}")
            return 0
        sequence = args.sequence or recorded_sequence(
            who, str(run["sequence_path"]), elsewhere=elsewhere
        )
        unit_path = find_unit_file(run, args.unit)
        if unit_path is None:
            raise ConfigError([Problem("--unit", "", unit_not_found(who, run, elsewhere))])
        unit = load_unit(unit_path)
        other = _other_unit(str(run["unit"] or ""), unit_path, unit.name)
        if other:
            out.error(
                f"warning: {who} was recorded with unit {other}; diagnosing with "
                f"{unit_path} ({unit.name}) instead"
            )
        if elsewhere:
            out.error(f"note: {planned_elsewhere(who, run, station)}")
        plan = load_plan(sequence, station)
        if not same_sequence(run, plan.sequence):
            out.error(f"warning: {sequence} has changed since {who} was taken")
        diagnosis = diagnose_run(store, run_id, unit, plan)
    finally:
        close_run(opened, found)
    hypotheses = diagnosis.hypotheses[: args.top]
    if args.json:
        out.json(
            {
                **numbers,
                "station": run["station"],
                "unit": unit.name,
                "hypotheses": [
                    {
                        "spec": h.spec,
                        "probability": h.probability,
                        "where": h.where,
                        "fitted": h.fitted,
                        "same_as": list(h.same_as),
                    }
                    for h in hypotheses
                ],
                "next_check": diagnosis.next_check,
            }
        )
        return 0
    out.line(f"{who} (serial {run['serial']}, {run['verdict']}) on unit {unit.name}")
    if not hypotheses:
        out.line("no settled readings of this sequence in the run: nothing to diagnose")
        return 0
    out.wrapped_table(  # where the fault is (a wire described in full) under its row
        ["#", "probability", "fault, and where it is"],
        [
            [str(k), f"{h.probability:.1%}", _with_alike(h.spec, h.same_as)]
            for k, h in enumerate(hypotheses, start=1)
        ],
        [h.where for h in hypotheses],
    )
    for h in hypotheses:
        if h.same_as:
            out.line(f"{h.spec} cannot be told apart by this sequence from: {', '.join(h.same_as)}")
    # what the next check compares, in the table's words: the first two faults of entry 1 where
    # the sequence cannot tell them apart (that is where a reading helps most), else entries 1, 2
    compared = (
        f"{hypotheses[0].spec} from {hypotheses[0].same_as[0]} (both in entry 1)"
        if hypotheses[0].same_as
        else "entry 1 from entry 2"
    )
    if diagnosis.next_check:
        out.line(f"to tell {compared}, measure {diagnosis.next_check}")
    elif len(hypotheses) > 1 or hypotheses[0].same_as:
        out.line(f"no extra DC volts reading on the fixture's pins tells {compared}")
    return 0
