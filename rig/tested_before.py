"""Whether a unit about to be tested has runs of the same sequence on record already: a label
scanned twice, or a unit back on the bench, is said before the run (not refused: a retest is
normal, and the record keeps every run).  The station's own file says what this bench did; with
a results server, the server (asked on the connection the send before the run opened, never on
one of its own) says what the other benches did."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from rig.store import ResultStore, StoreError


def tested_before(store_path: Path, serial: str, sequence: str) -> str:
    """A line naming the unit's earlier runs of ``sequence`` in the station's own file (the
    latest with its verdict and start), or empty where there are none or the file cannot be
    read: the notice must never stop a run."""
    if not store_path.is_file():
        return ""
    try:
        store = ResultStore(store_path)
    except StoreError:
        return ""
    try:
        earlier = store.runs_of_unit(serial, sequence)
    except StoreError:
        return ""
    finally:
        store.close()
    if not earlier:
        return ""
    run_id, _, _, started, status, verdict = earlier[-1]
    latest = f"run {run_id}, {_outcome(status, verdict, started)}"
    return _notice(serial, earlier, sequence, "on this station", latest)


def tested_elsewhere(server: ResultStore, station: str, serial: str, sequence: str) -> str:
    """A line naming the unit's runs of ``sequence`` that other stations sent to the results
    server (the latest with its station, record id, verdict and start), or empty where there are
    none or the server cannot be read.  This station's own are said from its own file."""
    try:
        rows = server.runs_of_unit(serial, sequence)
    except StoreError:
        return ""
    earlier = [r for r in rows if str(r[1]) != station]
    if not earlier:
        return ""
    _, where, uid, started, status, verdict = earlier[-1]
    stations = sorted({str(r[1]) for r in earlier})
    at = f"station {stations[0]}" if len(stations) == 1 else f"stations {', '.join(stations)}"
    latest = f"station {where}, record {str(uid)[:12]}, {_outcome(status, verdict, started)}"
    return _notice(serial, earlier, sequence, f"at {at}", latest)


def ask_server(
    station: str, serial: str, sequence: str, say: Callable[[str], None]
) -> Callable[[ResultStore], None]:
    """What the send before a run does with the server while its connection is open: say the
    unit's runs at other stations (``tested_elsewhere``), where there are any."""

    def ask(server: ResultStore) -> None:
        line = tested_elsewhere(server, station, serial, sequence)
        if line:
            say(line)

    return ask


def _notice(serial: str, earlier: Sequence[Any], sequence: str, where: str, latest: str) -> str:
    count = f"{len(earlier)} earlier runs" if len(earlier) > 1 else "an earlier run"
    return f"note: {serial} has {count} of {sequence} {where}; the latest: {latest}"


def _outcome(status: object, verdict: object, started: object) -> str:
    return f"{verdict or status} ({status}), started {str(started)[:16]}"
