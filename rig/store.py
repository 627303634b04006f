"""The results store: every run, step and raw reading, committed as it is taken (SQLite, WAL).

Each reading and each step result is its own short transaction with ``synchronous=FULL``, so a
crash or power loss cannot take back anything the rig has reported as measured.  The schema is
versioned; ``MIGRATIONS[n]`` brings a database from version n to n + 1.  Opening a store says
what it may do to an older schema (``Migrate``): a reader never changes one, and a shared server
is upgraded only when asked, so stations still on an older rig keep writing to it.

The same class runs on PostgreSQL (``rig.store_postgres``): the SQL here is written once, in the
subset both engines share (``?`` placeholders, ``RETURNING id``), and a ``Backend`` supplies what
differs (opening, transactions, where the schema version lives, the DDL dialect).
"""

from __future__ import annotations

import contextlib
import datetime as dt
import enum
import json
import math
import sqlite3
import uuid
from collections.abc import Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Protocol

from rig.claim_match import claim_key
from rig.end_cause import EndCause
from rig.errors import RigError
from rig.stats.filters import RunFilter

# a reading's key when it was written without one: its run's key and its row, stable forever
FILL_READING_UIDS = """
    UPDATE readings SET reading_uid =
        (SELECT run_uid FROM runs WHERE runs.id = readings.run_id) || ':' || CAST(id AS TEXT)
    WHERE reading_uid IS NULL
"""

MIGRATIONS: list[str] = [
    # 0 -> 1: the first schema
    """
    CREATE TABLE runs (
        id INTEGER PRIMARY KEY,
        run_uid TEXT NOT NULL UNIQUE,
        serial TEXT NOT NULL,
        sequence_name TEXT NOT NULL,
        sequence_hash TEXT NOT NULL,
        sequence_path TEXT NOT NULL,
        station TEXT NOT NULL,
        operator TEXT NOT NULL,
        unit TEXT NOT NULL DEFAULT '',
        faults TEXT NOT NULL DEFAULT '[]',
        instruments TEXT NOT NULL DEFAULT '[]',
        started_at TEXT NOT NULL,
        ended_at TEXT,
        status TEXT NOT NULL,
        verdict TEXT,
        reason TEXT NOT NULL DEFAULT '',
        notes TEXT NOT NULL DEFAULT '[]'
    );
    CREATE TABLE steps (
        id INTEGER PRIMARY KEY,
        run_id INTEGER NOT NULL REFERENCES runs(id),
        position INTEGER NOT NULL,
        step_id TEXT NOT NULL,
        kind TEXT NOT NULL,
        title TEXT NOT NULL,
        value REAL,
        unit TEXT NOT NULL,
        low REAL,
        high REAL,
        predicted REAL,
        u_std REAL,
        expanded_u REAL,
        coverage_k REAL NOT NULL,
        decision_rule TEXT NOT NULL,
        verdict TEXT NOT NULL,
        tur REAL,
        started_at TEXT NOT NULL,
        ended_at TEXT NOT NULL,
        settle_s REAL NOT NULL DEFAULT 0,
        note TEXT NOT NULL DEFAULT '',
        extras TEXT NOT NULL DEFAULT '{}',
        UNIQUE (run_id, step_id)
    );
    CREATE TABLE readings (
        id INTEGER PRIMARY KEY,
        run_id INTEGER NOT NULL REFERENCES runs(id),
        step_id TEXT NOT NULL,
        role TEXT NOT NULL,
        function TEXT NOT NULL,
        value REAL,
        overload INTEGER NOT NULL DEFAULT 0,
        range REAL,
        nplc REAL,
        u_std REAL,
        taken_at REAL NOT NULL,
        settled INTEGER NOT NULL DEFAULT 0
    );
    CREATE INDEX readings_by_run ON readings (run_id, step_id);
    CREATE INDEX runs_by_serial ON runs (serial);
    """,
    # 1 -> 2: relay wear kept across runs
    """
    CREATE TABLE relay_wear (
        station TEXT NOT NULL,
        relay INTEGER NOT NULL,
        operations INTEGER NOT NULL DEFAULT 0,
        PRIMARY KEY (station, relay)
    );
    """,
    # 2 -> 3: a key per reading, so a run sent to a shared server twice lands once; which runs
    # this store has already sent where; and a key for the store itself (rig.store_sync)
    """
    ALTER TABLE readings ADD COLUMN reading_uid TEXT;
    """
    + FILL_READING_UIDS
    + """;
    CREATE UNIQUE INDEX readings_by_uid ON readings (reading_uid);
    CREATE TABLE sent_runs (
        target TEXT NOT NULL,
        run_uid TEXT NOT NULL,
        fingerprint TEXT NOT NULL,
        sent_at TEXT NOT NULL,
        PRIMARY KEY (target, run_uid)
    );
    CREATE TABLE store_identity (
        id INTEGER PRIMARY KEY CHECK (id = 1),
        store_uid TEXT NOT NULL
    );
    """,
    # 3 -> 4: gauge-study runs record the part measured and the trial number (rig.stats.grr);
    # an index that holds every column the step statistics read, in the order they group by, so
    # they stream through it without sorting (ResultStore.step_moments)
    """
    ALTER TABLE runs ADD COLUMN study_part TEXT NOT NULL DEFAULT '';
    ALTER TABLE runs ADD COLUMN study_trial INTEGER;
    CREATE INDEX steps_for_stats ON steps
        (step_id, unit, low, high, run_id, value, expanded_u, verdict, position);
    """,
    # 4 -> 5: what a run planned, so its record shows the steps it never measured
    # (rig.planned_steps): the step ids in run order (JSON, written at the start), and the step
    # under way when it ended ('' none; NULL where no end was recorded, or an older run)
    """
    ALTER TABLE runs ADD COLUMN planned_steps TEXT;
    ALTER TABLE runs ADD COLUMN cut_short_step TEXT;
    """,
    # 5 -> 6: what a QA record of a returned unit needs: the claim or return number and the
    # inspector's remark, given at the start ('' none); why a run ended short of a decision, as
    # a code (rig.end_cause; NULL while running, or a run ended before schema 6); and each
    # step's model parameters as text with units (JSON object; '{}' a step judged against no
    # model, NULL a step stored before schema 6)
    """
    ALTER TABLE runs ADD COLUMN claim TEXT NOT NULL DEFAULT '';
    ALTER TABLE runs ADD COLUMN remark TEXT NOT NULL DEFAULT '';
    ALTER TABLE runs ADD COLUMN end_cause TEXT;
    ALTER TABLE steps ADD COLUMN model_params TEXT;
    CREATE INDEX runs_by_claim ON runs (claim);
    """,
    # 6 -> 7: which station's file (its store_uid) sends under each station name to a shared
    # server, so two benches given one name cannot overwrite each other's relay wear or mix
    # their runs (rig.station_names); a station's own file holds the table empty
    """
    CREATE TABLE station_names (
        station TEXT PRIMARY KEY,
        store_uid TEXT NOT NULL,
        claimed_at TEXT NOT NULL
    );
    """,
    # 7 -> 8: two copies of one station's file (benches cloned from one disk image share its
    # store_uid) cannot both send to a shared server unseen (rig.store_copies): the server keeps
    # the token of each store's last send pass (store_senders), a station's file every token it
    # issued, per server (send_tokens, target as sent_runs keys it); each engine holds the
    # other's table empty.  The claims of a sequence are read before each run of it (a claim
    # screened before, rig.tested_before): an index on the two keeps that to the sequence's own
    """
    CREATE INDEX runs_by_sequence_claim ON runs (sequence_name, claim);
    CREATE TABLE store_senders (
        store_uid TEXT PRIMARY KEY,
        send_token TEXT NOT NULL,
        station TEXT NOT NULL,
        host TEXT NOT NULL,
        sent_at TEXT NOT NULL
    );
    CREATE TABLE send_tokens (
        target TEXT NOT NULL,
        token TEXT NOT NULL,
        issued_at TEXT NOT NULL,
        PRIMARY KEY (target, token)
    );
    """,
]

