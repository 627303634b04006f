"""``rig runs``: the stored runs, one line each, found by serial, claim or return number,
sequence, station or date.

A QA station looks a returned unit up by its serial or claim and a week's screening by its
dates; the ids it lists are those ``rig report`` and ``rig diagnose`` take.  With ``--station``
it reads the station's own file, whose ids those commands take with ``--station`` (a results
server numbers the same runs otherwise); with ``--store``, that file.  It filters as
``rig stats`` does, production runs and gauge-study runs alike.
"""

from __future__ import annotations

import argparse
from dataclasses import replace
from typing import Any

from rig.cli_output import Output
from rig.commands._store_args import ArgumentProblem, add_store_args, open_from_args
from rig.screening import decision_word, is_screen
from rig.store import ResultStore

EXIT_OK, EXIT_BAD_INPUT = 0, 2
COLUMNS = ("run", "serial", "sequence", "started", "status", "verdict", "decision", "claim")


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
        store = _own_store(args)
    except (FilterError, ArgumentProblem) as exc:
        out.error(f"rig: {exc}")
        return EXIT_BAD_INPUT
    try:
        rows = store.run_rows(replace(where, study=None))
        picked = [
            r
            for r in rows
            if (args.serial is None or r[1] == args.serial)
            and (args.claim is None or r[8] == args.claim)
        ]
        screens = {name: is_screen(store.sequence_units(name)) for name in {r[2] for r in picked}}
    finally:
        store.close()
    found = [_row(r, screens[str(r[2])]) for r in picked]  # oldest first
    if args.json:
        out.json({"runs": found})
        return EXIT_OK
    if not found:
        out.line("no stored run matches" + _claim_hint(args.claim, rows))
        return EXIT_OK
    out.table(list(COLUMNS), [[str(r[c] or "") for c in COLUMNS] for r in found])
    return EXIT_OK


def _own_store(args: argparse.Namespace) -> ResultStore:
    """The station's own results file, or the file given; a missing one is an error."""
    if args.station is not None:
        from rig.config.station import load_station
        from rig.store_open import open_file_for_reading

        path = load_station(args.station).store_path
        if not path.is_file():
            raise ArgumentProblem(f"{args.station}: its results file {path} holds no run yet")
        return open_file_for_reading(path)
    return open_from_args(args).store


def _row(row: Any, screen: bool) -> dict[str, Any]:
    """One run as a line, from ``ResultStore.run_rows``; a screen's run with its decision on
    the unit (``rig.screening``, as ``rig run`` and ``rig stats`` state it), a harness proof's
    with none."""
    run_id, serial, sequence, started, status, verdict, _, _, claim, answered_no = row[:10]
    decision = (
        decision_word(str(status), verdict, answered_no=bool(answered_no)) if screen else None
    )
    return {
        "run": int(run_id),
        "serial": serial,
        "sequence": sequence,
        "started": str(started),
        "status": status,
        "verdict": verdict,
        "decision": decision,
        "claim": claim,
    }


def _claim_hint(claim: str | None, rows: list[Any]) -> str:
    """Where ``--claim`` found nothing: the claims that differ from it in letter case or spaces
    alone, since the match is exact (a claim is kept as it was given)."""
    if claim is None:
        return ""
    folded = "".join(claim.split()).lower()
    near = sorted(
        {str(r[8]) for r in rows if r[8] and "".join(str(r[8]).split()).lower() == folded}
    )
    if not near:
        return ""
    return "; --claim matches exactly (letter case and spaces count): stored as " + ", ".join(
        repr(c) for c in near
    )
