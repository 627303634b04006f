"""Which store a station's results are read from and written to.

Runs are always written to the station's own SQLite file first (committed reading by reading, so
nothing measured depends on the network); with a server configured they are then sent on to it
(``rig.store_sync``), and statistics and reports read from the server, where every station's
runs meet.  The server is chosen by ``RIG_DATABASE_URL`` or by ``[store] database =
"postgresql"`` in the station file (docs/postgresql.md).
"""

from __future__ import annotations

import os
from collections.abc import Mapping

from psycopg.conninfo import make_conninfo

from rig.config.station import Station
from rig.store import ResultStore

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
    """The station's own SQLite file: where runs are recorded as they happen."""
    return ResultStore(station.store_path)


def open_server_store(station: Station) -> ResultStore | None:
    """The shared server's store, or None when none is configured; ``StoreError`` (plain words)
    when it is configured but cannot be reached."""
    conninfo = server_conninfo(station)
    if conninfo is None:
        return None
    from rig.store_postgres import open_postgres

    return open_postgres(conninfo)


def open_store(station: Station) -> ResultStore:
    """The store to read this station's results from (for ``rig stats`` and ``rig report``): the
    shared server when one is configured, else the station's own file."""
    return open_server_store(station) or open_local_store(station)
