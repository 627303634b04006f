"""Sending a station's runs from its own store to the shared server, exactly once.

Every row carries a key that is the same on both sides: a run its ``run_uid``, a step its run and
``step_id``, a reading its ``reading_uid``.  The server upserts on those keys, so sending a run
again (after a link that dropped before the station heard the commit) changes nothing.  Each run
goes in one server transaction: a drop in the middle leaves nothing of it there.  Only after the
commit does the station note the run as sent, with a fingerprint of what it sent; a run that
changes later (a resumed run, a settled flag) differs from its fingerprint and is sent again.
Runs still ``running`` wait until they end.

Each send also checks, in its own server transaction, that the station name it goes under
belongs to this station's file on the server (``rig.station_names``): two benches given one name
would otherwise overwrite each other's relay wear and mix their runs.  Before that, each pass
checks that no other copy of this station's file (benches cloned from one disk image share its
store id) sends to the server (``rig.store_copies``): the name check cannot tell two copies apart.

A server on an older schema than this rig's is not upgraded by sending (stations still on the
older rig write there too): the runs wait in the station's file, and say so, until someone asks
for the upgrade (``rig sync --upgrade-server``).
"""

from __future__ import annotations

import datetime as dt
import logging
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from typing import Any

from rig.config.station import Station
from rig.station_clock import skew
from rig.station_names import NameTaken, check_name, held_text, take_over
from rig.store import FILL_READING_UIDS, Migrate, ResultStore, StoreError, utc_now
from rig.store_copies import NotACopy, check_pass, new_store_id, this_sender
from rig.store_open import open_local_store, open_server_store

log = logging.getLogger(__name__)

# per finished run: what must match on the server for the run to count as sent
_FINGERPRINTS = """
SELECT r.id, r.run_uid,
    r.status || '|' || COALESCE(r.ended_at, '') || '|' || COALESCE(r.verdict, '') || '|'
    || CAST((SELECT COUNT(*) FROM steps s WHERE s.run_id = r.id) AS TEXT) || '|'
    || CAST((SELECT COUNT(*) FROM readings d WHERE d.run_id = r.id) AS TEXT) || '|'
    || CAST((SELECT COALESCE(SUM(d.settled), 0) FROM readings d WHERE d.run_id = r.id) AS TEXT)
FROM runs r
WHERE r.status <> 'running'
ORDER BY r.id
"""

# after PostgreSQL's own words for a row its row-level security refused (docs/postgresql.md)
ROW_SECURITY_HINT = (
    "; the server lets this station's role write only under the station names its owner gave "
    "that role (table station_roles; docs/postgresql.md, Setting up the server)"
)


@dataclass(frozen=True)
class SyncReport:
    sent: int
    """Runs sent in this pass."""
    waiting: int
    """Finished runs still not on the server."""
    problem: str = ""
    """Why sending stopped, in plain words; empty when nothing stopped it."""
    configured: bool = True
    """False when the station has no server: its own file is the whole record."""
    upgraded: str = ""
    """The server's schema upgrade this pass made (``--upgrade-server``), in words; empty: none."""
    clock: str = ""
    """Where the station's clock and the server's differ by more than a few minutes, that."""
    took_over: str = ""
    """The station name this pass took over on the server (``--take-over-name``), in words."""
    renewed: str = ""
    """The new store id this pass gave a copied file (``--new-store-id``), in words."""
    held: str = ""
    """The runs that wait under station names other stations' files hold, and the ways out, in
    words (counted in ``waiting``); empty: none."""

    def describe(self) -> str:
        if not self.configured:
            return "no results server is configured; the station's own store is the record"
        text = f"{self.sent} run(s) sent to the results server"
        if self.took_over:
            text = f"{self.took_over}; {text}"
        if self.renewed:
            text = f"{self.renewed}; {text}"
        if self.upgraded:
            text = f"{self.upgraded}; {text}"
        if self.problem and not self.waiting:  # nothing lost now, but the next runs will wait
            text = f"{text}; none waiting, but the server cannot be used: {self.problem}"
        elif self.problem:
            text = f"{text}; {self.waiting} waiting: {self.problem}"
        elif self.waiting and not self.held:
            text += f"; {self.waiting} waiting"
        if self.held:
            text += f"; {self.held}"
        return text + (f"\nwarning: {self.clock}" if self.clock else "")


