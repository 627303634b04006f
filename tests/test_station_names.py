"""Two stations' files sending under one station name to one server: the second is refused, its
runs wait in its own file, and the first's relay wear and runs on the server are left as they
were; a replaced file takes its name over only when asked (``rig sync --take-over-name``).  Real
SQLite files, the suite's real PostgreSQL server; every check reads the server directly."""

from __future__ import annotations

import json
from collections.abc import Iterator
from contextlib import ExitStack
from pathlib import Path

import psycopg
import pytest
from bench_helpers import shipped_bench

from rig.cli import main
from rig.config.station import Station
from rig.station_names import NameTaken
from rig.store import ResultStore, RunHeader
from rig.store_postgres import open_postgres
from rig.store_sync import pending_runs, send_run, sync


def station_file(folder: Path, name: str, serial: str, relays: dict[int, int]) -> ResultStore:
    """A station's own file (real SQLite) holding one finished run under ``name``, whose relay
    operations are the station's lifetime counts."""
    store = ResultStore(folder / "results.sqlite")
    add_run(store, name, serial, relays)
    return store


def add_run(store: ResultStore, name: str, serial: str, relays: dict[int, int]) -> None:
    header = RunHeader(serial, "sender-check", "h", "/p", name, "op")
    run_id = store.start_run(header)
    store.finish_run(run_id, status="complete", verdict="pass", relay_operations=relays)


def server_wear(url: str, name: str) -> dict[int, int]:
    with psycopg.connect(url) as conn:
        rows = conn.execute(
            "SELECT relay, operations FROM relay_wear WHERE station = %s", (name,)
        ).fetchall()
    return {int(r[0]): int(r[1]) for r in rows}


def server_serials(url: str, name: str) -> list[str]:
    with psycopg.connect(url) as conn:
        rows = conn.execute(
            "SELECT serial FROM runs WHERE station = %s ORDER BY serial", (name,)
        ).fetchall()
    return [str(r[0]) for r in rows]


@pytest.mark.postgres
def test_a_second_file_under_a_claimed_name_is_refused_and_a_replaced_file_takes_it_over(
    tmp_path: Path, pg_database: str
) -> None:
    with ExitStack() as stack:
        remote = open_postgres(pg_database)
        stack.callback(remote.close)

        def station(folder: str, name: str, serial: str, relays: dict[int, int]) -> ResultStore:
            store = station_file(tmp_path / folder, name, serial, relays)
            stack.callback(store.close)
            return store

        first = station("b1", "qa-b1", "SN-1", {1: 20, 2: 8})
        assert sync(first, remote).sent == 1
        assert server_wear(pg_database, "qa-b1") == {1: 20, 2: 8}

        second = station("dup", "qa-b1", "SN-DUP", {1: 2})
        refused = sync(second, remote)
        assert (refused.sent, refused.waiting, refused.problem) == (0, 1, "")
        held = refused.held
        assert "1 run(s) recorded under the station name 'qa-b1' wait" in held
        assert f"another station's file (store id starts {first.store_uid()[:8]})" in held
        assert "give this station its own name in its station file" in held
        assert "--take-over-name" in held
        # the refusal itself says the fact in the same words, the ways out left to the pass
        with pytest.raises(NameTaken) as taken_name:
            send_run(second, remote, pending_runs(second, None)[0][0], second.store_uid())
        assert str(taken_name.value) == (
            f"another station's file (store id starts {first.store_uid()[:8]}) sends under the "
            f"station name 'qa-b1' to the results server {remote.where}: this station's runs "
            "under that name wait in its own file"
        )
        # the first bench's wear and runs as they were; the second's run waits in its file
        assert server_wear(pg_database, "qa-b1") == {1: 20, 2: 8}
        assert server_serials(pg_database, "qa-b1") == ["SN-1"]
        assert len(pending_runs(second, remote.store_uid())) == 1
        add_run(first, "qa-b1", "SN-2", {1: 1})  # the owner goes on sending as before
        assert sync(first, remote).sent == 1
        assert server_wear(pg_database, "qa-b1") == {1: 21, 2: 8}

        fresh = sync(station("b3", "qa-b3", "SN-3", {4: 5}), remote)
        assert (fresh.sent, fresh.waiting, fresh.problem) == (1, 0, "")
        assert server_wear(pg_database, "qa-b3") == {4: 5}

        replaced = station("new-disk", "qa-b1", "SN-4", {1: 3})
        taken = sync(replaced, remote, take_over_name="qa-b1")
        assert (taken.sent, taken.waiting, taken.problem) == (1, 0, "")
        assert first.store_uid()[:8] in taken.took_over
        assert server_wear(pg_database, "qa-b1") == {1: 3, 2: 8}  # the new file's counts
        assert server_serials(pg_database, "qa-b1") == ["SN-1", "SN-2", "SN-4"]
        add_run(first, "qa-b1", "SN-5", {1: 1})
        assert "'qa-b1' wait" in sync(first, remote).held  # the old file no longer holds it
        assert server_serials(pg_database, "qa-b1") == ["SN-1", "SN-2", "SN-4"]


