"""RUN on the command line, and where that run's record is read from.

A run's id is each database's own: ``rig run``, the console and ``rig diagnose`` give the id in
the station's own file, and the same run has another id on the results server.  A run's record
id (``run_uid``, 32 hex digits, printed at the foot of its report and, its first 12, by
``rig runs``) is the same in both.  So a number given with ``--station`` is always the
station's own id, even where the record is read from the server; a record id, or its first 8 or
more hex digits while they name one run, finds the run in whichever store it is in, whichever
station made it.  A run id has at most 7 digits, so that no start of a record id is read as one.
"""

from __future__ import annotations

import argparse
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from rig.commands._store_args import OpenedStore
from rig.config.station import Station
from rig.store import ResultStore, StoreError
from rig.store_open import open_file_for_reading

_RECORD_ID = re.compile(r"[0-9a-f]{8,32}")
MAX_RUN_DIGITS = 7
"""A run id's digits at most: 8 hex digits or more are the start of a record id."""


@dataclass(frozen=True)
class RunRef:
    """A run as the user named it: by a run id, or by its record id or that id's start."""

    number: int | None = None
    record_id: str | None = None

    def __str__(self) -> str:
        return str(self.number) if self.number is not None else str(self.record_id)


def run_ref(text: str) -> RunRef:
    """``argparse`` type of RUN: a whole number or a record id."""
    given = text.strip()
    if given.isdecimal() and len(given) <= MAX_RUN_DIGITS:
        return RunRef(number=int(given))
    if _RECORD_ID.fullmatch(given.lower()):
        return RunRef(record_id=given.lower())
    raise argparse.ArgumentTypeError(
        f"expected a run id (a whole number of up to {MAX_RUN_DIGITS} digits, as rig run prints "
        "it) or a record id (32 hex digits, as a report gives it, or its first 8 or more as "
        f"rig runs lists them), found {text!r}"
    )


@dataclass(frozen=True)
class FoundRun:
    """The store that holds the run's record, its id there, and what to tell the user."""

    store: ResultStore
    run_id: int
    note: str = ""
    station_run: int | None = None
    """The run's id in the station's own file, where known; ``run_id`` when read from there."""

    @property
    def server_run(self) -> int | None:
        """The run's id on the results server, where its record is read from there."""
        return self.run_id if self.store.engine == "postgresql" else None

    def numbers(self) -> dict[str, int | None]:
        """A record's ``id`` as the station knows it (the technician's number; None where its
        file is not here or another station made the run), and where the record is read from
        the server, the server's own as ``server_id``: the record there carries the server's."""
        if self.server_run is None:
            return {"id": self.station_run}
        return {"id": self.station_run, "server_id": self.server_run}


def run_words(found: FoundRun, run: Mapping[str, Any]) -> str:
    """The run as the user knows it: the station's own number where it has one, else (another
    station's run read from the server) its station and the start of its record id, as
    ``rig runs`` lists them; never the server's own number, which no one is given."""
    if found.station_run is not None:
        return f"run {found.station_run}"
    return f"the run of station {run['station']}, record {str(run['run_uid'])[:12]}"


def planned_elsewhere(who: str, run: Mapping[str, Any], station: Station) -> str:
    """Where a run made at another station is diagnosed on this one's file, that (empty where
    it was made here): its fixture and instruments stand in for the bench the run was made on,
    whose own are not stored with the run (only the instruments' identities are), and a
    different fixture routes the readings, and so models them, differently."""
    if str(run["station"]) == station.name:
        return ""
    return (
        f"{who} was made at station {run['station']}; diagnosed with the fixture and "
        f"instruments of station {station.name} ({station.path}), planned on this station's file"
    )


def file_label(found: FoundRun, run: Mapping[str, Any]) -> str:
    """What a file written of the run is named by: the station's own number where it is known
    (however the run was asked for), else the first 8 digits of its record id."""
    if found.station_run is not None:
        return str(found.station_run)
    return str(run["run_uid"])[:8]