def pending_runs(local: ResultStore, target: str | None) -> list[tuple[int, str]]:
    """(local run id, fingerprint) of every finished run not yet sent to the server ``target``
    (a ``store_uid``) as it is now; with no target, not yet sent anywhere."""
    if target is None:
        marks = local._db.execute("SELECT run_uid, fingerprint FROM sent_runs")
    else:
        marks = local._db.execute(
            "SELECT run_uid, fingerprint FROM sent_runs WHERE target=?", (target,)
        )
    sent = {(str(r[0]), str(r[1])) for r in marks}
    rows = local._db.execute(_FINGERPRINTS).fetchall()
    return [(int(r[0]), str(r[2])) for r in rows if (str(r[1]), str(r[2])) not in sent]


def _quoted(names: Sequence[str]) -> str:
    return ", ".join(f'"{n}"' for n in names)


def upsert_sql(table: str, columns: Sequence[str], key: Sequence[str], returning: bool) -> str:
    """INSERT ... ON CONFLICT (key) DO UPDATE: the same statement on SQLite and PostgreSQL."""
    marks = ", ".join("?" for _ in columns)
    updates = ", ".join(f'"{c}" = excluded."{c}"' for c in columns if c not in key)
    sql = (
        f"INSERT INTO {table} ({_quoted(columns)}) VALUES ({marks})"
        f" ON CONFLICT ({_quoted(key)}) DO UPDATE SET {updates}"
    )
    return sql + (" RETURNING id" if returning else "")


def _rows(store: ResultStore, sql: str, params: tuple[Any, ...]) -> list[dict[str, Any]]:
    return [dict(r) for r in store._db.execute(sql, params)]


def _send_children(
    remote: ResultStore,
    table: str,
    rows: list[dict[str, Any]],
    server_run: int,
    key: tuple[str, ...],
) -> None:
    if not rows:
        return
    columns = [c for c in rows[0] if c != "id"]
    values = [tuple(server_run if c == "run_id" else row[c] for c in columns) for row in rows]
    remote._db.executemany(upsert_sql(table, columns, key, returning=False), values)


def send_run(local: ResultStore, remote: ResultStore, run_id: int, store_uid: str) -> None:
    """One run with its steps and readings, in one server transaction, keyed for idempotence;
    refused (``NameTaken``) where another station's file sends under the run's station name."""
    run = _rows(local, "SELECT * FROM runs WHERE id=?", (run_id,))[0]
    steps = _rows(local, "SELECT * FROM steps WHERE run_id=? ORDER BY id", (run_id,))
    readings = _rows(local, "SELECT * FROM readings WHERE run_id=? ORDER BY id", (run_id,))
    columns = [c for c in run if c != "id"]
    with remote._tx() as db:
        check_name(db, str(run["station"]), store_uid, remote.where)
        server_run = int(
            db.execute(
                upsert_sql("runs", columns, ("run_uid",), returning=True),
                tuple(run[c] for c in columns),
            ).fetchone()[0]
        )
        _send_children(remote, "steps", steps, server_run, ("run_id", "step_id"))
        _send_children(remote, "readings", readings, server_run, ("reading_uid",))


def send_relay_wear(local: ResultStore, remote: ResultStore, store_uid: str) -> None:
    """The station's lifetime relay counts, as absolute values: sending twice is harmless, and
    only under station names this station's file holds on the server (a name's counts, one
    server transaction each; those under a name another file holds stay in this file, as the
    runs under it do: they are said of the runs)."""
    rows = _rows(local, "SELECT station, relay, operations FROM relay_wear", ())
    columns = ["station", "relay", "operations"]
    for name in sorted({str(r["station"]) for r in rows}):
        try:
            with remote._tx() as db:
                check_name(db, name, store_uid, remote.where)
                remote._db.executemany(
                    upsert_sql("relay_wear", columns, ("station", "relay"), False),
                    [(name, r["relay"], r["operations"]) for r in rows if r["station"] == name],
                )
        except NameTaken:
            continue


