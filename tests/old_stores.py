"""Stores as an earlier rig left them: ``MIGRATIONS`` applied up to an earlier version, with one
run of its own.  The migration and upgrade tests start from these."""

from __future__ import annotations

import sqlite3
from pathlib import Path
from typing import Any

import psycopg

from rig.store import MIGRATIONS
from rig.store_postgres import pg_ddl


def build_old_database(db: Any, version: int, run_statements: bool) -> None:
    """A database as the rig of schema ``version`` left it, with one run and one reading."""
    for step in range(version):
        for statement in MIGRATIONS[step].split(";"):
            if statement.strip():
                db.execute(pg_ddl(statement) if run_statements else statement)
    if version >= 1:
        db.execute(
            "INSERT INTO runs (run_uid, serial, sequence_name, sequence_hash, sequence_path,"
            " station, operator, started_at, status) VALUES"
            " ('old-run', 'SN-OLD', 's', 'h', '/p', 'bench', 'op', '2026-01-01', 'complete')"
        )
        db.execute(
            "INSERT INTO readings (run_id, step_id, role, function, value, taken_at)"
            " VALUES (1, 's1', 'hi-lo', 'dcv', 2.5, 1.0)"
        )
        db.execute(
            "INSERT INTO steps (run_id, position, step_id, kind, title, value, unit, coverage_k,"
            " decision_rule, verdict, started_at, ended_at) VALUES"
            " (1, 1, 's1', 'ntc', 't', 2010.5, 'ohm', 2.0, 'simple', 'pass', 'a', 'b')"
        )


def old_sqlite_file(path: Path, version: int) -> None:
    """A station's file as the rig of schema ``version`` left it (WAL, as every rig writes)."""
    db = sqlite3.connect(path, isolation_level=None)
    db.execute("PRAGMA journal_mode=WAL")
    build_old_database(db, version, run_statements=False)
    db.execute(f"PRAGMA user_version={version}")
    db.close()


def old_server(url: str, version: int) -> None:
    """A server's database as stations on the rig of schema ``version`` left it."""
    with psycopg.connect(url, autocommit=True) as conn:
        build_old_database(conn, version, run_statements=True)
        conn.execute("CREATE TABLE rig_schema (version INTEGER NOT NULL)")
        conn.execute("INSERT INTO rig_schema VALUES (%s)", (version,))


def server_version(url: str) -> int:
    with psycopg.connect(url) as conn:
        row = conn.execute("SELECT MAX(version) FROM rig_schema").fetchone()
    assert row is not None
    return int(row[0])