def find_run(opened: OpenedStore, ref: RunRef) -> FoundRun:
    """Where to read the run ``ref`` names: ``StoreError`` (plain words) when it is nowhere.

    Reading from the server, a run that has not reached it yet (the link was down; it is sent
    with the station's next run or by ``rig sync``) is read from the station's own file."""
    station = opened.station
    if station is None or opened.store.engine != "postgresql":
        found = id_in(opened.store, ref)
        return FoundRun(opened.store, found, station_run=found)
    server = opened.store
    if ref.record_id is not None:
        uid = _uid_in(server, ref.record_id)
        if uid is not None:
            on_server = server.run_id_for(uid)
            assert on_server is not None
            return FoundRun(server, on_server, station_run=_own_id(station.store_path, uid))
    if not station.store_path.is_file():
        if ref.number is not None:  # a number means this station's run, known from its file
            raise StoreError(
                f"run ids are the station's own, and its file {station.store_path} is not on "
                "this computer; give the run's record id (32 hex digits, or its first 8 or "
                "more as rig runs lists them) instead"
            )
        raise StoreError(
            f"no run with record id {_named(str(ref.record_id))} on the results server"
        )
    local = open_file_for_reading(station.store_path)
    try:
        local_id = id_in(local, ref)
        if ref.number is not None:
            on_server = server.run_id_for(str(local.run(local_id)["run_uid"]))
            if on_server is not None:
                local.close()
                return FoundRun(server, on_server, station_run=local_id)
    except BaseException:
        local.close()
        raise
    return FoundRun(
        local,
        local_id,
        f"run {ref} has not reached the results server yet (it goes with the station's next run "
        f"or with rig sync); its record is read from {station.store_path}",
        station_run=local_id,
    )


def locate_run(opened: OpenedStore, ref: RunRef, say: Callable[[str], None]) -> FoundRun | None:
    """``find_run``, for ``rig report`` and ``rig diagnose`` alike: where the run is read from,
    where that is not as asked, is said (``note: ...``); a run in none of the stores is said as
    ``rig: RUN ...`` and None returned, the store closed.  Else ``close_run`` closes them."""
    if opened.note:
        say(f"note: {opened.note}")
    try:
        found = find_run(opened, ref)
    except StoreError as exc:
        opened.store.close()
        say(f"rig: RUN {ref}: {exc}")
        return None
    if found.note:
        say(f"note: {found.note}")
    return found


def close_run(opened: OpenedStore, found: FoundRun) -> None:
    """Close the store the run was read from and the one opened to find it, where they are two
    (a run not on the server yet is read from the station's own file)."""
    if found.store is not opened.store:
        found.store.close()
    opened.store.close()


def _own_id(path: Path, uid: str) -> int | None:
    """The station's own id of the run ``uid``, where its file is here and holds the run."""
    if not path.is_file():
        return None
    local = open_file_for_reading(path)
    try:
        return local.run_id_for(uid)
    finally:
        local.close()


def _uid_in(store: ResultStore, start: str) -> str | None:
    """The one record id in ``store`` that starts with ``start``; ``StoreError`` when several
    do (more digits tell them apart)."""
    if len(start) == 32:
        return start if store.run_id_for(start) is not None else None
    found = store.run_uids_starting(start)
    if len(found) > 1:
        raise StoreError(
            f"record id {_named(start)} names more than one run in {store.where} "
            f"({', '.join(found)}, ...); give more of its digits"
        )
    return found[0] if found else None


def _named(start: str) -> str:
    """A record id as given, marked where it is only the id's start."""
    return start if len(start) == 32 else f"starting {start}"


def id_in(store: ResultStore, ref: RunRef) -> int:
    """The id of ``ref`` in ``store``; ``StoreError`` when it holds no such run (or a record
    id's start names more than one)."""
    if ref.number is not None:
        store.run(ref.number)  # raises "no run N in ..."
        return ref.number
    assert ref.record_id is not None
    uid = _uid_in(store, ref.record_id)
    found = None if uid is None else store.run_id_for(uid)
    if found is None:
        raise StoreError(f"no run with record id {_named(ref.record_id)} in {store.where}")
    return found