def _mark_sent(local: ResultStore, target: str, run_uid: str, fingerprint: str) -> None:
    now = utc_now()
    with local._tx() as db:
        db.execute(
            upsert_sql("sent_runs", ["target", "run_uid", "fingerprint", "sent_at"],
                       ("target", "run_uid"), returning=False),
            (target, run_uid, fingerprint, now),
        )  # fmt: skip


def _problem(exc: StoreError) -> str:
    return str(exc) + (ROW_SECURITY_HINT if "row-level security" in str(exc) else "")


def _newest_station(local: ResultStore) -> str:
    row = local._db.execute("SELECT station FROM runs ORDER BY id DESC LIMIT 1").fetchone()
    return "" if row is None else str(row[0])


def sync(
    local: ResultStore,
    remote: ResultStore,
    take_over_name: str | None = None,
    *,
    renew_id: bool = False,
    station: str | None = None,
) -> SyncReport:
    """Send every finished run the server does not have as it is now; stop at the first failure
    (the server is most likely gone, the file is a copy of another that sends there, or the
    run's station name is another file's) and say why.  ``renew_id``: first give a copied file
    a store id of its own (``NotACopy`` where it is not one); ``take_over_name``: first give
    that station name to this station's file on the server.  ``station``: the name this pass is
    sent as (the station file's; by default that of the file's newest run)."""
    took_over = renewed = ""
    sender = this_sender(_newest_station(local) if station is None else station)
    try:
        target = remote.store_uid()
        if renew_id:
            renewed = new_store_id(local, remote, sender).describe()
        check_pass(local, remote, sender)
        ours = local.store_uid()
        if take_over_name is not None:
            before = take_over(remote, take_over_name, ours)
            took_over = (
                f"the station name {take_over_name!r} taken over on the results server "
                + (f"from the station file whose store id starts {before[:8]}" if before else
                   "(no other station's file held it)")
            )  # fmt: skip
    except NotACopy:
        raise
    except StoreError as exc:
        waiting = len(pending_runs(local, None))
        return SyncReport(0, waiting, _problem(exc), took_over=took_over, renewed=renewed)
    try:
        server_now = remote.server_time()
    except StoreError:
        server_now = None
    clock = "" if server_now is None else skew(server_now, dt.datetime.now(dt.UTC))
    with local._tx() as db:
        db.execute(FILL_READING_UIDS)  # rows written by code that gave no key get the stable one
    pending = pending_runs(local, target)
    sent = 0
    held: dict[str, tuple[str, int]] = {}  # a name another file holds -> (its owner, runs)
    try:
        for run_id, fingerprint in pending:
            run = local.run(run_id)
            name = str(run["station"])
            if name in held:  # not asked again: its owner does not change within a pass
                held[name] = (held[name][0], held[name][1] + 1)
                continue
            try:
                send_run(local, remote, run_id, ours)
            except NameTaken as exc:  # this name's runs wait; the other names' go on
                held[name] = (exc.owner, 1)
                continue
            _mark_sent(local, target, str(run["run_uid"]), fingerprint)
            sent += 1
        send_relay_wear(local, remote, ours)
    except StoreError as exc:
        return SyncReport(
            sent, len(pending) - sent, _problem(exc), clock=clock, took_over=took_over,
            renewed=renewed, held=_held_text(held),
        )  # fmt: skip
    waiting = len(pending) - sent
    return SyncReport(
        sent, waiting, clock=clock, took_over=took_over, renewed=renewed, held=_held_text(held)
    )


def _held_text(held: dict[str, tuple[str, int]]) -> str:
    return "; ".join(held_text(name, runs, owner) for name, (owner, runs) in held.items())


def waiting_runs(station: Station) -> int:
    """How many finished runs of the station's own store were never sent anywhere as they are
    (what can be said while the server is out of reach)."""
    local = open_local_store(station)
    try:
        return len(pending_runs(local, None))
    finally:
        local.close()


