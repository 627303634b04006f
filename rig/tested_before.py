"""Whether a unit about to be tested has runs of the same sequence on record already: a label
scanned twice, or a unit back on the bench, is said before the run (not refused: a retest is
normal, and the record keeps every run).  So is a claim or return number given to earlier runs
of the sequence, whatever their serial: a returned unit screened twice under one claim, or a
claim screened before under another serial (a unit swapped, a label mistyped).  Claims are
compared as ``rig runs --claim`` compares them (``rig.claim_match``): one that differs in letter
case or spaces alone is the same claim typed otherwise, and is named as it is stored.  The
station's own file says what this bench did; with a results server, the server (asked on the
connection the send before the run opened, never on one of its own) says what the other
benches did."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from rig.store import ResultStore, StoreError

SERIALS_NAMED = 3
"""Serials a claim's notice names; more are counted (a return of a batch under one claim)."""


def tested_before(store_path: Path, serial: str, sequence: str, claim: str = "") -> list[str]:
    """Lines naming the unit's earlier runs of ``sequence`` in the station's own file, and the
    earlier runs given ``claim`` (each the latest with its verdict and start); none where there
    are none or the file cannot be read: the notice must never stop a run."""
    if not store_path.is_file():
        return []
    try:
        store = ResultStore(store_path)
    except StoreError:
        return []
    try:
        by_serial = store.runs_of_unit(serial, sequence)
        by_claim = store.runs_of_claim(claim, sequence) if claim else []
    except StoreError:
        return []
    finally:
        store.close()
    return _notices(serial, claim, sequence, by_serial, by_claim, _on_this_station, _own)


def tested_elsewhere(
    server: ResultStore, station: str, serial: str, sequence: str, claim: str = ""
) -> list[str]:
    """Lines naming the runs of ``sequence`` on the unit, and those given ``claim``, that other
    stations sent to the results server (the latest with its station, record id, verdict and
    start); none where there are none or the server cannot be read.  This station's own are
    said from its own file."""
    try:
        by_serial = server.runs_of_unit(serial, sequence)
        by_claim = server.runs_of_claim(claim, sequence) if claim else []
    except StoreError:
        return []
    by_serial = [r for r in by_serial if str(r[1]) != station]
    by_claim = [r for r in by_claim if str(r[1]) != station]
    return _notices(serial, claim, sequence, by_serial, by_claim, _at_stations, _elsewhere)


def ask_server(
    station: str, serial: str, sequence: str, say: Callable[[str], None], claim: str = ""
) -> Callable[[ResultStore], None]:
    """What the send before a run does with the server while its connection is open: say the
    unit's and the claim's runs at other stations (``tested_elsewhere``), where there are any."""

    def ask(server: ResultStore) -> None:
        for line in tested_elsewhere(server, station, serial, sequence, claim):
            say(line)

    return ask


Runs = Sequence[Sequence[Any]]
"""Rows of ``ResultStore.runs_of_unit`` or ``runs_of_claim``: (id, station, run_uid,
started_at, status, verdict, ...), oldest first."""


def _notices(
    serial: str,
    claim: str,
    sequence: str,
    by_serial: Runs,
    by_claim: Runs,
    where: Callable[[Runs], str],
    who: Callable[[Sequence[Any]], str],
) -> list[str]:
    """The serial's line and the claim's, each where it has earlier runs: ``where`` says where
    the runs were made, ``who`` names a run as its reader knows it."""
    lines = []
    if by_serial:
        said = f"{serial} has {_count(by_serial)} of {sequence} {where(by_serial)}"
        lines.append(f"note: {said}; the latest: {who(by_serial[-1])}, {_outcome(by_serial[-1])}")
    if by_claim:
        lines.append(_claim_notice(claim, sequence, by_claim, where(by_claim), who))
    return lines


def _claim_notice(
    claim: str, sequence: str, runs: Runs, where: str, who: Callable[[Sequence[Any]], str]
) -> str:
    """The claim's line: the serials its runs were of, the latest run (with its serial where
    they were several) and, where the claim is stored typed otherwise, as it is stored, since
    ``rig runs --claim`` finds a claim only as it is stored."""
    serials = list(dict.fromkeys(str(r[6]) for r in runs))
    named = ", ".join(serials[:SERIALS_NAMED])
    if len(serials) > SERIALS_NAMED:
        named += f" and {len(serials) - SERIALS_NAMED} more"
    of = f"serial {named}" if len(serials) == 1 else f"serials {named}"
    last = who(runs[-1]) + (f", serial {runs[-1][6]}" if len(serials) > 1 else "")
    stored = sorted({str(r[7]) for r in runs} - {claim})
    typed = (
        f"; stored as {', '.join(repr(c) for c in stored)} (rig runs --claim matches exactly)"
        if stored
        else ""
    )
    said = f"claim {claim!r} was given to {_count(runs)} of {sequence} {where} ({of})"
    return f"note: {said}; the latest: {last}, {_outcome(runs[-1])}{typed}"


def _count(runs: Runs) -> str:
    return f"{len(runs)} earlier runs" if len(runs) > 1 else "an earlier run"


def _on_this_station(runs: Runs) -> str:
    return "on this station"


def _at_stations(runs: Runs) -> str:
    stations = sorted({str(r[1]) for r in runs})
    return (
        f"at station {stations[0]}" if len(stations) == 1 else f"at stations {', '.join(stations)}"
    )


def _own(run: Sequence[Any]) -> str:
    """A run of the station's own file as its technician knows it: by its id."""
    return f"run {run[0]}"


def _elsewhere(run: Sequence[Any]) -> str:
    """Another station's run: by its station and the start of its record id."""
    return f"station {run[1]}, record {str(run[2])[:12]}"


def _outcome(run: Sequence[Any]) -> str:
    started, status, verdict = run[3:6]
    return f"{verdict or status} ({status}), started {str(started)[:16]}"
