"""Two copies of one station's file sending to one results server.

Benches set up from one disk image start with the same results file, and so with the same store
id (``store_uid``).  On the server each copy passes for the other: the name claims of
``rig.station_names`` no longer tell them apart, so two cloned benches that kept the cloned
station name send under it side by side, each overwriting the other's relay wear and mixing
their runs, with no one told.  So every send pass carries a new token: the server keeps the
token of each store's last pass (table ``store_senders``, schema 8), the file every token it
issued, per server (``send_tokens``).  A server token the file never issued for that server
comes from another copy (or from the file as it was before a restore from a backup), and the
pass is refused before anything of it is sent; one it issued is its own, however old (a server
restored from a dump).  A token is written to the file before the server sees it, so a link that
drops after the server's commit is not taken for a copy; the server takes a pass only in place
of the token the pass read (an optimistic update), so two copies sending at once cannot both
pass.  The copy takes a new store id only when asked (``rig sync --new-store-id``); every run it
holds stays as it is.
"""

from __future__ import annotations

import socket
import uuid
from dataclasses import dataclass

from rig.station_names import TAKE_OVER_COMMAND, move_claim, name_holder
from rig.store import ResultStore, StoreError

NEW_ID_COMMAND = "rig sync --station STATION --new-store-id"
RESTORED_COMMAND = "rig sync --station STATION --new-store-id --take-over-name"
TRIES = 5
"""Passes of one file at one moment (a run's send, a cron sync) that may each read the server's
token before the other's lands; more is not two passes of one bench."""


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
        start = (
            f"this station's file shares its store id (starts {store_uid[:8]}) with another "
            f"copy of it, which sent to the results server {where} at {sent_at} as {theirs}"
        )
        if theirs == ours:  # one bench, one name: an older copy of its own file, most likely
            super().__init__(
                f"{start}, the same station on the same host as this one: this file was most "
                "likely restored from a backup (or copied on this same computer, or onto a bench "
                "cloned from this one's disk image that kept its host name), and sending it "
                "would mix its runs with the newer file's and overwrite the server's relay wear "
                "with its older counts, so this station's runs wait in its own file: where this "
                "file replaced the one that sent (a backup restored), give it a store id of its "
                f"own and take its station name over with `{RESTORED_COMMAND}` (it keeps every "
                "run); where another copy sends as well (on this computer, or on a cloned bench: "
                "never take the name over there), give this one a new store id with "
                f"`{NEW_ID_COMMAND}` and its own name in its station file"
            )
            return
        super().__init__(
            f"{start} (this is {ours}); the two files were most likely copied from one disk "
            "image, and sending both would mix the two benches' runs and overwrite their relay "
            "wear, so this station's runs wait in its own file: on the bench that did not send "
            f"there first, give the file a new store id with `{NEW_ID_COMMAND}` (it keeps every "
            "run), and give each bench its own name in its station file"
        )


class NotACopy(StoreError):
    """``--new-store-id`` asked of a file whose store id no other copy sends under."""


@dataclass(frozen=True)
class LastPass:
    """The last send pass a server noted for a store id."""

    token: str
    sender: Sender
    sent_at: str


def last_pass(remote: ResultStore, store_uid: str) -> LastPass | None:
    row = remote.last_send_pass(store_uid)
    return None if row is None else LastPass(row[0], Sender(row[1], row[2]), row[3])


def check_pass(local: ResultStore, remote: ResultStore, sender: Sender) -> None:
    """Before a pass sends anything: refuse it (``StoreCopied``) where another copy of the file
    sent last under its store id; else note this pass on the server as the store's last."""
    target, ours = remote.store_uid(), local.store_uid()
    token = local.issue_send_token(target)  # in the file before the server sees it
    refused: str | None = None  # a token the server kept where it should have taken ours
    for _ in range(TRIES):
        found = last_pass(remote, ours)  # read before the file: a token noted there is in it
        if found is None:
            if remote.note_first_send_pass(ours, token, sender.station, sender.host):
                return
            continue  # another pass noted the first: whose is it?
        if not local.issued_send_token(target, found.token):
            raise StoreCopied(ours, remote.where, found.sender, found.sent_at, sender)
        if found.token == refused:  # not a pass in between: the server let us change nothing
            raise StoreError(
                f"the results server {remote.where} let this station change no row of "
                "store_senders (its row-level security lets a station's role write only under "
                f"its own station names; the last pass went as {found.sender})"
            )
        if remote.note_next_send_pass(ours, found.token, token, sender.station, sender.host):
            return
        refused = found.token  # another pass came in between: read again
    raise StoreError(
        f"the results server {remote.where} noted another send pass of this station's file "
        f"each of {TRIES} times this one read it; try again"
    )


@dataclass(frozen=True)
class Renewal:
    """What ``--new-store-id`` did, to be said in the pass's report."""

    before: str
    after: str
    name: str
    """This station's name."""
    moved: bool
    """Its claim on the server went with the new id (the other copy sends under another)."""
    left: bool
    """Its claim stays with the old id: the other copy's last pass went under it."""

    def describe(self) -> str:
        text = (
            f"this station's file given the new store id {self.after[:8]} (it shared "
            f"{self.before[:8]} with another copy of it)"
        )
        if self.moved:
            return f"{text}, and its station name {self.name!r} with it"
        if self.left:
            return (
                f"{text}; the station name {self.name!r} stays with the other copy, whose last "
                "send went under it: give this station its own name, or, where this file "
                f"replaced that one (a backup restored), take it over with `{TAKE_OVER_COMMAND}`"
            )
        return text


def new_store_id(local: ResultStore, remote: ResultStore, sender: Sender) -> Renewal:
    """Give a copied file a store id of its own.  Only where another copy sends under its id
    (else ``NotACopy``): a file that is the only one under its id would lose its station name's
    claim for nothing.  The claim on this station's name moves with it where the other copy's
    last pass went under another name (two clones renamed before the server kept tokens both
    claimed theirs under the shared id); it stays where the other copy sends under it.  Runs,
    their record ids and what was sent where stay as they are."""
    target, before = remote.store_uid(), local.store_uid()
    found = last_pass(remote, before)
    if found is None or local.issued_send_token(target, found.token):
        raise NotACopy(
            f"no other copy of this station's file (store id {before[:8]}) sends to the results "
            f"server {remote.where}; its store id stays as it is"
        )
    after = uuid.uuid4().hex
    name = sender.station
    mine = found.sender.station != name
    # the server first: a link lost between the two leaves the name on an id no file has
    # (--take-over-name gives it back), not this file's name on the other copy's id unseen
    moved = mine and move_claim(remote, name, before, after)
    if not local.renew_store_uid(before, after):
        raise StoreError(f"this station's file {local.where} changed its store id meanwhile")
    left = not mine and name_holder(remote, name) == before
    return Renewal(before, after, name, moved, left)
