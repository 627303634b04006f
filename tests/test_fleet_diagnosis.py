"""A unit's failed run at one bench, diagnosed from another bench's station file through the
results server: ``rig diagnose`` finds the run as ``rig report`` does (any station's run by its
record id; the station's own file, with a note, while the server is down).  Two real stations on
virtual benches and the suite's real PostgreSQL server; the serials are invented.  The reference
for the diagnosis is the fault injected into the first bench; no published source is involved."""

from __future__ import annotations

import json
import subprocess
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import psycopg
import pytest
from bench_helpers import SEQUENCES, shipped_bench, shipped_plan
from postgres_server import Cluster, free_port
from test_store_sync import password_file_env, renamed, rig_cli, with_server_section

from rig.config.station import Station, load_station
from rig.runner import run_plan

pytestmark = pytest.mark.postgres
UNIT = SEQUENCES / "units" / "temp-circuit.toml"


@contextmanager
def two_benches(
    tmp_path: Path, cluster: Cluster, url: str, faults_at_qa1: tuple[str, ...] = ()
) -> Iterator[tuple[Station, Station, dict[str, str]]]:
    """Stations qa1 (its bench with ``faults_at_qa1``) and qa2 on the server ``url``, and the
    environment of a `rig` process that finds the server's password."""
    dbname = str(psycopg.conninfo.conninfo_to_dict(url)["dbname"])
    env, patch = password_file_env(tmp_path, cluster)
    try:
        with (
            shipped_bench("temp-circuit", faults_at_qa1, folder=tmp_path / "qa1") as (_, a),
            shipped_bench("temp-circuit", folder=tmp_path / "qa2") as (_, b),
        ):
            qa1, qa2 = (
                renamed(load_station(with_server_section(s, cluster, dbname)), name)
                for s, name in ((a, "qa1"), (b, "qa2"))
            )
            yield qa1, qa2, env
    finally:
        patch.undo()


def diagnose(run: str, station: Station, env: dict[str, str], *more: str) -> tuple[int, str, str]:
    done: subprocess.CompletedProcess[str] = rig_cli(
        ["diagnose", run, "--station", str(station.path), *more], env
    )
    assert "Traceback" not in done.stderr
    return done.returncode, done.stdout, done.stderr


def test_another_benchs_failed_run_is_diagnosed_by_its_record_id(
    tmp_path: Path, pg_cluster: Cluster, pg_database: str
) -> None:
    # qa1 records its unit file by qa1's path, not on this computer (its bench's own disk)
    elsewhere = str(tmp_path / "bench-qa1-disk" / "units" / "temp-circuit.toml")
    with two_benches(tmp_path, pg_cluster, pg_database, ("open:ground",)) as (qa1, qa2, env):
        failed = run_plan(shipped_plan("temp-circuit-check", qa1), "U-9", unit=elsewhere)
        assert failed.verdict.value == "fail"  # sent to the server after the run
        good = run_plan(shipped_plan("temp-circuit-check", qa2), "U-9")
        with psycopg.connect(pg_database) as conn:
            uid = str(conn.execute("SELECT run_uid FROM runs WHERE station='qa1'").fetchone()[0])
        # no unit file found: the words say where it was recorded and what to give
        code, _, err = diagnose(uid[:8], qa2, env)
        assert code == 2
        assert f"records unit {elsewhere!r}, not found on this computer" in err
        assert "station qa1 recorded it" in err and "give --unit FILE" in err
        code, out, err = diagnose(uid[:8], qa2, env, "--unit", str(UNIT), "--json")
        assert code == 0, err
        found = json.loads(out)
        code, text, _ = diagnose(uid, qa2, env, "--unit", str(UNIT))
        assert code == 0
        report = rig_cli(
            ["report", uid[:8], "--station", str(qa2.path), "--unit", str(UNIT), "--out", "-"],
            env,
        )
        assert report.returncode == 0, report.stderr
        # with the server out of reach: the station's own runs, from its own file, with a note
        gone = {**env, "RIG_DATABASE_URL": f"postgresql://nobody@127.0.0.1:{free_port()}/x"}
        code, own, own_err = diagnose("1", qa2, gone, "--unit", str(UNIT), "--json")
        assert code == 0, own_err
        away, _, away_err = diagnose(uid[:8], qa2, gone, "--unit", str(UNIT))
    # the fault injected at qa1 is named first, from the server's record of qa1's run
    assert found["hypotheses"][0]["spec"] == "open:ground"
    assert (found["run_id"], found["record_id"], found["station"]) == (None, uid, "qa1")
    note = (
        f"note: the run of station qa1, record {uid[:12]} was made at station qa1; diagnosed "
        f"with the fixture and instruments of station qa2 ({qa2.path}), planned on this "
        "station's file"
    )
    assert note in err
    assert note in report.stderr  # rig report's diagnosis of it says the same
    # another station's run is named by its station and record id, never the server's number
    assert text.startswith(f"the run of station qa1, record {uid[:12]} (serial U-9, fail)")
    assert "open:ground" in text
    assert good.run_id == 1 and json.loads(own)["run_id"] == 1
    assert json.loads(own)["hypotheses"][0]["spec"] == "none"  # qa2's bench has no fault
    assert "read from the station's own file" in own_err
    assert away == 2 and f"no run with record id starting {uid[:8]}" in away_err
