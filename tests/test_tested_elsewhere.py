"""A unit tested first at another bench is said before its run at this one: ``rig run`` asks the
results server, on the connection the send before the run opens, for the unit's runs of the
sequence that other stations made, and names the station.  With the server out of reach it says
what the station's own file says, and the run waits on the network no longer than before.  Two
real stations on virtual benches and the suite's real PostgreSQL server; serials invented.
A retest is normal and is not refused (common practice, no published source)."""

from __future__ import annotations

import socket
import subprocess
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import psycopg
import pytest
from bench_helpers import SEQUENCES
from postgres_server import Cluster
from test_fleet_diagnosis import two_benches
from test_store_sync import rig_cli

from rig.config.station import Station
from rig.runner import load_plan, run_plan

pytestmark = pytest.mark.postgres
SEQUENCE = SEQUENCES / "temp-circuit-check.toml"


def run_at(station: Station, serial: str, env: dict[str, str]) -> str:
    done: subprocess.CompletedProcess[str] = rig_cli(
        ["run", str(SEQUENCE), "--station", str(station.path), "--serial", serial], env
    )
    assert done.returncode == 0, done.stderr  # said, never refused
    return done.stdout


@contextmanager
def mute_server() -> Iterator[tuple[int, list[socket.socket]]]:
    """A port that takes connections and never answers (a server that hangs), and the
    connections it took."""
    listener = socket.create_server(("127.0.0.1", 0))
    taken: list[socket.socket] = []

    def take() -> None:
        while True:
            try:
                taken.append(listener.accept()[0])
            except OSError:
                return

    threading.Thread(target=take, daemon=True).start()
    try:
        yield listener.getsockname()[1], taken
    finally:
        listener.close()
        for conn in taken:
            conn.close()


def test_a_unit_tested_at_another_station_is_said_with_that_station(
    tmp_path: Path, pg_cluster: Cluster, pg_database: str
) -> None:
    with two_benches(tmp_path, pg_cluster, pg_database) as (qa1, qa2, env):
        plan = load_plan(SEQUENCE, qa1)
        for _ in range(2):
            run_plan(plan, "U-7")  # each sent to the server after its run
        with psycopg.connect(pg_database) as conn:
            latest = conn.execute("SELECT run_uid FROM runs ORDER BY id DESC LIMIT 1").fetchone()
        assert latest is not None
        uid = str(latest[0])
        first = run_at(qa2, "U-7", env)
        second = run_at(qa2, "U-7", env)
        never = run_at(qa2, "N-1", env)
        with mute_server() as (port, taken):
            mute = f"postgresql://nobody@127.0.0.1:{port}/x?connect_timeout=1&sslmode=disable"
            cut_off = run_at(qa2, "U-7", {**env, "RIG_DATABASE_URL": mute})
            tries = len(taken)
    elsewhere = (
        f"note: U-7 has 2 earlier runs of temp-circuit-check at station qa1; the latest: "
        f"station qa1, record {uid[:12]}, pass (complete), started "
    )
    # the first time at qa2: qa1's runs are said, before the run starts
    assert elsewhere in first and "on this station" not in first
    assert first.index(elsewhere) < first.index("record: run 1")
    # a retest at qa2: its own run from its own file, and qa1's (not qa2's own, sent since)
    assert "note: U-7 has an earlier run of temp-circuit-check on this station" in second
    assert elsewhere in second
    assert "note:" not in never
    # the server hangs: what the station's own file says, nothing more, and no connection
    # beyond the one the send before the run made (the send after is not tried either)
    assert "on this station" in cut_off and "at station qa1" not in cut_off
    assert tries == 1