def sync_station(
    station: Station,
    *,
    upgrade_server: bool = False,
    take_over_name: bool = False,
    renew_id: bool = False,
    while_open: Callable[[ResultStore], None] | None = None,
) -> SyncReport:
    """Send what the station's own store holds to its server; an unreachable server, one on an
    older schema, or a station name another station's file sends under, is a report, not an
    error: the runs stay safe in the station's file until the next try.  ``upgrade_server``
    first brings an older server up to this rig's schema; ``renew_id`` first gives a copied
    station file a store id of its own (``NotACopy`` where it is not one); ``take_over_name``
    first gives the station's name on the server to this station's file (one that replaced the
    file that held it).  ``while_open`` reads the server on the same connection once everything
    is sent, so a reader before a run costs no connection of its own; it is not called where
    sending stopped."""
    migrate = Migrate.ALWAYS if upgrade_server else Migrate.IF_EMPTY
    try:
        remote = open_server_store(station, migrate)
    except StoreError as exc:
        return SyncReport(0, waiting_runs(station), str(exc))
    if remote is None:
        return SyncReport(0, 0, configured=False)
    upgraded = ""
    if remote.upgraded_from:  # from 0: an empty database made, as any sending station does
        upgraded = (
            f"the results server {remote.where} upgraded from schema version "
            f"{remote.upgraded_from} to {remote.schema_version()}"
        )
    try:
        local = open_local_store(station)
        try:
            name = station.name if take_over_name else None
            report = replace(
                sync(local, remote, name, renew_id=renew_id, station=station.name),
                upgraded=upgraded,
            )
        finally:
            local.close()
        if while_open is not None and not report.problem:
            while_open(remote)
        return report
    finally:
        remote.close()


def send_waiting_runs(
    station: Station,
    on_sync: Callable[[SyncReport], None] | None,
    while_open: Callable[[ResultStore], None] | None = None,
) -> SyncReport | None:
    """The automatic send around a run: never stops the run; says what happened, and returns
    it (None where the station has no server).  ``while_open`` as ``sync_station``'s."""
    try:
        report = sync_station(station, while_open=while_open)
    except StoreError as exc:  # the station's own file: worth saying, not worth a lost run
        report = SyncReport(0, 0, str(exc))
    if not report.configured:
        return None
    _tell(report, on_sync)
    return report


def send_after_run(
    station: Station,
    before: SyncReport | None,
    on_sync: Callable[[SyncReport], None] | None,
) -> SyncReport | None:
    """The send after a run, given how the send before it went: where that failed, the server
    is not tried again in the same run (a server that takes connections and never answers
    would cost the connection timeout a second time); the runs wait in the station's file."""
    if before is None:
        return None
    if not before.problem:
        return send_waiting_runs(station, on_sync)
    try:
        waiting = waiting_runs(station)
    except StoreError:
        waiting = before.waiting + 1
    report = SyncReport(
        0, waiting, f"{before.problem}; not tried again after the run (the runs go with the "
        "station's next run or with rig sync)"
    )  # fmt: skip
    _tell(report, on_sync)
    return report


def _tell(report: SyncReport, on_sync: Callable[[SyncReport], None] | None) -> None:
    if on_sync is not None:
        on_sync(report)
    elif report.problem:
        log.warning("%s", report.describe())


def around_a_run(reports: Sequence[SyncReport], interrupted_run: int | None = None) -> str:
    """One closing line for the sends before and after a run: every run sent counts (the send
    before a run may carry the runs an outage left waiting).  A run cut short by Ctrl-C is not
    sent (the operator asked rig to stop, not to wait on the network): it waits, and the line
    says so and what sends it."""
    sent = sum(r.sent for r in reports)
    if interrupted_run is not None:
        before = reports[0]
        text = (
            f"{sent} run(s) sent to the results server before the run; run {interrupted_run} "
            "waits in the station's file, to be sent with its next run or by rig sync"
        )
        others = before.waiting
        if others:
            text += f" ({others} more waiting)"
        text += f": {before.problem}" if before.problem else ""
        return text + (f"; {before.held}" if before.held else "")
    last = reports[-1]
    clock = next((r.clock for r in reports if r.clock), "")
    return SyncReport(sent, last.waiting, last.problem, clock=clock, held=last.held).describe()
