"""Which station's file sends under each station name to a shared results server.

The fleet's statistics, relay wear and reports group by station name.  Two benches given one
name would, on the server, overwrite each other's relay wear (each sends its absolute counts) and
mix their runs, with no one told.  So the first store (its ``store_uid``) to send under a name
claims it (table ``station_names``, schema 7), and a send from another store under that name is
refused, in the same server transaction as the send: its runs wait in its own file.  A station
whose file was replaced (a new disk, so a new ``store_uid``) takes its name over only when asked
(``rig sync --take-over-name``).
"""

from __future__ import annotations

from rig.store import Connection, ResultStore, StoreError, utc_now

TAKE_OVER_COMMAND = "rig sync --station STATION --take-over-name"


class NameTaken(StoreError):
    """Another station's file already sends under this station name to the server.  Said as
    the fact alone: the send pass says what waits and the two ways out (``held_text``), once
    for all the runs under the name."""

    def __init__(self, name: str, owner: str, where: str) -> None:
        super().__init__(
            f"{_holder(owner)} sends under the station name {name!r} to the results server "
            f"{where}: this station's runs under that name wait in its own file"
        )
        self.name = name
        self.owner = owner


def held_text(name: str, runs: int, owner: str) -> str:
    """What a station is told of its runs that wait under a name another station's file holds,
    and the two ways out: they say it at every send, so the wait is never silent."""
    return (
        f"{runs} run(s) recorded under the station name {name!r} wait: {_holder(owner)} sends "
        "under that name to the results server; give this station its own name in its station "
        "file (its runs from then on are sent; these keep the name they were measured under, "
        "and wait), or, only where this station's file replaced the one that holds the name (a "
        f"new disk), take it over with `{TAKE_OVER_COMMAND}`"
    )


def _holder(owner: str) -> str:
    """The station's file that holds a name, by the start of its store id."""
    return f"another station's file (store id starts {owner[:8]})"


def check_name(db: Connection, name: str, store_uid: str, where: str) -> None:
    """Inside a send's transaction: claim ``name`` for the store ``store_uid`` where no one has;
    ``NameTaken`` where another store has (the transaction then sends nothing)."""
    db.execute(
        "INSERT INTO station_names (station, store_uid, claimed_at) VALUES (?, ?, ?)"
        " ON CONFLICT (station) DO NOTHING",
        (name, store_uid, utc_now()),
    )
    owner = str(
        db.execute("SELECT store_uid FROM station_names WHERE station=?", (name,)).fetchone()[0]
    )
    if owner != store_uid:
        raise NameTaken(name, owner, where)


def take_over(remote: ResultStore, name: str, store_uid: str) -> str | None:
    """Give ``name`` to the store ``store_uid`` on the server, whoever held it; returns the store
    id that held it before (None: no one, or this store already)."""
    with remote._tx() as db:
        row = db.execute("SELECT store_uid FROM station_names WHERE station=?", (name,)).fetchone()
        db.execute(
            "INSERT INTO station_names (station, store_uid, claimed_at) VALUES (?, ?, ?)"
            " ON CONFLICT (station) DO UPDATE SET store_uid = excluded.store_uid,"
            " claimed_at = excluded.claimed_at",
            (name, store_uid, utc_now()),
        )
    before = None if row is None else str(row[0])
    return None if before == store_uid else before


def move_claim(remote: ResultStore, name: str, before: str, after: str) -> bool:
    """Give ``name``'s claim on the server from the store ``before`` to the store ``after``, only
    where ``before`` still holds it; whether it moved."""
    with remote._tx() as db:
        row = db.execute(
            "UPDATE station_names SET store_uid=?, claimed_at=? WHERE station=? AND store_uid=?"
            " RETURNING station",
            (after, utc_now(), name, before),
        ).fetchone()
    return row is not None


def name_holder(remote: ResultStore, name: str) -> str | None:
    """The store id that holds ``name`` on the server; None: no one."""
    with remote._tx() as db:
        row = db.execute("SELECT store_uid FROM station_names WHERE station=?", (name,)).fetchone()
    return None if row is None else str(row[0])
