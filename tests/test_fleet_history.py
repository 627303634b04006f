"""A unit's history across the stations of one results server: ``rig runs --station`` lists every
bench's runs of a serial with the bench that made each, and ``rig report`` opens any of them by
the start of its record id; a report read from the server keeps the station's own run number
(the technician's) and names the server's as the server's.  Two real stations on virtual benches
and the suite's real PostgreSQL server; the serials are invented."""

from __future__ import annotations

import csv
import io
import json
import re
import subprocess
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import psycopg
import pytest
from bench_helpers import shipped_plan
from postgres_server import Cluster, free_port
from test_store_sync import rig_cli, two_stations_on

from rig.runner import run_plan
from rig.store import ResultStore

pytestmark = pytest.mark.postgres


@contextmanager
def two_stations(
    tmp_path: Path, cluster: Cluster, url: str
) -> Iterator[tuple[Path, dict[str, str]]]:
    """qa1 and qa2 on one server, both having tested unit U-7: qa1 first (server runs 1, 2),
    then qa2 (its run 1 is the server's 3), and a retest at qa2 still only in its own file (its
    run 2, as while the link is down).  Yields qa2's station file and a `rig` environment."""
    with two_stations_on(tmp_path, cluster, url, ("qa1", "qa2")) as (qa1, qa2, env):
        for serial in ("U-7", "X-1"):
            run_plan(shipped_plan("temp-circuit-check", qa1), serial)
        plan = shipped_plan("temp-circuit-check", qa2)
        assert run_plan(plan, "U-7").run_id == 1
        own = ResultStore(qa2.store_path)
        try:
            assert run_plan(plan, "U-7", store=own).run_id == 2  # recorded, not sent
        finally:
            own.close()
        yield qa2.path, env


def ok(done: subprocess.CompletedProcess[str]) -> str:
    assert done.returncode == 0, done.stderr
    assert "Traceback" not in done.stderr
    return done.stdout


def test_a_units_runs_on_every_station_and_each_opens_from_any(
    tmp_path: Path, pg_cluster: Cluster, pg_database: str
) -> None:
    with two_stations(tmp_path, pg_cluster, pg_database) as (qa2, env):
        history = ["runs", "--station", str(qa2), "--serial", "U-7"]
        listed = json.loads(ok(rig_cli([*history, "--json"], env)))["runs"]
        table = ok(rig_cli(history, env))
        only_qa1 = json.loads(ok(rig_cli([*history, "--station-name", "qa1", "--json"], env)))
        with psycopg.connect(pg_database) as conn:
            server_ids = dict(conn.execute("SELECT run_uid, id FROM runs").fetchall())

        def report(run: str, fmt: str = "json") -> str:
            return ok(
                rig_cli(["report", run, "--station", str(qa2), "--format", fmt, "--out", "-"], env)
            )

        other = json.loads(report(str(listed[0]["record_id"])[:12]))["run"]
        own = json.loads(report("1"))["run"]
        own_csv = next(csv.DictReader(io.StringIO(report("1", "csv"))))
        own_html = report("1", "html")
    # every bench's runs of the unit, oldest first, each with its station; the station's own
    # ids where it made the run, and its retest not yet on the server listed all the same
    assert [(r["station"], r["run"], r["waiting_to_send"]) for r in listed] == [
        ("qa1", None, False),
        ("qa2", 1, False),
        ("qa2", 2, True),
    ]
    assert [r["station"] for r in only_qa1["runs"]] == ["qa1"]
    assert all(re.fullmatch(r"[0-9a-f]{32}", str(r["record_id"])) for r in listed)
    assert "station" in table.splitlines()[0] and "qa1" in table
    assert str(listed[0]["record_id"])[:12] in table
    assert "run 2: in this station's file, not yet on the results server" in table
    # another station's run, opened by the start of its record id: no number of this station's
    assert (other["serial"], other["station"], other["id"]) == ("U-7", "qa1", None)
    assert other["server_id"] == server_ids[listed[0]["record_id"]]
    # the station's run 1 read from the server: its number is the station's, the server's is
    # named as the server's (3: qa1's two runs came first), the record id is kept
    uid = str(listed[1]["record_id"])
    assert (own["id"], own["server_id"], own["run_uid"]) == (1, server_ids[uid], uid)
    assert server_ids[uid] == 3
    assert (own_csv["run_id"], own_csv["server_run_id"], own_csv["record_id"]) == ("1", "3", uid)
    assert f"run 1 of station qa2 (results server record 3; record id {uid})" in own_html


