"""Two copies of one station's file sending to one results server.

Benches set up from one disk image start with the same results file, and so with the same store
id (``store_uid``).  On the server each copy passes for the other: the name claims of
``rig.station_names`` no longer tell them apart, so two cloned benches that kept the cloned
station name send under it side by side, each overwriting the other's relay wear and mixing
their runs, with no one told.  So every send pass carries a token: the server keeps the token of
each store's last pass (table ``store_senders``, schema 8), the file keeps its own.  A pass from a
file that does not hold the server's token comes from another copy, and is refused before
anything of it is sent.  A pass's token is written to the file before the server sees it
(``next_token``), so a link that drops after the server's commit is not taken for a copy.  The
copy takes a new store id only when asked (``rig sync --new-store-id``); every run it holds stays
as it is.
"""

from __future__ import annotations

import datetime as dt
import socket
import uuid
from dataclasses import dataclass

from rig.store import ResultStore, StoreError

NEW_ID_COMMAND = "rig sync --station STATION --new-store-id"


@dataclass(frozen=True)
class Sender:
    """Who sent a pass, in words a technician can find the bench by."""

    station: str
    host: str

    def __str__(self) -> str:
        return f"station {self.station!r} on host {self.host!r}"


def this_sender(station: str) -> Sender:
    return Sender(station, socket.gethostname())


class StoreCopied(StoreError):
    """Another copy of this station's file (the same store id) sends to this server."""

    def __init__(self, store_uid: str, where: str, theirs: Sender, sent_at: str, ours: Sender):
        super().__init__(
            f"this station's file shares its store id (starts {store_uid[:8]}) with another "
            f"copy of it, which sent to the results server {where} at {sent_at} as {theirs} "
            f"(this is {ours}); the two files were most likely copied from one disk image, and "
            "sending both would mix the two benches' runs and overwrite their relay wear, so "
            "this station's runs wait in its own file: on the bench that did not send there "
            f"first, give the file a new store id with `{NEW_ID_COMMAND}` (it keeps every run), "
            "and give each bench its own name in its station file"
        )


class NotACopy(StoreError):
    """``--new-store-id`` asked of a file whose store id no other copy sends under."""


def _now() -> str:
    return dt.datetime.now(dt.UTC).isoformat(timespec="milliseconds")


def _tokens(local: ResultStore) -> tuple[str | None, str | None]:
    """(the token of the file's last pass the server took, the token of a pass under way)."""
    local.store_uid()  # the identity row, made on first use
    row = local._db.execute("SELECT send_token, next_token FROM store_identity").fetchone()
    return row[0], row[1]


def _server_token(remote: ResultStore, store_uid: str) -> tuple[str, Sender, str] | None:
    row = remote._db.execute(
        "SELECT send_token, station, host, sent_at FROM store_senders WHERE store_uid=?",
        (store_uid,),
    ).fetchone()
    return None if row is None else (str(row[0]), Sender(str(row[1]), str(row[2])), str(row[3]))


def check_pass(local: ResultStore, remote: ResultStore, sender: Sender) -> None:
    """Before a pass sends anything: refuse it (``StoreCopied``) where another copy of the file
    sent last under its store id; else note this pass on the server as the store's last."""
    last, pending = _tokens(local)
    if pending is None:  # a pass that failed keeps its token: the server may have taken it
        pending = uuid.uuid4().hex
        with local._tx() as db:
            db.execute("UPDATE store_identity SET next_token=?", (pending,))
    ours = local.store_uid()
    with remote._tx() as db:
        found = _server_token(remote, ours)
        if found is not None and found[0] not in (last, pending):
            raise StoreCopied(ours, remote.where, found[1], found[2], sender)
        db.execute(
            "INSERT INTO store_senders (store_uid, send_token, station, host, sent_at)"
            " VALUES (?, ?, ?, ?, ?) ON CONFLICT (store_uid) DO UPDATE SET"
            " send_token = excluded.send_token, station = excluded.station,"
            " host = excluded.host, sent_at = excluded.sent_at",
            (ours, pending, sender.station, sender.host, _now()),
        )
    with local._tx() as db:
        db.execute("UPDATE store_identity SET send_token=?, next_token=NULL", (pending,))


def new_store_id(local: ResultStore, remote: ResultStore) -> str:
    """Give a copied file a store id of its own, and return the one it had.  Only where another
    copy sends under its id (else ``NotACopy``): a file that is the only one under its id would
    lose its station name's claim for nothing.  Runs, their record ids and what was sent where
    stay as they are."""
    last, pending = _tokens(local)
    before = local.store_uid()
    found = _server_token(remote, before)
    if found is None or found[0] in (last, pending):
        raise NotACopy(
            f"no other copy of this station's file (store id {before[:8]}) sends to the results "
            f"server {remote.where}; its store id stays as it is"
        )
    with local._tx() as db:
        db.execute(
            "UPDATE store_identity SET store_uid=?, send_token=NULL, next_token=NULL",
            (uuid.uuid4().hex,),
        )
    return before
