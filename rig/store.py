"""The results store: every run, step and raw reading, committed as it is taken (SQLite, WAL).

Each reading and each step result is its own short transaction with ``synchronous=FULL``, so a
crash or power loss cannot take back anything the rig has reported as measured.  The schema is
versioned; ``MIGRATIONS[n]`` brings a database from version n to n + 1.
"""

from __future__ import annotations

import datetime as dt
import json
import math
import sqlite3
import uuid
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from rig.errors import RigError

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
]

SCHEMA_VERSION = len(MIGRATIONS)


class StoreError(RigError):
    """The results database cannot be opened or written."""


def _now() -> str:
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


class ResultStore:
    """One SQLite file; one connection per store object, used from one thread at a time."""

    def __init__(self, path: Path | str) -> None:
        self.path = Path(path)
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            self._db = sqlite3.connect(self.path, isolation_level=None, check_same_thread=False)
            self._db.row_factory = sqlite3.Row
            self._db.execute("PRAGMA journal_mode=WAL")
            self._db.execute("PRAGMA synchronous=FULL")
            self._db.execute("PRAGMA busy_timeout=5000")
            self._db.execute("PRAGMA foreign_keys=ON")
            self.migrate()
        except sqlite3.Error as exc:
            raise StoreError(f"cannot open the results store {self.path}: {exc}") from None

    def close(self) -> None:
        self._db.close()

    @contextmanager
    def _tx(self) -> Iterator[sqlite3.Connection]:
        try:
            self._db.execute("BEGIN IMMEDIATE")
            try:
                yield self._db
            except BaseException:
                self._db.execute("ROLLBACK")
                raise
            self._db.execute("COMMIT")
        except sqlite3.Error as exc:
            raise StoreError(f"cannot write to the results store {self.path}: {exc}") from None

    def schema_version(self) -> int:
        return int(self._db.execute("PRAGMA user_version").fetchone()[0])

    def migrate(self) -> None:
        """Apply every migration the file has not seen, each in its own transaction."""
        version = self.schema_version()
        if version > SCHEMA_VERSION:
            raise StoreError(
                f"{self.path} has schema version {version}; this rig knows up to {SCHEMA_VERSION}"
            )
        for step in range(version, SCHEMA_VERSION):
            self._db.execute("BEGIN IMMEDIATE")
            for statement in MIGRATIONS[step].split(";"):
                if statement.strip():
                    self._db.execute(statement)
            self._db.execute(f"PRAGMA user_version={step + 1}")
            self._db.execute("COMMIT")

    # --- writing, one short transaction each -------------------------------------------------

    def start_run(self, header: RunHeader) -> int:
        with self._tx() as db:
            cur = db.execute(
                "INSERT INTO runs (run_uid, serial, sequence_name, sequence_hash, sequence_path,"
                " station, operator, unit, faults, instruments, started_at, status)"
                " VALUES (?,?,?,?,?,?,?,?,?,?,?, 'running')",
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
                    _now(),
                ),
            )
            return int(cur.lastrowid or 0)

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
                " nplc, u_std, taken_at, settled) VALUES (?,?,?,?,?,?,?,?,?,?,?)",
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
                ),
            )
            return int(cur.lastrowid or 0)

    def mark_settled(self, reading_row: int) -> None:
        """Flag the reading a step's value was taken from (the last of its settling series)."""
        with self._tx() as db:
            db.execute("UPDATE readings SET settled=1 WHERE id=?", (reading_row,))

    def add_step(self, run_id: int, position: int, row: dict[str, Any]) -> None:
        fields = {
            "run_id": run_id,
            "position": position,
            **{k: (_num(v) if isinstance(v, float) else v) for k, v in row.items()},
        }
        extras = fields.get("extras")
        if isinstance(extras, dict):
            fields["extras"] = json.dumps({k: v for k, v in extras.items() if not _bad_float(v)})
        names = ", ".join(fields)
        marks = ", ".join("?" for _ in fields)
        with self._tx() as db:
            db.execute(f"INSERT INTO steps ({names}) VALUES ({marks})", tuple(fields.values()))

    def finish_run(
        self, run_id: int, *, status: str, verdict: str, reason: str = "", notes: Sequence[str] = ()
    ) -> None:
        with self._tx() as db:
            db.execute(
                "UPDATE runs SET ended_at=?, status=?, verdict=?, reason=?, notes=? WHERE id=?",
                (_now(), status, verdict, reason, json.dumps(list(notes)), run_id),
            )

    def add_relay_operations(self, station: str, counts: dict[int, int]) -> None:
        """Add one run's relay operations to the station's lifetime counts."""
        with self._tx() as db:
            for relay, ops in counts.items():
                if ops:
                    db.execute(
                        "INSERT INTO relay_wear (station, relay, operations) VALUES (?,?,?)"
                        " ON CONFLICT (station, relay) DO UPDATE SET"
                        " operations = operations + excluded.operations",
                        (station, relay, ops),
                    )

    def relay_wear(self, station: str) -> dict[int, int]:
        rows = self._db.execute(
            "SELECT relay, operations FROM relay_wear WHERE station=?", (station,)
        )
        return {int(r[0]): int(r[1]) for r in rows}

    # --- reading ------------------------------------------------------------------------------

    def run(self, run_id: int) -> dict[str, Any]:
        row = self._db.execute("SELECT * FROM runs WHERE id=?", (run_id,)).fetchone()
        if row is None:
            raise StoreError(f"no run {run_id} in {self.path}")
        return dict(row)

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


def _bad_float(value: object) -> bool:
    return isinstance(value, float) and not math.isfinite(value)
