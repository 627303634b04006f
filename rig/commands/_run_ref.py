"""RUN on the command line, and where that run's record is read from.

A run's id is each database's own: ``rig run``, the console and ``rig diagnose`` give the id in
the station's own file, and the same run has another id on the results server.  A run's record
id (``run_uid``, 32 hex digits, printed at the foot of its report) is the same in both.  So a
number given with ``--station`` is always the station's own id, even where the record is read
from the server; a record id finds the run in whichever store it is in.
"""

from __future__ import annotations

import argparse
import re
from dataclasses import dataclass

from rig.commands._store_args import OpenedStore
from rig.store import ResultStore, StoreError
from rig.store_open import open_file_for_reading

_RECORD_ID = re.compile(r"[0-9a-f]{32}")


@dataclass(frozen=True)
class RunRef:
    """A run as the user named it: by a run id, or by its record id."""

    number: int | None = None
    record_id: str | None = None

    def __str__(self) -> str:
        return str(self.number) if self.number is not None else str(self.record_id)


def run_ref(text: str) -> RunRef:
    """``argparse`` type of RUN: a whole number or a record id."""
    given = text.strip()
    if given.isdecimal():
        return RunRef(number=int(given))
    if _RECORD_ID.fullmatch(given.lower()):
        return RunRef(record_id=given.lower())
    raise argparse.ArgumentTypeError(
        "expected a run id (a whole number, as rig run prints it) or a record id "
        f"(32 hex digits, as a report gives it), found {text!r}"
    )


@dataclass(frozen=True)
class FoundRun:
    """The store that holds the run's record, its id there, and what to tell the user."""

    store: ResultStore
    run_id: int
    note: str = ""


def find_run(opened: OpenedStore, ref: RunRef) -> FoundRun:
    """Where to read the run ``ref`` names: ``StoreError`` (plain words) when it is nowhere.

    Reading from the server, a run that has not reached it yet (the link was down; it is sent
    with the station's next run or by ``rig sync``) is read from the station's own file."""
    station = opened.station
    if station is None or opened.store.engine != "postgresql":
        return FoundRun(opened.store, _id_in(opened.store, ref))
    server = opened.store
    if ref.record_id is not None:
        on_server = server.run_id_for(ref.record_id)
        if on_server is not None:
            return FoundRun(server, on_server)
    if not station.store_path.is_file():
        if ref.number is not None:  # a number means this station's run, known from its file
            raise StoreError(
                f"run ids are the station's own, and its file {station.store_path} is not on "
                "this computer; give the run's record id (32 hex digits) instead"
            )
        raise StoreError(f"no run with record id {ref.record_id} on the results server")
    local = open_file_for_reading(station.store_path)
    try:
        local_id = _id_in(local, ref)
        if ref.number is not None:
            on_server = server.run_id_for(str(local.run(local_id)["run_uid"]))
            if on_server is not None:
                local.close()
                return FoundRun(server, on_server)
    except BaseException:
        local.close()
        raise
    return FoundRun(
        local,
        local_id,
        f"run {ref} has not reached the results server yet (it goes with the station's next run "
        f"or with rig sync); its record is read from {station.store_path}",
    )


def _id_in(store: ResultStore, ref: RunRef) -> int:
    """The id of ``ref`` in ``store``; ``StoreError`` when it holds no such run."""
    if ref.number is not None:
        store.run(ref.number)  # raises "no run N in ..."
        return ref.number
    assert ref.record_id is not None
    found = store.run_id_for(ref.record_id)
    if found is None:
        raise StoreError(f"no run with record id {ref.record_id} in {store.where}")
    return found
