"""Which store a station's results are read from and written to.

Runs are always written to the station's own SQLite file first (committed reading by reading, so
nothing measured depends on the network); with a server configured they are then sent on to it
(``rig.store_sync``), and statistics and reports read from the server, where every station's
runs meet.  The server is chosen by ``RIG_DATABASE_URL`` or by ``[store] database =
"postgresql"`` in the station file (docs/postgresql.md).

Reading never changes a store: stations still on an older rig must go on writing to it.  A file
older than this rig is read from an upgraded copy in memory; an older server is refused with how
to upgrade it (``rig sync --upgrade-server``), which is the one place a non-empty server is
upgraded.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from pathlib import Path

from psycopg.conninfo import make_conninfo

from rig.config.station import Station
from rig.store import SCHEMA_VERSION, Migrate, ResultStore, SqliteBackend

ENV_URL = "RIG_DATABASE_URL"


def server_conninfo(station: Station, environ: Mapping[str, str] = os.environ) -> str | None:
    """The shared server's address (URL or libpq string), or None when the station has none.

    ``RIG_DATABASE_URL`` wins over the station file; missing parts and the password come from
    libpq's own sources (PG* variables, ~/.pgpass or PGPASSFILE).
    """
    url = environ.get(ENV_URL, "").strip()
    if url:
        return url
    if station.store.database != "postgresql":
        return None
    return make_conninfo("", **station.store.conninfo_parts())


def open_local_store(station: Station) -> ResultStore:
    """The station's own SQLite file, to write: where runs are recorded as they happen.  Only
    this station writes it, so an older one is upgraded in place."""
    return ResultStore(station.store_path)


def open_file_for_reading(path: Path) -> ResultStore:
    """A results file, to read: never changed, not even by a checkpoint of its WAL.  A file
    older than this rig is read from a copy in memory, upgraded there (the rig on its bench may
    be the older one); a newer one is refused (``NewerSchema``); a missing one is an error, not
    a new file."""
    backend = SqliteBackend.open_read_only(path)
    if backend.schema_version() >= SCHEMA_VERSION:
        return ResultStore(backend, Migrate.NEVER)  # a newer one refused (and closed) there
    try:
        copy = backend.in_memory_copy()
    finally:
        backend.db.close()
    return ResultStore(copy)


def read_local_store(station: Station) -> ResultStore:
    """The station's own file, to read (``open_file_for_reading``); where the station has
    recorded no run yet, an empty store in memory: no file is made by reading."""
    path = station.store_path
    if not path.is_file():
        return ResultStore(SqliteBackend.in_memory(str(path)))
    return open_file_for_reading(path)


def open_server_store(station: Station, migrate: Migrate = Migrate.IF_EMPTY) -> ResultStore | None:
    """The shared server's store, or None when none is configured; ``StoreError`` (plain words)
    when it is configured but cannot be reached, or is older than this rig and ``migrate`` may
    not upgrade it (``OlderSchema``).  By default, as a station sending its runs opens it: an
    empty database gets the schema, an older one waits for ``rig sync --upgrade-server``."""
    conninfo = server_conninfo(station)
    if conninfo is None:
        return None
    from rig.store_postgres import open_postgres

    return open_postgres(conninfo, migrate)


def open_store(station: Station) -> ResultStore:
    """The store to read this station's results from (for ``rig stats`` and ``rig report``): the
    shared server when one is configured, else the station's own file; neither is changed."""
    return open_server_store(station, Migrate.NEVER) or read_local_store(station)
