"""The results store: WAL and FULL sync as the SQLite documentation describes, migrations,
nothing lost between connections, and the plain-data export."""

from __future__ import annotations

import csv
import io
import math
import sqlite3
from pathlib import Path

from reports.run_export import run_record, steps_csv
from rig.store import SCHEMA_VERSION, ResultStore, RunHeader

HEADER = RunHeader("SN", "seq", "abc", "/x.toml", "bench", "op", unit="u", faults=("open:w",))


def test_pragmas_and_schema(tmp_path: Path) -> None:
    store = ResultStore(tmp_path / "r.sqlite")
    # source: sqlite.org pragma documentation (journal_mode is stored in the file)
    assert store._db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert store._db.execute("PRAGMA synchronous").fetchone()[0] == 2  # FULL
    assert store.schema_version() == SCHEMA_VERSION
    store.close()
    again = ResultStore(tmp_path / "r.sqlite")  # opening again migrates nothing twice
    assert again.schema_version() == SCHEMA_VERSION
    again.close()


def test_committed_readings_are_visible_to_another_connection(tmp_path: Path) -> None:
    store = ResultStore(tmp_path / "r.sqlite")
    run_id = store.start_run(HEADER)
    row = store.add_reading(
        run_id,
        "s1",
        role="hi-lo",
        function="dcv",
        value=1.25,
        range_=10.0,
        nplc=1.0,
        u_std=1e-4,
        taken_at=0.0,
        settled=False,
    )
    store.add_reading(
        run_id,
        "s1",
        role="hi-lo",
        function="dcv",
        value=math.inf,
        range_=10.0,
        nplc=1.0,
        u_std=math.nan,
        taken_at=0.1,
        settled=False,
    )
    store.mark_settled(row)
    other = sqlite3.connect(tmp_path / "r.sqlite")
    rows = other.execute("SELECT value, overload, settled FROM readings ORDER BY id").fetchall()
    other.close()
    assert rows == [(1.25, 0, 1), (None, 1, 0)]  # an overload is kept, flagged, never a number
    store.close()


def test_export_carries_the_whole_record(tmp_path: Path) -> None:
    store = ResultStore(tmp_path / "r.sqlite")
    run_id = store.start_run(HEADER)
    store.add_step(
        run_id,
        1,
        {
            "step_id": "s1",
            "kind": "volts",
            "title": "t",
            "value": 2.5,
            "unit": "V",
            "low": 0.6,
            "high": 4.8,
            "predicted": None,
            "u_std": 1e-4,
            "expanded_u": 2e-4,
            "coverage_k": 2.0,
            "decision_rule": "simple",
            "verdict": "pass",
            "tur": 100.0,
            "started_at": "a",
            "ended_at": "b",
            "settle_s": 0.0,
            "note": "",
            "extras": {"x": 1.0, "bad": math.nan},
        },
    )
    store.add_relay_operations(HEADER.station, {2: 4})
    store.finish_run(run_id, status="complete", verdict="pass", relay_operations={2: 1, 7: 3})
    # the run's operations are added to its station's counts with its end, in one commit
    assert store.relay_wear(HEADER.station) == {2: 5, 7: 3}
    record = run_record(store, run_id)
    assert record["run"]["faults"] == ["open:w"]
    assert record["steps"][0]["extras"] == {"x": 1.0}
    table = list(csv.DictReader(io.StringIO(steps_csv(store, run_id))))
    assert table[0]["step_id"] == "s1" and table[0]["verdict"] == "pass"
    store.close()


def test_a_dead_run_keeps_settled_flags_only_where_a_step_has_its_value(tmp_path: Path) -> None:
    # A controller that died mid-run leaves readings of steps that never got a value (one cut
    # short, or readings taken ahead for later steps): none of them is "the reading the step's
    # value came from", so marking the run incomplete takes those flags back.
    store = ResultStore(tmp_path / "r.sqlite")
    run_id = store.start_run(HEADER)
    for step_id in ("done", "cut-short"):
        store.add_reading(
            run_id,
            step_id,
            role="hi-lo",
            function="dcv",
            value=1.0,
            range_=10.0,
            nplc=1.0,
            u_std=1e-4,
            taken_at=0.0,
            settled=True,
        )
    step = {"step_id": "done", "kind": "volts", "title": "done", "unit": "V", "verdict": "pass"}
    step |= {"coverage_k": 2.0, "decision_rule": "simple", "started_at": "t", "ended_at": "t"}
    store.add_step(run_id, 1, step)
    assert store.mark_incomplete("bench", "the controller stopped") == [run_id]
    rows = store._db.execute("SELECT step_id, settled FROM readings ORDER BY id").fetchall()
    assert [tuple(r) for r in rows] == [("done", 1), ("cut-short", 0)]
    store.close()