SCHEMA_VERSION = len(MIGRATIONS)


class StoreError(RigError):
    """The results database cannot be opened or written."""


class Migrate(enum.Enum):
    """What opening a store may do to a schema older than this rig's.

    A station on an older rig can write only the schema it knows, so a store others still write
    to must not be upgraded behind their backs: reading changes nothing, and a shared server is
    upgraded only when someone asks (``rig sync --upgrade-server``)."""

    ALWAYS = "always"
    """Bring it up to this rig's schema: a station's own file (only that station writes it), or a
    shared server whose upgrade was asked for."""
    IF_EMPTY = "if empty"
    """Create the schema in an empty database (no one to lock out); refuse an older one: a
    shared server a station sends to."""
    NEVER = "never"
    """Change nothing; refuse an older schema: reading."""


class OlderSchema(StoreError):
    """The store's schema is older than this rig's and opening it may not upgrade it."""

    def __init__(self, where: str, version: int, message: str = "") -> None:
        super().__init__(
            message
            or f"{where} has schema version {version}; this rig writes version {SCHEMA_VERSION}"
        )
        self.where = where
        self.version = version


class NewerSchema(StoreError):
    """The store was made by a newer rig than this one: its columns mean nothing to us."""

    def __init__(self, where: str, version: int) -> None:
        super().__init__(
            f"{where} has schema version {version}; this rig knows up to {SCHEMA_VERSION}: "
            "update rig on this station to use it"
        )


class Cursor(Protocol):
    """What the store needs of a cursor: ``sqlite3.Cursor`` and psycopg's both qualify."""

    def fetchone(self) -> Any: ...
    def fetchall(self) -> list[Any]: ...
    def __iter__(self) -> Iterator[Any]: ...


class Connection(Protocol):
    """``execute`` with ``?`` placeholders, rows readable by index and by name (``dict(row)``)."""

    def execute(self, sql: str, parameters: Any = ..., /) -> Cursor: ...
    def executemany(self, sql: str, parameters: Iterable[Any], /) -> Any: ...
    def close(self) -> None: ...


class Backend(Protocol):
    """The engine-specific parts of a store: opening, transactions, schema version, dialect."""

    @property
    def where(self) -> str:
        """For messages: a file path, or a server without its password."""

    @property
    def db(self) -> Connection: ...
    @property
    def errors(self) -> tuple[type[Exception], ...]: ...
    @property
    def begin(self) -> str:
        """The statement that opens a write transaction."""

    def lock_schema(self) -> None:
        """Inside a transaction: keep other processes from migrating at the same time."""

    def schema_version(self) -> int: ...
    def set_schema_version(self, version: int) -> None: ...
    def statements(self, migration: str) -> list[str]:
        """One migration's statements, in this engine's dialect."""


