"""``rig runs``: the stored runs, one line each, found by serial, claim or return number,
sequence, station or date.

A QA station looks a returned unit up by its serial or claim and a week's screening by its
dates, on every bench that shares its results server.  With ``--station`` it reads the station's
store as ``rig report`` does: its server where it has one (the station's own file, with a note,
while the server cannot be reached), with the runs of its own file that have not reached the
server yet; with ``--store``, that file.  Each run shows its station, the station's own id where
this station made it (``rig report`` and ``rig diagnose`` take it with ``--station``), and the
start of its record id, which ``rig report`` takes for any station's run.  It filters as
``rig stats`` does, production runs and gauge-study runs alike.
"""

from __future__ import annotations

import argparse
from dataclasses import replace
from typing import Any

from rig.claim_match import claim_key
from rig.cli_output import Output
from rig.commands._store_args import (
    ArgumentProblem,
    OpenedStore,
    add_store_args,
    open_from_args,
)
from rig.screening import decision_word, is_screen, stored_evidence
from rig.store import RunFilter
from rig.store_open import open_file_for_reading

EXIT_OK, EXIT_BAD_INPUT = 0, 2
COLUMNS = (
    "run",
    "record",
    "station",
    "serial",
    "sequence",
    "started",
    "status",
    "verdict",
    "decision",
    "claim",
)
ORIGIN = 13
"""Where ``run_rows(..., origin=True)`` puts a run's station and record id."""
UID = ORIGIN + 1
RECORD_DIGITS = 12
"""Record-id digits in the table: unique among millions of runs; ``rig report`` takes 8 or more."""


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    runs = sub.add_parser("runs", help="list stored runs (by serial, sequence, station, date)")
    add_store_args(runs)
    runs.add_argument("--serial", help="only this unit's runs (the exact serial)")
    runs.add_argument("--serial-prefix", help="only units whose serial starts with this")
    runs.add_argument(
        "--claim", metavar="TEXT", help="only runs given this claim or return number (exact)"
    )
    runs.add_argument("--sequence", help="only runs of this sequence (name)")
    runs.add_argument("--station-name", help="only runs made on this station (name)")
    runs.add_argument("--since", metavar="YYYY-MM-DD", help="only runs started on or after")
    runs.add_argument("--until", metavar="YYYY-MM-DD", help="only runs started on or before")
    runs.add_argument("--json", action="store_true", help="one machine-readable document")
    runs.set_defaults(func=cmd_runs)


def cmd_runs(args: argparse.Namespace, out: Output) -> int:
    from rig.stats.filters import FilterError, make_filter

    try:
        where = make_filter(
            sequence=args.sequence,
            station=args.station_name,
            since=args.since,
            until=args.until,
            serial_prefix=args.serial or args.serial_prefix,
        )
        opened = _opened(args)
    except (FilterError, ArgumentProblem) as exc:
        out.error(f"rig: {exc}")
        return EXIT_BAD_INPUT
    if opened.note:
        out.error(f"note: {opened.note}")
    where = replace(where, study=None)
    store = opened.store
    try:
        rows, own_ids, waiting, units = _listed_rows(opened, where)
        picked = [
            r
            for r in rows
            if (args.serial is None or r[1] == args.serial)
            and (args.claim is None or r[8] == args.claim)
        ]
        screens = {name: is_screen(units[name]) for name in {str(r[2]) for r in picked}}
    finally:
        store.close()
    found = [_row(r, screens[str(r[2])], own_ids, waiting) for r in picked]  # oldest first
    if args.json:
        out.json({"runs": found})
        return EXIT_OK
    if not found:
        out.line("no stored run matches" + _claim_hint(args.claim, rows))
        return EXIT_OK
    shown = [{**r, "record": str(r["record_id"])[:RECORD_DIGITS]} for r in found]
    out.table(list(COLUMNS), [[_cell(r[c]) for c in COLUMNS] for r in shown])
    unsent = [str(r["run"]) for r in found if r["waiting_to_send"]]
    if unsent:
        out.line(
            f"run {', '.join(unsent)}: in this station's file, not yet on the results server "
            "(sent with the station's next run or by rig sync)"
        )
    return EXIT_OK


