"""A report's file is named by the number the station knows the run by, however the run was
asked for: ``rig report`` given a record id names the file after the station's own run number
where this station made the run, and after the record id's first 8 digits where another did.
Rule of our own (docs/reports-and-stats.md); two real stations on virtual benches and the suite's
real PostgreSQL server, with invented serials."""

from __future__ import annotations

from pathlib import Path

import psycopg
import pytest
from postgres_server import Cluster
from test_fleet_history import ok, two_stations
from test_store_sync import rig_cli

pytestmark = pytest.mark.postgres


def test_a_report_asked_by_record_id_is_named_by_the_stations_number(
    tmp_path: Path, pg_cluster: Cluster, pg_database: str
) -> None:
    folder = tmp_path / "out"
    folder.mkdir()
    with two_stations(tmp_path, pg_cluster, pg_database) as (qa2, env):
        with psycopg.connect(pg_database) as conn:
            uids = dict(conn.execute("SELECT station, run_uid FROM runs WHERE id IN (1, 3)"))
        said = {}
        for station in ("qa2", "qa1"):  # qa2's run 1 (server record 3), and qa1's first run
            done = ["report", uids[station][:10], "--station", str(qa2), "--out", str(folder)]
            said[station] = ok(rig_cli(done, env))
    qa1_uid = uids["qa1"]
    assert sorted(p.name for p in folder.iterdir()) == sorted(
        ["run-1-U-7.html", f"run-{qa1_uid[:8]}-U-7.html"]
    )
    assert said["qa2"].startswith("report of run 1 (U-7) written to ")
    assert said["qa1"].startswith(f"report of the run of station qa1, record {qa1_uid[:12]} (U-7)")