class SqliteBackend:
    """A local SQLite file in WAL mode with FULL sync (see FIELD-NOTES: SQLite), opened to write
    (``open``) or only to read (``open_read_only``); or a copy of one in memory."""

    begin = "BEGIN IMMEDIATE"  # takes the write lock at once: migrations cannot interleave
    errors: tuple[type[Exception], ...] = (sqlite3.Error,)

    def __init__(self, db: sqlite3.Connection, where: str, path: Path | None) -> None:
        self.db = db
        self.where = where
        self.path = path
        """The file, for a second connection; None for a copy in memory."""

    @classmethod
    def open(cls, path: Path) -> SqliteBackend:
        """The file, made where it does not exist: a station's own store, written as it runs."""
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            db = sqlite3.connect(path, isolation_level=None, check_same_thread=False)
            db.row_factory = sqlite3.Row
            db.execute("PRAGMA journal_mode=WAL")
            db.execute("PRAGMA synchronous=FULL")
            db.execute("PRAGMA busy_timeout=5000")
            db.execute("PRAGMA foreign_keys=ON")
        except (sqlite3.Error, OSError) as exc:
            raise StoreError(f"cannot open the results store {path}: {exc}") from None
        return cls(db, str(path), path)

    @classmethod
    def open_read_only(cls, path: Path) -> SqliteBackend:
        """An existing file, read through SQLite's read-only mode: not even a checkpoint of its
        WAL (which closing the last writing connection does) changes its bytes."""
        if not path.is_file():
            raise StoreError(f"{path}: no such results store file")
        try:
            db = sqlite3.connect(
                path.resolve().as_uri() + "?mode=ro",
                uri=True,
                isolation_level=None,
                check_same_thread=False,
            )
            db.row_factory = sqlite3.Row
            db.execute("PRAGMA busy_timeout=5000")
            db.execute("PRAGMA user_version").fetchone()  # not a database: said here, once
        except sqlite3.Error as exc:
            raise StoreError(f"cannot open the results store {path}: {exc}") from None
        return cls(db, str(path), path)

    @classmethod
    def in_memory(cls, where: str) -> SqliteBackend:
        """An empty database in memory, named ``where`` in messages: read in place of a file
        that may not be made or changed."""
        db = sqlite3.connect(":memory:", isolation_level=None, check_same_thread=False)
        db.row_factory = sqlite3.Row
        db.execute("PRAGMA foreign_keys=ON")
        return cls(db, where, None)

    def in_memory_copy(self) -> SqliteBackend:
        """The whole database copied into memory through SQLite's backup API: it reads through
        this connection, so commits still in the WAL are in the copy.  What a reader upgrades
        in place of a file it may not change."""
        copy = SqliteBackend.in_memory(self.where)
        try:
            self.db.backup(copy.db)
        except sqlite3.Error as exc:
            copy.db.close()
            raise StoreError(f"cannot read the results store {self.where}: {exc}") from None
        return copy

    def lock_schema(self) -> None:
        pass

    def schema_version(self) -> int:
        return int(self.db.execute("PRAGMA user_version").fetchone()[0])

    def set_schema_version(self, version: int) -> None:
        self.db.execute(f"PRAGMA user_version={int(version)}")

    def statements(self, migration: str) -> list[str]:
        return [s for s in migration.split(";") if s.strip()]


def utc_now() -> str:
    """Now, in UTC, as every record of a store keeps a time (ISO 8601, to the millisecond)."""
    return dt.datetime.now(dt.UTC).isoformat(timespec="milliseconds")


def _num(value: float | None) -> float | None:
    """SQLite stores no inf or NaN faithfully: those become NULL (the overload flag keeps why)."""
    if value is None or not math.isfinite(value):
        return None
    return float(value)


def _overload_flag(value: float) -> int:
    """Why a reading has no number: 0 it has one, 1 overload (±inf), 2 not a number."""
    if math.isnan(value):
        return 2
    return int(math.isinf(value))


@dataclass(frozen=True)
class RunHeader:
    serial: str
    sequence_name: str
    sequence_hash: str
    sequence_path: str
    station: str
    operator: str
    unit: str = ""
    faults: tuple[str, ...] = ()
    instruments: tuple[dict[str, str], ...] = ()
    study_part: str = ""
    study_trial: int | None = None
    planned_steps: tuple[str, ...] | None = None
    """The step ids in the order the run will take them (after reordering); None: not known."""
    claim: str = ""
    """The claim or return number a returned unit came in under; empty: none given."""
    remark: str = ""
    """The inspector's remark, given at the start; empty: none."""