def _cell(value: object) -> str:
    return "" if value is None else str(value)


def _opened(args: argparse.Namespace) -> OpenedStore:
    """The store to list: a station's server or own file, or the file given; a station with
    no server and no file yet is an error, not a new empty file."""
    if args.station is not None:
        from rig.config.station import load_station
        from rig.store_open import server_conninfo

        station = load_station(args.station)
        path = station.store_path
        if server_conninfo(station) is None and not path.is_file():
            raise ArgumentProblem(f"{args.station}: its results file {path} holds no run yet")
    return open_from_args(args, own_file_if_unreachable=True)


def _listed_rows(
    opened: OpenedStore, where: RunFilter
) -> tuple[list[Any], dict[str, int], set[str], dict[str, set[str]]]:
    """The runs to list (``run_rows`` with their origin), the station's own id of each run its
    file holds (by record id), the record ids of those read from that file because they have
    not reached the server yet, and the step units of each listed sequence (from the server and,
    for runs not sent yet, the station's file: a sequence the server has never seen has none
    there, and would pass for a screen)."""
    store, station = opened.store, opened.station
    rows = list(store.run_rows(where, origin=True))
    units = {name: set(store.sequence_units(name)) for name in {str(r[2]) for r in rows}}
    if station is None or store.engine != "postgresql":
        return rows, {str(r[UID]): int(r[0]) for r in rows}, set(), units
    if not station.store_path.is_file():
        return rows, {}, set(), units
    local = open_file_for_reading(station.store_path)
    try:
        own_ids = local.run_ids_by_uid()
        on_server = {str(r[UID]) for r in rows}
        unsent = [r for r in local.run_rows(where, origin=True) if str(r[UID]) not in on_server]
        for name in {str(r[2]) for r in unsent}:
            units.setdefault(name, set()).update(local.sequence_units(name))
    finally:
        local.close()
    rows = sorted(rows + unsent, key=lambda r: str(r[3]))
    return rows, own_ids, {str(r[UID]) for r in unsent}, units


def _row(row: Any, screen: bool, own_ids: dict[str, int], waiting: set[str]) -> dict[str, Any]:
    """One run as a line, from ``ResultStore.run_rows`` with its origin; a screen's run with its
    decision on the unit (``rig.screening``, as ``rig run`` and ``rig stats`` state it), a
    harness proof's with none.  ``run`` is the station's own id (None for another station's
    run); ``record_id`` opens any run with ``rig report``."""
    _, serial, sequence, started, status, verdict, _, _, claim, answered_no = row[:10]
    found = stored_evidence(*row[10:13])
    made_at, uid = row[ORIGIN:]
    decision = (
        decision_word(str(status), verdict, found, answered_no=bool(answered_no))
        if screen
        else None
    )
    return {
        "run": own_ids.get(str(uid)),
        "record_id": str(uid),
        "station": made_at,
        "serial": serial,
        "sequence": sequence,
        "started": str(started),
        "status": status,
        "verdict": verdict,
        "decision": decision,
        "claim": claim,
        "waiting_to_send": str(uid) in waiting,
    }


def _claim_hint(claim: str | None, rows: list[Any]) -> str:
    """Where ``--claim`` found nothing: the claims that differ from it in letter case or spaces
    alone, since the match is exact (a claim is kept as it was given)."""
    if claim is None:
        return ""
    folded = claim_key(claim)
    near = sorted({str(r[8]) for r in rows if r[8] and claim_key(str(r[8])) == folded})
    if not near:
        return ""
    return "; --claim matches exactly (letter case and spaces count): stored as " + ", ".join(
        repr(c) for c in near
    )