def test_a_station_whose_server_is_down_lists_its_own_file_and_says_so(
    tmp_path: Path, pg_cluster: Cluster, pg_database: str
) -> None:
    with two_stations(tmp_path, pg_cluster, pg_database) as (qa2, env):
        gone = {**env, "RIG_DATABASE_URL": f"postgresql://nobody@127.0.0.1:{free_port()}/x"}
        done = rig_cli(["runs", "--station", str(qa2), "--serial", "U-7", "--json"], gone)
    listed = json.loads(ok(done))["runs"]
    assert [(r["station"], r["run"]) for r in listed] == [("qa2", 1), ("qa2", 2)]
    assert "note:" in done.stderr and "read from the station's own file" in done.stderr


def test_a_record_ids_start_is_taken_and_a_shared_start_refused(tmp_path: Path) -> None:
    # rule of our own (docs/reports-and-stats.md): 8 or more hex digits are a record id or its
    # start, 7 digits at most a run id, so no record id's start reads as a run's number
    import argparse
    import sqlite3

    from rig.commands._run_ref import RunRef, id_in, run_ref
    from rig.store import RunHeader, StoreError

    assert run_ref("1234567") == RunRef(number=1234567)
    assert run_ref("12345678") == RunRef(record_id="12345678")
    assert run_ref("ABCDEF01") == RunRef(record_id="abcdef01")
    for bad in ("abc1234", "run-1", "0x12345678", "1" * 33):
        with pytest.raises(argparse.ArgumentTypeError, match="expected a run id"):
            run_ref(bad)
    path = tmp_path / "results.sqlite"
    store = ResultStore(path)
    try:
        ids = [
            store.start_run(RunHeader(f"SN-{k}", "seq", "abc", "/x.toml", "b", "op"))
            for k in range(3)
        ]
    finally:
        store.close()
    db = sqlite3.connect(path)  # keys chosen so that two runs share their first 9 digits
    keys = ("0123456789" + "a" * 22, "012345678f" + "b" * 22, "fe" * 16)
    for run_id, uid in zip(ids, keys, strict=True):
        db.execute("UPDATE runs SET run_uid=? WHERE id=?", (uid, run_id))
    db.commit()
    db.close()
    store = ResultStore(path)
    try:
        assert id_in(store, run_ref("0123456789")) == ids[0]
        assert id_in(store, run_ref("fe" * 16)) == ids[2]
        with pytest.raises(StoreError, match="starting 012345678 names more than one run"):
            id_in(store, run_ref("012345678"))
        with pytest.raises(StoreError, match="no run with record id starting 99999999"):
            id_in(store, run_ref("99999999"))
    finally:
        store.close()


def test_a_harness_proof_not_yet_sent_is_listed_as_one_not_as_a_screen(
    tmp_path: Path,
    pg_database: str,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    """The server has no steps of a sequence it never received, so the listing takes the step
    units of runs not yet sent from the station's own file: a harness proof (its step counts
    faults) gets no screen decision, on the server or not."""
    from bench_helpers import shipped_bench

    from rig.cli import main
    from rig.store import RunHeader
    from rig.store_postgres import open_postgres

    open_postgres(pg_database).close()  # a server that holds the schema and no run
    monkeypatch.setenv("RIG_DATABASE_URL", pg_database)
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        station.store_path.parent.mkdir(parents=True)
        own = ResultStore(station.store_path)
        try:
            header = RunHeader("H-1", "loom-proof", "h", "/p", station.name, "op")
            run_id = own.start_run(header)
            step = {
                "step_id": "loom", "kind": "harness", "title": "loom", "value": 0.0,
                "unit": "faults", "low": 0.0, "high": 0.0, "coverage_k": 2.0,
                "decision_rule": "simple", "verdict": "pass", "started_at": "a", "ended_at": "b",
            }  # fmt: skip
            own.add_step(run_id, 1, step)
            own.finish_run(run_id, status="complete", verdict="pass")
        finally:
            own.close()
        assert main(["runs", "--station", str(station.path), "--json"]) == 0
    listed = json.loads(capsys.readouterr().out)["runs"]
    assert [(r["serial"], r["waiting_to_send"], r["decision"]) for r in listed] == [
        ("H-1", True, None)
    ]