class ResultStore:
    """One database (a SQLite file by default, or a ``Backend`` such as PostgreSQL); one
    connection per store object, used from one thread at a time."""

    def __init__(self, path: Path | str | Backend, migrate: Migrate = Migrate.ALWAYS) -> None:
        backend = SqliteBackend.open(Path(path)) if isinstance(path, str | Path) else path
        self._backend = backend
        self.path: Path | None = backend.path if isinstance(backend, SqliteBackend) else None
        self.where = backend.where
        self._db: Connection = backend.db
        try:
            # the schema version this opening brought up to this rig's; None: none
            self.upgraded_from = self.migrate(migrate)
        except StoreError:
            self.close()
            raise

    @property
    def engine(self) -> str:
        """``sqlite`` or ``postgresql``."""
        return "sqlite" if isinstance(self._backend, SqliteBackend) else "postgresql"

    def close(self) -> None:
        with contextlib.suppress(*self._backend.errors):  # a link the server already dropped
            self._db.close()

    @contextmanager
    def _tx(self) -> Iterator[Connection]:
        try:
            self._db.execute(self._backend.begin)
            try:
                yield self._db
            except BaseException:
                self._db.execute("ROLLBACK")
                raise
            self._db.execute("COMMIT")
        except self._backend.errors as exc:
            why = " ".join(str(exc).split())
            raise StoreError(f"cannot write to the results store {self.where}: {why}") from None

    def schema_version(self) -> int:
        return self._backend.schema_version()

    def store_uid(self) -> str:
        """This database's own key, made on first use: a server is the same server whichever
        address it was reached by."""
        found = self._rows("SELECT store_uid FROM store_identity", ())
        if found:  # read first: a station's role on a server may read this table, not write it
            return str(found[0][0])
        with self._tx() as db:
            db.execute(
                "INSERT INTO store_identity (id, store_uid) VALUES (1, ?)"
                " ON CONFLICT (id) DO NOTHING",
                (uuid.uuid4().hex,),
            )
            return str(db.execute("SELECT store_uid FROM store_identity").fetchone()[0])

    def migrate(self, allowed: Migrate = Migrate.ALWAYS) -> int | None:
        """Apply every migration the database has not seen, as far as ``allowed`` lets it, in
        one transaction (a failure leaves the old schema whole); the version is read inside it,
        under the schema lock, so stations opening one server at once agree.  Returns the
        version it upgraded from, None where it changed nothing; ``OlderSchema`` where it may
        not upgrade, ``NewerSchema`` where a newer rig made the store."""
        if allowed is Migrate.NEVER:  # no transaction: a read-only file cannot begin one
            try:
                version = self._backend.schema_version()
            except self._backend.errors as exc:
                why = " ".join(str(exc).split())
                raise StoreError(f"cannot read the results store {self.where}: {why}") from None
            self._check_schema(version, allowed)
            return None
        with self._tx() as db:
            self._backend.lock_schema()
            version = self._backend.schema_version()
            self._check_schema(version, allowed)
            if version == SCHEMA_VERSION:
                return None
            for migration in MIGRATIONS[version:]:
                for statement in self._backend.statements(migration):
                    db.execute(statement)
            self._backend.set_schema_version(SCHEMA_VERSION)
            return version

    def _check_schema(self, version: int, allowed: Migrate) -> None:
        if version > SCHEMA_VERSION:
            raise NewerSchema(self.where, version)
        older = version < SCHEMA_VERSION
        if older and (allowed is Migrate.NEVER or (allowed is Migrate.IF_EMPTY and version)):
            raise OlderSchema(self.where, version)

    # --- send passes: which copy of a file sends (rig.store_copies) ---------------------------

    def issue_send_token(self, target: str) -> str:
        """A new token for a send pass to the server ``target`` (its store id), kept in this file
        before the server sees it, so a link lost after the server's commit leaves it ours.  An
        insert alone in its own transaction: two passes of one file (a run's send, a cron sync)
        each keep their own, and neither takes the other's for a copy's."""
        token = uuid.uuid4().hex
        with self._tx() as db:
            db.execute(
                "INSERT INTO send_tokens (target, token, issued_at) VALUES (?, ?, ?)",
                (target, token, utc_now()),
            )
        return token

    def issued_send_token(self, target: str, token: str) -> bool:
        """Whether this file issued ``token`` for the server ``target``, at any time: a server
        restored from a dump holds an older one of ours."""
        sql = "SELECT 1 FROM send_tokens WHERE target=? AND token=?"
        return bool(self._rows(sql, (target, token)))

    def last_send_pass(self, store_uid: str) -> tuple[str, str, str, str] | None:
        """On a server: (token, station, host, sent_at) of the store's last send pass; None where
        it has none."""
        sql = "SELECT send_token, station, host, sent_at FROM store_senders WHERE store_uid=?"
        rows = self._rows(sql, (store_uid,))
        return None if not rows else (str(rows[0][0]), str(rows[0][1]), str(rows[0][2]),
                                      str(rows[0][3]))  # fmt: skip

    def note_first_send_pass(self, store_uid: str, token: str, station: str, host: str) -> bool:
        """On a server: note the store's first pass; False where another pass noted one first
        (the caller reads it again)."""
        with self._tx() as db:
            row = db.execute(
                "INSERT INTO store_senders (store_uid, send_token, station, host, sent_at)"
                " VALUES (?, ?, ?, ?, ?) ON CONFLICT (store_uid) DO NOTHING RETURNING store_uid",
                (store_uid, token, station, host, utc_now()),
            ).fetchone()
        return row is not None

    def note_next_send_pass(
        self, store_uid: str, before: str, token: str, station: str, host: str
    ) -> bool:
        """On a server: note the store's pass in place of the one whose token is ``before``, only
        if that one is still the last (the check and the change in one statement, so two copies
        of a file cannot both pass); False where no row changed."""
        with self._tx() as db:
            row = db.execute(
                "UPDATE store_senders SET send_token=?, station=?, host=?, sent_at=?"
                " WHERE store_uid=? AND send_token=? RETURNING store_uid",
                (token, station, host, utc_now(), store_uid, before),
            ).fetchone()
        return row is not None

    def renew_store_uid(self, before: str, after: str) -> bool:
        """Give this file the store id ``after`` in place of ``before``; False where the file no
        longer has ``before`` (renewed meanwhile).  Runs and what was sent where stay."""
        with self._tx() as db:
            row = db.execute(
                "UPDATE store_identity SET store_uid=? WHERE store_uid=? RETURNING store_uid",
                (after, before),
            ).fetchone()
        return row is not None

    # --- writing, one short transaction each -------------------------------------------------

    def start_run(self, header: RunHeader) -> int:
        with self._tx() as db:
            cur = db.execute(
                "INSERT INTO runs (run_uid, serial, sequence_name, sequence_hash, sequence_path,"
                " station, operator, unit, faults, instruments, started_at, status,"
                " study_part, study_trial, planned_steps, claim, remark)"
                " VALUES (?,?,?,?,?,?,?,?,?,?,?, 'running', ?, ?, ?, ?, ?) RETURNING id",
                (
                    uuid.uuid4().hex,
                    header.serial,
                    header.sequence_name,
                    header.sequence_hash,
                    header.sequence_path,
                    header.station,
                    header.operator,
                    header.unit,
                    json.dumps(list(header.faults)),
                    json.dumps(list(header.instruments)),
                    utc_now(),
                    header.study_part,
                    header.study_trial,
                    None if header.planned_steps is None else json.dumps(header.planned_steps),
                    header.claim,
                    header.remark,
                ),
            )
            return int(cur.fetchone()[0])

    def add_reading(
        self,
        run_id: int,
        step_id: str,
        *,
        role: str,
        function: str,
        value: float,
        range_: float | None,
        nplc: float | None,
        u_std: float | None,
        taken_at: float,
        settled: bool,
    ) -> int:
        with self._tx() as db:
            cur = db.execute(
                "INSERT INTO readings (run_id, step_id, role, function, value, overload, range,"
                " nplc, u_std, taken_at, settled, reading_uid) VALUES (?,?,?,?,?,?,?,?,?,?,?,?)"
                " RETURNING id",
                (
                    run_id,
                    step_id,
                    role,
                    function,
                    _num(value),
                    _overload_flag(value),
                    _num(range_),
                    nplc,
                    _num(u_std),
                    taken_at,
                    int(settled),
                    uuid.uuid4().hex,
                ),
            )
            return int(cur.fetchone()[0])

    def mark_settled(self, reading_row: int) -> None:
        """Flag the reading a step's value was taken from (the last of its settling series)."""
        with self._tx() as db:
            db.execute("UPDATE readings SET settled=1 WHERE id=?", (reading_row,))

    def mark_unsettled(self, reading_rows: list[int]) -> None:
        """Take the flag back from readings no step's value came from (taken ahead, not used)."""
        with self._tx() as db:
            db.executemany("UPDATE readings SET settled=0 WHERE id=?", [(r,) for r in reading_rows])

    def add_step(self, run_id: int, position: int, row: dict[str, Any]) -> None:
        fields = {
            "run_id": run_id,
            "position": position,
            **{k: (_num(v) if isinstance(v, float) else v) for k, v in row.items()},
        }
        extras = fields.get("extras")
        if isinstance(extras, dict):
            fields["extras"] = json.dumps({k: v for k, v in extras.items() if not _bad_float(v)})
        params = fields.get("model_params")
        if isinstance(params, dict):
            fields["model_params"] = json.dumps(params)
        names = ", ".join(fields)
        marks = ", ".join("?" for _ in fields)
        with self._tx() as db:
            db.execute(f"INSERT INTO steps ({names}) VALUES ({marks})", tuple(fields.values()))

    def finish_run(
        self,
        run_id: int,
        *,
        status: str,
        verdict: str,
        reason: str = "",
        notes: Sequence[str] = (),
        relay_operations: Mapping[int, int] | None = None,
        cut_short: str | None = None,
        end_cause: str = "",
    ) -> None:
        """Record the run's end.  ``relay_operations`` (the run's own, by relay) are added to its
        station's lifetime counts in the same commit: one commit less at the end of every run, and
        wear is never counted without the run that caused it.  ``cut_short`` is the step under
        way when the run ended (None: none was), so the record can tell it from those never
        begun.  ``end_cause``: why it ended short (``rig.end_cause``; empty: it did not)."""
        with self._tx() as db:
            db.execute(
                "UPDATE runs SET ended_at=?, status=?, verdict=?, reason=?, notes=?,"
                " cut_short_step=?, end_cause=? WHERE id=?",
                (
                    utc_now(),
                    status,
                    verdict,
                    reason,
                    json.dumps(list(notes)),
                    cut_short or "",
                    end_cause,
                    run_id,
                ),
            )
            if relay_operations:
                row = db.execute("SELECT station FROM runs WHERE id=?", (run_id,)).fetchone()
                if row is not None:
                    self._count_wear(db, str(row[0]), relay_operations)

    def add_relay_operations(self, station: str, counts: Mapping[int, int]) -> None:
        """Add relay operations to the station's lifetime counts."""
        with self._tx() as db:
            self._count_wear(db, station, counts)

    @staticmethod
    def _count_wear(db: Connection, station: str, counts: Mapping[int, int]) -> None:
        for relay, ops in counts.items():
            if ops:
                db.execute(
                    "INSERT INTO relay_wear (station, relay, operations) VALUES (?,?,?)"
                    " ON CONFLICT (station, relay) DO UPDATE SET"
                    " operations = relay_wear.operations + excluded.operations",
                    (station, relay, ops),
                )

    def relay_wear(self, station: str) -> dict[int, int]:
        rows = self._db.execute(
            "SELECT relay, operations FROM relay_wear WHERE station=?", (station,)
        )
        return {int(r[0]): int(r[1]) for r in rows}

    # --- runs a stopped controller left behind (see rig.resume) ------------------------------

    def mark_incomplete(self, station: str, reason: str) -> list[int]:
        """Mark runs of ``station`` still recorded as running as incomplete; returns their ids.

        Called once the station's instruments are open: a relay box is opened exclusively, so no
        other live controller can be running on this station, and a running run is a dead one's.
        """
        with self._tx() as db:
            rows = db.execute(
                "SELECT id FROM runs WHERE station=? AND status='running' ORDER BY id", (station,)
            ).fetchall()
            ids = [int(r[0]) for r in rows]
            for run_id in ids:
                db.execute(
                    "UPDATE runs SET status='incomplete', reason=?, ended_at=?, end_cause=?"
                    " WHERE id=?",
                    (reason, utc_now(), EndCause.CONTROLLER_STOPPED.value, run_id),
                )
                # a step cut short has no value, so none of its readings is the one its value
                # came from (readings taken ahead go in flagged for the step they are for)
                db.execute(
                    "UPDATE readings SET settled=0 WHERE run_id=? AND settled=1"
                    " AND step_id NOT IN (SELECT step_id FROM steps WHERE run_id=?)",
                    (run_id, run_id),
                )
        return ids

    def reopen_run(self, run_id: int, planned_steps: Sequence[str] | None = None) -> None:
        """Set an incomplete run running again, to be continued from its next step.  The planned
        steps it recorded at its start are kept; ``planned_steps`` is recorded only where it
        recorded none (a run begun by an older rig, continued with the same sequence)."""
        planned = None if planned_steps is None else json.dumps(list(planned_steps))
        with self._tx() as db:
            db.execute(
                "UPDATE runs SET status='running', ended_at=NULL, cut_short_step=NULL,"
                " end_cause=NULL,"
                " planned_steps=COALESCE(planned_steps, ?) WHERE id=? AND status='incomplete'",
                (planned, run_id),
            )

    # --- reading ------------------------------------------------------------------------------

    def run(self, run_id: int) -> dict[str, Any]:
        row = self._db.execute("SELECT * FROM runs WHERE id=?", (run_id,)).fetchone()
        if row is None:
            raise StoreError(f"no run {run_id} in {self.where}")
        return dict(row)

    def run_id_for(self, run_uid: str) -> int | None:
        """This database's id of a run known by its key: ids differ between a station's file
        and the server, ``run_uid`` is the same in both."""
        row = self._db.execute("SELECT id FROM runs WHERE run_uid=?", (run_uid,)).fetchone()
        return None if row is None else int(row[0])

    def runs(self, limit: int = 50) -> list[dict[str, Any]]:
        rows = self._db.execute("SELECT * FROM runs ORDER BY id DESC LIMIT ?", (limit,))
        return [dict(r) for r in rows]

    def steps(self, run_id: int) -> list[dict[str, Any]]:
        rows = self._db.execute("SELECT * FROM steps WHERE run_id=? ORDER BY position", (run_id,))
        return [dict(r) for r in rows]

    def readings(self, run_id: int, step_id: str | None = None) -> list[dict[str, Any]]:
        if step_id is None:
            rows = self._db.execute("SELECT * FROM readings WHERE run_id=? ORDER BY id", (run_id,))
        else:
            rows = self._db.execute(
                "SELECT * FROM readings WHERE run_id=? AND step_id=? ORDER BY id",
                (run_id, step_id),
            )
        return [dict(r) for r in rows]

    # --- bulk reads for statistics (rig.stats.from_store); plain rows, portable SQL ----------

    def run_rows(self, where: RunFilter, *, origin: bool = False) -> list[Any]:
        """(id, serial, sequence_name, started_at, status, verdict, reason, end_cause, claim,
        answered_no, confirmed, clear, reference_failed) of every run the filter matches, oldest
        first; ``answered_no`` is 1 where an operator answered a question no (a prompt's step
        failed), else 0; the next three are what its steps show the screen, 0 or 1
        (``rig.screening.EVIDENCE_SQL``).  With ``origin``, each row goes on with (station,
        run_uid): where the run was made, and its key in every store (its id is this database's
        own)."""
        from rig.screening import EVIDENCE_SQL

        sql, params = _run_where(where)
        more = ", r.station, r.run_uid" if origin else ""
        shown = ", ".join(EVIDENCE_SQL[k] for k in ("confirmed", "clear", "reference_failed"))
        return self._rows(
            "SELECT r.id, r.serial, r.sequence_name, r.started_at, r.status, r.verdict, r.reason,"
            f" r.end_cause, r.claim, {ANSWERED_NO_SQL}, {shown}{more} FROM runs r WHERE {sql}"
            " ORDER BY r.started_at, r.id",
            params,
        )

    def run_uids_starting(self, prefix: str, limit: int = 2) -> list[str]:
        """The record ids (``run_uid``) that start with ``prefix`` (hex digits, checked by the
        caller), at most ``limit``: a record id's start names a run while it is unique."""
        rows = self._rows(
            "SELECT run_uid FROM runs WHERE substr(run_uid, 1, CAST(? AS INTEGER)) = ?"
            " ORDER BY run_uid LIMIT ?",
            (len(prefix), prefix, limit),
        )
        return [str(r[0]) for r in rows]

    def runs_of_unit(self, serial: str, sequence: str) -> list[Any]:
        """(id, station, run_uid, started_at, status, verdict) of every run of ``sequence`` on
        the unit ``serial``, oldest first: through the serial's index, quick enough to ask before
        a run (``rig.tested_before``)."""
        return self._rows(
            "SELECT id, station, run_uid, started_at, status, verdict FROM runs"
            " WHERE serial = ? AND sequence_name = ? ORDER BY started_at, id",
            (serial, sequence),
        )

    def runs_of_claim(self, claim: str, sequence: str) -> list[Any]:
        """(id, station, run_uid, started_at, status, verdict, serial, claim) of every run of
        ``sequence`` given ``claim`` or a claim that differs from it in letter case or spaces
        alone (``rig.claim_match``), oldest first: asked before a run (``rig.tested_before``).
        The claims on record are compared here, not in SQL, so that both engines fold them
        alike; the runs are then read through the claim's index."""
        key = claim_key(claim)
        given = self._rows(
            "SELECT DISTINCT claim FROM runs WHERE sequence_name = ? AND claim <> ''",
            (sequence,),
        )
        alike = sorted(str(r[0]) for r in given if claim_key(str(r[0])) == key)
        if not alike:
            return []
        marks = ", ".join("?" for _ in alike)
        return self._rows(
            "SELECT id, station, run_uid, started_at, status, verdict, serial, claim FROM runs"
            f" WHERE claim IN ({marks}) AND sequence_name = ? ORDER BY started_at, id",
            (*alike, sequence),
        )

    def newest_start(self) -> str | None:
        """The start of the newest run (ISO 8601, UTC): a station clock set back starts a run
        before it."""
        rows = self._rows("SELECT MAX(started_at) FROM runs", ())
        return None if not rows or rows[0][0] is None else str(rows[0][0])

    def server_time(self) -> dt.datetime | None:
        """The results server's clock (PostgreSQL ``now()``); None for a SQLite file."""
        if self.engine != "postgresql":
            return None
        rows = self._rows("SELECT now()", ())
        found = rows[0][0] if rows else None
        return found if isinstance(found, dt.datetime) else None

    def run_ids_by_uid(self) -> dict[str, int]:
        """Every run's id in this database by its record id: a station's own numbers for the
        runs read from the server."""
        return {str(r[1]): int(r[0]) for r in self._rows("SELECT id, run_uid FROM runs", ())}

    def run_names(self, where: RunFilter) -> list[Any]:
        """(sequence_name, station, runs, first started_at, last started_at) per sequence and
        station of the runs the filter matches: what a filter that matches nothing could have
        named instead."""
        sql, params = _run_where(where)
        return self._rows(
            "SELECT r.sequence_name, r.station, COUNT(*), MIN(r.started_at), MAX(r.started_at)"
            f" FROM runs r WHERE {sql} GROUP BY r.sequence_name, r.station"
            " ORDER BY r.sequence_name, r.station",
            params,
        )

    def sequence_versions(self, where: RunFilter) -> list[Any]:
        """(sequence_name, sequence_hash, runs, first started_at) per version of each sequence
        the filter's runs used, oldest first: an edited sequence keeps its name, and its runs
        then merge in the yield and Pareto."""
        sql, params = _run_where(where)
        return self._rows(
            "SELECT r.sequence_name, r.sequence_hash, COUNT(*), MIN(r.started_at)"
            f" FROM runs r WHERE {sql} GROUP BY r.sequence_name, r.sequence_hash"
            " ORDER BY r.sequence_name, MIN(r.started_at)",
            params,
        )

    def sequence_units(self, sequence_name: str) -> set[str]:
        """The units the steps of a sequence's runs recorded: what ``rig stats`` tells a screen
        from a harness proof by (``rig.screening.is_screen``), for one run's record."""
        rows = self._rows(
            "SELECT DISTINCT s.unit FROM steps s JOIN runs r ON r.id = s.run_id"
            " WHERE r.sequence_name = ?",
            [sequence_name],
        )
        return {str(row[0]) for row in rows}

    def model_step_rows(self, where: RunFilter) -> list[Any]:
        """The steps judged around a prediction (``predicted`` set): sequence, step, unit,
        value, predicted, low, high, expanded U, position, verdict, the run's status, and 1
        where the step is a part failure (``part_failure_sql``) else 0, one row a step run.
        Their limits move with the prediction, so they are not summed by limits as the others
        are (``rig.stats.from_store.model_step_stats``)."""
        sql, params = _run_where(where)
        return self._rows(
            "SELECT r.sequence_name, s.step_id, s.unit, s.value, s.predicted, s.low, s.high,"
            f" s.expanded_u, s.position, s.verdict, r.status,"
            f" CASE WHEN {part_failure_sql()} THEN 1 ELSE 0 END"
            " FROM steps s JOIN runs r ON r.id = s.run_id"
            f" WHERE {sql} AND s.predicted IS NOT NULL ORDER BY r.id, s.position",
            params,
        )

    def step_moments(self, where: RunFilter) -> list[Any]:
        """Per (sequence, step, unit, low, high): values, sums of d and d^2 with d = value minus
        the step's limit (its low, else its high, else 0), mean expanded uncertainty, first
        position, and how many times the step was a part failure (``part_failure_sql``).

        The database adds up, so a million values never pass through Python; the shift keeps the
        variance computed from the sums accurate (rig.stats.capability.moments_from_sums).  The
        first pass groups by the step's own columns (streamed through ``steps_for_stats``); only
        a step id that several sequences share is grouped again by sequence."""
        sql, params = _run_where(where)
        d = "(s.value - COALESCE(s.low, s.high, 0))"
        sums = (
            f"COUNT(s.value), SUM({d}), SUM({d} * {d}), AVG(s.expanded_u), MIN(s.position),"
            f" SUM(CASE WHEN {part_failure_sql()} THEN 1 ELSE 0 END)"
        )
        # steps judged around a prediction have limits that move from run to run: they are
        # summed apart, as deviations (``model_step_rows``)
        join = f"FROM steps s JOIN runs r ON r.id = s.run_id WHERE {sql} AND s.predicted IS NULL"
        coarse = self._rows(
            f"SELECT MIN(r.sequence_name), MAX(r.sequence_name), s.step_id, s.unit, s.low, s.high,"
            f" {sums} {join} GROUP BY s.step_id, s.unit, s.low, s.high",
            params,
        )
        shared = {row[2]: (row[0], row[1]) for row in coarse if row[0] != row[1]}
        rows = [(row[0], *row[2:]) for row in coarse if row[2] not in shared]
        if not shared:
            return rows
        distinct = f"SELECT DISTINCT r.sequence_name FROM runs r WHERE {sql}"
        sequences = [r[0] for r in self._rows(distinct, params)]
        for step_id, (first, last) in sorted(shared.items()):
            for sequence in sorted(q for q in sequences if first <= q <= last):
                # one sequence at a time streams through the index again, with no sort
                rows += [
                    (sequence, *row)
                    for row in self._rows(
                        f"SELECT s.step_id, s.unit, s.low, s.high, {sums} {join}"
                        " AND s.step_id = ? AND r.sequence_name = ?"
                        " GROUP BY s.step_id, s.unit, s.low, s.high",
                        [*params, step_id, sequence],
                    )
                ]
        return rows

    def step_series(self, where: RunFilter, sequence: str, step_id: str) -> list[Any]:
        """(run_id, started_at, value, low, high, expanded_u, study_part, operator, study_trial,
        predicted) of one step over the matching runs, in time order."""
        sql, params = _run_where(where)
        return self._rows(
            "SELECT s.run_id, r.started_at, s.value, s.low, s.high, s.expanded_u, r.study_part,"
            " r.operator, r.study_trial, s.predicted FROM steps s JOIN runs r ON r.id = s.run_id"
            f" WHERE {sql} AND r.sequence_name = ? AND s.step_id = ?"
            " ORDER BY r.started_at, s.run_id",
            [*params, sequence, step_id],
        )

    def _rows(self, sql: str, params: Sequence[Any]) -> list[Any]:
        """Rows readable by position; a read error names the store."""
        try:
            cursor = self._db.execute(sql, tuple(params))
            if isinstance(cursor, sqlite3.Cursor):
                cursor.row_factory = None  # plain tuples: a sqlite3.Row costs as much again
            return cursor.fetchall()
        except self._backend.errors as exc:
            raise StoreError(f"cannot read the results store {self.where}: {exc}") from None