def claim_name(folder: Path, name: str, url: str) -> None:
    """Another bench's file sends a run under ``name`` (relay 1 at 28), claiming it."""
    other = station_file(folder, name, "SN-OTHER", {1: 28})
    remote = open_postgres(url)
    try:
        assert sync(other, remote).sent == 1
    finally:
        remote.close()
        other.close()


@pytest.fixture
def bench_station(
    tmp_path: Path, pg_database: str, monkeypatch: pytest.MonkeyPatch
) -> Iterator[Station]:
    monkeypatch.setenv("RIG_DATABASE_URL", pg_database)
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        yield station


@pytest.mark.postgres
def test_rig_sync_exits_3_on_a_claimed_name_and_takes_it_over_when_asked(
    tmp_path: Path, pg_database: str, bench_station: Station, capsys: pytest.CaptureFixture[str]
) -> None:
    name = bench_station.name
    claim_name(tmp_path / "other", name, pg_database)
    bench_station.store_path.parent.mkdir(parents=True, exist_ok=True)
    own = station_file(bench_station.store_path.parent, name, "SN-OWN", {1: 2})
    own.close()

    args = ["sync", "--station", str(bench_station.path)]
    assert main(args) == 3  # as for a server it cannot use
    err = capsys.readouterr().err
    assert "1 run(s) recorded under the station name" in err
    assert "give this station its own name" in err
    assert "Traceback" not in err
    assert server_wear(pg_database, name) == {1: 28}

    assert main([*args, "--take-over-name", "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    assert summary["sent"] == 1 and summary["waiting"] == 0 and summary["problem"] is None
    assert "taken over" in summary["took_over"]
    assert server_wear(pg_database, name) == {1: 2}
    assert server_serials(pg_database, name) == ["SN-OTHER", "SN-OWN"]


@pytest.mark.postgres
def test_a_renamed_station_sends_its_new_runs_and_says_each_time_which_wait(
    tmp_path: Path, pg_database: str
) -> None:
    """Runs under a name another file holds wait; they neither hold back the runs recorded
    under the station's new name nor its relay wear under it, and every send says they wait."""
    with ExitStack() as stack:
        remote = open_postgres(pg_database)
        stack.callback(remote.close)
        owner = station_file(tmp_path / "owner", "qa-b1", "SN-1", {1: 20})
        stack.callback(owner.close)
        assert sync(owner, remote).sent == 1
        second = station_file(tmp_path / "second", "qa-b1", "SN-2", {1: 3})
        stack.callback(second.close)
        assert sync(second, remote).sent == 0

        add_run(second, "qa-b2", "SN-3", {1: 4})  # the station given its own name
        for _ in range(2):  # said at each send, not once
            report = sync(second, remote)
            assert (report.waiting, report.problem) == (1, "")
            assert report.held.startswith("1 run(s) recorded under the station name 'qa-b1' wait")
            assert owner.store_uid()[:8] in report.held and "--take-over-name" in report.held
            assert "qa-b1' wait" in report.describe()
        assert report.sent == 0  # the first pass sent SN-3
        assert server_serials(pg_database, "qa-b2") == ["SN-3"]
        assert server_wear(pg_database, "qa-b2") == {1: 4}
        assert server_wear(pg_database, "qa-b1") == {1: 20}  # the owner's, untouched


@pytest.mark.postgres
def test_rig_run_ends_saying_which_runs_wait_under_a_name_another_file_holds(
    tmp_path: Path, pg_database: str, bench_station: Station, capsys: pytest.CaptureFixture[str]
) -> None:
    from bench_helpers import SEQUENCES

    claim_name(tmp_path / "other", "qa-b1", pg_database)
    bench_station.store_path.parent.mkdir(parents=True, exist_ok=True)
    station_file(bench_station.store_path.parent, "qa-b1", "SN-OLD", {1: 2}).close()

    sequence = SEQUENCES / "temp-circuit-check.toml"
    args = ["run", str(sequence), "--station", str(bench_station.path), "--serial", "SN-NEW"]
    main(args)
    said = capsys.readouterr()
    text = said.out + said.err
    assert "1 run(s) sent to the results server" in text  # the run itself, under its own name
    assert "1 run(s) recorded under the station name 'qa-b1' wait" in text
    assert "--take-over-name" in text and "Traceback" not in text
    assert server_serials(pg_database, bench_station.name) == ["SN-NEW"]
