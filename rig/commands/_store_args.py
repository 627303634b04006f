"""The ``--station STATION | --store PATH`` choice shared by the commands that read stored runs
(``rig report``, ``rig stats``, ``rig runs``), and where rendered files go: the station's data
folder (beside its store), never the source tree.  Reading never changes a store
(``rig.store_open``)."""

from __future__ import annotations

import argparse
import os
from dataclasses import dataclass
from pathlib import Path

import rig
from rig.config.station import Station
from rig.errors import RigError
from rig.store import ResultStore

_SOURCE_ROOT = Path(rig.__file__).resolve().parent.parent
SOURCE_FOLDERS = ("rig", "reports", "drivers", "sequences", "tests", "docs", ".ci")


class ArgumentProblem(RigError):
    """A command-line argument that names no usable store or output place."""


def add_store_args(parser: argparse.ArgumentParser) -> None:
    where = parser.add_mutually_exclusive_group(required=True)
    where.add_argument("--station", type=Path, help="station file: its store (or its server)")
    where.add_argument("--store", type=Path, help="a results store file (SQLite)")


class ServerUnreachable(RigError):
    """The station's results server cannot be read (out of reach, or on an older schema that
    reading does not upgrade); its own file holds its own runs."""


@dataclass
class OpenedStore:
    store: ResultStore
    station: Station | None
    data_dir: Path
    note: str = ""
    """What the user must know about where the runs are read from (empty: as asked)."""


def open_from_args(
    args: argparse.Namespace, *, own_file_if_unreachable: bool = False
) -> OpenedStore:
    """The store named on the command line, opened to read; a missing store file is an error,
    not a new file.

    A station with a results server is read from the server.  When the server cannot be opened,
    ``own_file_if_unreachable`` (one run's report) reads the station's own file instead, with a
    note; otherwise (statistics across stations, which the own file would silently narrow)
    ``ServerUnreachable`` says how to read the own file."""
    if args.station is not None:
        from rig.config.station import load_station
        from rig.store import Migrate, StoreError
        from rig.store_open import open_server_store, read_local_store

        station = load_station(args.station)
        own = station.store_path
        try:
            server = open_server_store(station, Migrate.NEVER)
        except StoreError as exc:
            if not own.is_file():
                raise ServerUnreachable(str(exc)) from None
            if not own_file_if_unreachable:
                raise ServerUnreachable(
                    f"{exc}; this station's own runs are in {own}: give --store {own} to read "
                    "them alone"
                ) from None
            note = (
                f"{exc}; read from the station's own file {own} instead (its own runs, including "
                "any not yet sent to the server)"
            )
            return OpenedStore(read_local_store(station), station, own.parent, note)
        return OpenedStore(server or read_local_store(station), station, own.parent)
    path: Path = args.store
    if path.is_dir():
        raise ArgumentProblem(
            f"--store {path}: is a folder; expected a results store file (SQLite)"
        )
    if not path.is_file():
        raise ArgumentProblem(f"--store {path}: no such results store file")
    from rig.store_open import open_file_for_reading

    return OpenedStore(open_file_for_reading(path), None, path.resolve().parent)


def checked_output(path: Path) -> Path:
    """``path`` resolved, refused when it is inside the project's source folders."""
    resolved = path.expanduser().resolve()
    for folder in SOURCE_FOLDERS:
        if resolved.is_relative_to(_SOURCE_ROOT / folder):
            raise ArgumentProblem(
                f"{path}: rendered files are not written into the source tree "
                f"({_SOURCE_ROOT / folder}); choose another --out"
            )
    return resolved


FOLDER_ENDS = tuple(sorted({"/", os.sep, os.altsep or "/"}))
"""What a path given for a folder ends with: ``rig-data/`` names a folder, made if need be."""


def file_to_write(path: Path | str, option: str, *, name: str = "", kind: str = "") -> Path:
    """Where ``option`` writes its file: ``path``; where that is a folder, or ends with ``/``
    (a folder that need not exist yet: the writer makes it), the file ``name`` in it (the name
    the command gives the file by default), or with no ``name`` a refusal saying what was
    expected (``kind``), before anything is started or written.  The text as typed must be
    given to see the ``/``: ``Path`` drops it."""
    folder_named = isinstance(path, str) and path.endswith(FOLDER_ENDS)
    shown, path = str(path), Path(path)
    if folder_named and path.exists() and not path.is_dir():
        raise ArgumentProblem(f"{option} {shown}: names a folder, but {path} is a file")
    if not (folder_named or path.is_dir()):
        return path
    if name:
        return path / name
    what = "is a folder" if path.is_dir() else "names a folder (it ends with /)"
    raise ArgumentProblem(f"{option} {shown}: {what}; expected {kind}")