ANSWERED_NO_SQL = (
    "CASE WHEN EXISTS (SELECT 1 FROM steps s WHERE s.run_id = r.id AND s.unit = ''"
    " AND s.verdict = 'fail') THEN 1 ELSE 0 END"
)
"""1 where an operator answered a question of the run ``r`` no (a prompt's step failed), else
0 (``rig.screening.answered_no``); portable SQL."""


def part_failure_sql() -> str:
    """Whether the step ``s`` of the run ``r`` is a failure of the part, as SQL: judged ``fail``
    or ``conditional fail`` in a run the screen can decide (``rig.screening.decision_word``): it
    completed, no question was answered no and the bench's reference did not fail; and the step
    reads the part, not the bench's own reference.  A step that could not measure (``error``),
    or any step of a run that decides nothing, says nothing about the part.  The verdict comes
    first, so the run's subqueries are asked of failed steps only."""
    from rig.screening import EVIDENCE_SQL, REFERENCE_KIND

    return (
        "s.verdict IN ('fail', 'conditional fail') AND r.status = 'complete'"
        f" AND s.kind <> '{REFERENCE_KIND}' AND {ANSWERED_NO_SQL} = 0"
        f" AND {EVIDENCE_SQL['reference_failed']} = 0"
    )


def _run_where(where: RunFilter) -> tuple[str, list[Any]]:
    """A WHERE clause on runs (alias ``r``) with ``?`` placeholders, and its parameters."""
    parts = [{None: "1 = 1", True: "r.study_part <> ''", False: "r.study_part = ''"}[where.study]]
    params: list[Any] = []
    for column, value in (("sequence_name", where.sequence), ("station", where.station)):
        if value is not None:
            parts.append(f"r.{column} = ?")
            params.append(value)
    if where.started_from() is not None:
        parts.append("r.started_at >= ?")
        params.append(where.started_from())
    if where.started_before() is not None:
        parts.append("r.started_at < ?")
        params.append(where.started_before())
    for column, prefix in (("serial", where.serial_prefix), ("sequence_hash", where.sequence_hash)):
        if prefix:
            parts.append(f"substr(r.{column}, 1, CAST(? AS INTEGER)) = ?")
            params.extend([len(prefix), prefix])
    return " AND ".join(parts), params


def _bad_float(value: object) -> bool:
    return isinstance(value, float) and not math.isfinite(value)
