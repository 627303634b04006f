"""Two benches set up from one disk image: their results files are byte-for-byte copies, so they
share one store id.  Sending to one server, the second copy is refused before anything of it
lands (the first's relay wear and runs stay as they were), with words naming both stations and
the way out; ``rig sync --new-store-id`` gives the copy an id of its own and keeps every run.
Real SQLite files copied on disk, the suite's real PostgreSQL server, read directly."""

from __future__ import annotations

import json
import shutil
import socket
import subprocess
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import psycopg
import pytest
from old_stores import old_server
from polling import wait_for
from postgres_server import Cluster, create_database, drop_database
from test_station_names import add_run, bench_station, server_serials, server_wear, station_file

from rig.cli import main
from rig.config.station import Station
from rig.store import Migrate, ResultStore
from rig.store_copies import NotACopy
from rig.store_postgres import open_postgres
from rig.store_sync import SyncReport, pending_runs, sync

__all__ = ["bench_station"]  # the fixture, shared with test_station_names


def copied(source: ResultStore, folder: Path) -> ResultStore:
    """The file as a disk image carries it to a second bench (closed first: no WAL left)."""
    assert source.path is not None
    path = source.path
    source.close()
    folder.mkdir(parents=True)
    shutil.copyfile(path, folder / "results.sqlite")
    return ResultStore(folder / "results.sqlite")


def run_rows(store: ResultStore) -> list[tuple[int, str, str]]:
    return [(int(r[0]), str(r[1]), str(r[2])) for r in store._db.execute(
        "SELECT id, run_uid, serial FROM runs ORDER BY id"
    )]  # fmt: skip


@pytest.fixture
def remote(pg_database: str) -> Iterator[ResultStore]:
    store = open_postgres(pg_database)
    yield store
    store.close()


@pytest.mark.postgres
def test_a_copied_file_is_refused_and_takes_a_new_id_keeping_every_run(
    tmp_path: Path, pg_database: str, remote: ResultStore
) -> None:
    image = station_file(tmp_path / "image", "qa-b1", "SN-IMAGE", {1: 20})
    assert sync(image, remote).sent == 1  # the bench the image was taken from had sent
    second = copied(image, tmp_path / "clone")
    first = ResultStore(tmp_path / "image" / "results.sqlite")
    try:
        assert first.store_uid() == second.store_uid()  # what cloning a disk does
        add_run(first, "qa-b1", "SN-A", {1: 5})  # lifetime count 25
        add_run(second, "qa-b1", "SN-B", {1: 3})  # lifetime count 23
        assert sync(first, remote, station="qa-b1").sent == 1

        # without the check, the copy's send went through: runs of two benches under one
        # name, and the first's relay wear overwritten with the copy's counts
        refused = sync(second, remote, station="qa-b1")
        assert (refused.sent, refused.waiting) == (0, 1)
        host = socket.gethostname()
        # both copies on this one computer under one name: said as a copy on this computer
        # or a file restored from a backup, not as a disk image, with the commands for both
        assert (
            f"as station 'qa-b1' on host {host!r}, the same station on the same host as this one: "
            "this file was most likely restored from a backup (or copied on this same computer, "
            "or onto a bench cloned from this one's disk image that kept its host name)"
        ) in refused.problem
        assert "most likely copied from one disk image" not in refused.problem
        assert f"store id (starts {second.store_uid()[:8]})" in refused.problem
        assert "`rig sync --station STATION --new-store-id --take-over-name`" in refused.problem
        assert "never take the name over there" in refused.problem
        assert "`rig sync --station STATION --new-store-id` and its own name" in refused.problem
        assert server_wear(pg_database, "qa-b1") == {1: 25}
        assert server_serials(pg_database, "qa-b1") == ["SN-A", "SN-IMAGE"]
        assert sync(first, remote, station="qa-b1").problem == ""  # the first goes on

        before = run_rows(second)
        renewed = sync(second, remote, renew_id=True, station="qa-b1")
        assert second.store_uid() != first.store_uid()
        assert "new store id" in renewed.renewed and first.store_uid()[:8] in renewed.renewed
        # the other copy sends under this name: its claim stays, and the way out is said
        assert "the station name 'qa-b1' stays with the other copy" in renewed.renewed
        assert "--take-over-name" in renewed.renewed
        assert run_rows(second) == before  # no run lost, none renumbered
        # the copy now meets the name check as any second bench would: its name is the first's
        assert "under the station name 'qa-b1' wait" in renewed.held and not renewed.problem
        assert server_wear(pg_database, "qa-b1") == {1: 25}
        assert len(pending_runs(second, remote.store_uid())) == 1  # SN-B waits, not lost
        with pytest.raises(NotACopy, match="no other copy"):  # once is enough
            sync(second, remote, renew_id=True)
    finally:
        first.close()
        second.close()


@pytest.mark.postgres
def test_a_link_lost_after_the_servers_commit_is_not_taken_for_a_copy(
    tmp_path: Path, remote: ResultStore
) -> None:
    """The pass's token is in the file before the server sees it: a file that never heard the
    server's commit still holds it."""
    store = station_file(tmp_path / "b1", "qa-b1", "SN-1", {1: 1})
    try:
        assert sync(store, remote).problem == ""
        # a pass's token, in the file before the server sees it (as check_pass issues it)
        token = store.issue_send_token(remote.store_uid())
        remote._db.execute(  # as the server stands after a commit the station never heard of
            "UPDATE store_senders SET send_token = ? WHERE store_uid = ?",
            (token, store.store_uid()),
        )
        assert sync(store, remote).problem == ""
    finally:
        store.close()


@pytest.mark.postgres
def test_rig_sync_new_store_id_on_a_copy_and_refused_on_the_original(
    tmp_path: Path, pg_database: str, bench_station: Station, capsys: pytest.CaptureFixture[str]
) -> None:
    name = bench_station.name
    folder = bench_station.store_path.parent
    image = station_file(folder, name, "SN-IMAGE", {1: 4})
    remote = open_postgres(pg_database)
    try:
        assert sync(image, remote, station=name).sent == 1
        clone = copied(image, tmp_path / "clone")
        add_run(clone, name, "SN-CLONE", {1: 9})
        assert sync(clone, remote, station=name).sent == 1  # the clone sends first
    finally:
        remote.close()
        clone.close()
    original = ResultStore(bench_station.store_path)
    add_run(original, name, "SN-ORIG", {1: 1})
    original.close()

    args = ["sync", "--station", str(bench_station.path)]
    assert main(args) == 3
    err = capsys.readouterr().err
    assert "shares its store id" in err and "--new-store-id" in err and "Traceback" not in err
    assert server_serials(pg_database, name) == ["SN-CLONE", "SN-IMAGE"]  # nothing more sent

    assert main([*args, "--new-store-id", "--json"]) == 3  # a new id; the name is the clone's
    summary = json.loads(capsys.readouterr().out)
    assert "new store id" in summary["new_store_id"] and "wait: another" in summary["held"]
    assert main([*args, "--new-store-id"]) == 2
    assert "rig: --new-store-id: no other copy of this station's file" in capsys.readouterr().err


def second_server(cluster: Cluster) -> Iterator[str]:
    name = create_database(cluster)
    yield cluster.url(name)
    drop_database(cluster, name)


@pytest.fixture
def other_url(pg_cluster: Cluster) -> Iterator[str]:
    """A second results server: another empty database on the suite's cluster."""
    yield from second_server(pg_cluster)


@pytest.mark.postgres
def test_a_file_sending_to_two_servers_in_turn_is_no_copy_on_either(
    tmp_path: Path, remote: ResultStore, other_url: str
) -> None:
    """Each server keeps its own last token; the file's tokens are kept per server, so going back
    to the first server after the second is not taken for another copy."""
    other = open_postgres(other_url)
    store = station_file(tmp_path / "b1", "qa-b1", "SN-1", {1: 1})
    try:
        assert remote.store_uid() != other.store_uid()
        assert sync(store, remote, station="qa-b1").sent == 1
        add_run(store, "qa-b1", "SN-2", {1: 2})
        assert sync(store, other, station="qa-b1").sent == 2
        add_run(store, "qa-b1", "SN-3", {1: 3})
        back = sync(store, remote, station="qa-b1")
        assert (back.problem, back.sent) == ("", 2)
        assert sync(store, other, station="qa-b1").problem == ""
    finally:
        store.close()
        other.close()


def pg_tool(cluster: Cluster, tool: str, *args: str) -> None:
    done = subprocess.run(
        [str(cluster.bindir / tool), *args], capture_output=True, text=True, timeout=120,
        check=False,
    )  # fmt: skip
    assert done.returncode == 0, done.stderr


@pytest.mark.postgres
def test_a_server_restored_from_a_dump_takes_the_stations_older_token(
    tmp_path: Path, pg_cluster: Cluster, pg_database: str, remote: ResultStore, other_url: str
) -> None:
    """The server restored from last night's dump (pg_dump, pg_restore) holds a token the file
    issued two passes ago: the file's own, so the station sends on, not refused as a copy."""
    store = station_file(tmp_path / "b1", "qa-b1", "SN-1", {1: 1})
    dump = tmp_path / "server.dump"
    try:
        assert sync(store, remote, station="qa-b1").sent == 1
        pg_tool(pg_cluster, "pg_dump", "-Fc", "-f", str(dump), pg_database)
        add_run(store, "qa-b1", "SN-2", {1: 2})
        assert sync(store, remote, station="qa-b1").sent == 1  # lost with the server's disk
        pg_tool(pg_cluster, "pg_restore", "--no-owner", "-d", other_url, str(dump))
        restored = open_postgres(other_url)
        try:
            assert restored.store_uid() == remote.store_uid()  # the same server, put back
            add_run(store, "qa-b1", "SN-3", {1: 3})
            after = sync(store, restored, station="qa-b1")
            assert (after.problem, after.sent) == ("", 1)
            assert server_serials(other_url, "qa-b1") == ["SN-1", "SN-3"]
            assert sync(store, restored, station="qa-b1").problem == ""  # and from then on
        finally:
            restored.close()
    finally:
        store.close()


def waiting_on_locks(url: str) -> int:
    with psycopg.connect(url) as conn:
        row = conn.execute(
            "SELECT count(*) FROM pg_stat_activity WHERE datname = current_database()"
            " AND wait_event_type = 'Lock'"
        ).fetchone()
    return 0 if row is None else int(row[0])


def passes_at_once(url: str, files: list[ResultStore], name: str) -> list[SyncReport]:
    """Two send passes whose reads of the server both come before either's write (what two
    benches starting a pass in the same moment do): a third connection holds store_senders in
    SHARE mode, which lets them read it and stops their writes, until both wait on it."""
    remotes = [open_postgres(url) for _ in files]
    try:
        with psycopg.connect(url) as holder, ThreadPoolExecutor(len(files)) as pool:
            holder.execute("LOCK TABLE store_senders IN SHARE MODE")
            passes = [
                pool.submit(sync, f, r, station=name) for f, r in zip(files, remotes, strict=True)
            ]
            assert wait_for(lambda: waiting_on_locks(url) == len(files), 20)
            holder.commit()
            return [p.result(timeout=60) for p in passes]
    finally:
        for r in remotes:
            r.close()


@pytest.mark.postgres
@pytest.mark.parametrize("sent_before", [True, False], ids=["server-has-a-token", "first-pass"])
def test_two_copies_sending_at_the_same_moment_one_gets_through(
    tmp_path: Path, pg_database: str, remote: ResultStore, sent_before: bool
) -> None:
    """Both copies read the same server token (or none) before either notes its own: the check
    and the change are one statement, so the second's change finds the first's token, not the
    one it read, and it is refused."""
    image = station_file(tmp_path / "image", "qa-b1", "SN-IMAGE", {1: 20})
    if sent_before:
        assert sync(image, remote).sent == 1
    image.store_uid()  # the file's id made before the image was taken (it had sent elsewhere)
    remote.store_uid()  # the server's identity made: the passes race only on their tokens
    second = copied(image, tmp_path / "clone")
    first = ResultStore(tmp_path / "image" / "results.sqlite")
    try:
        add_run(first, "qa-b1", "SN-A", {1: 5})
        add_run(second, "qa-b1", "SN-B", {1: 3})
        reports = passes_at_once(pg_database, [first, second], "qa-b1")
        refused = [r for r in reports if "shares its store id" in r.problem]
        assert len(refused) == 1, [r.problem for r in reports]
        landed = set(server_serials(pg_database, "qa-b1")) - {"SN-IMAGE"}
        assert len(landed) == 1, landed  # one bench's runs, not both mixed
        assert server_wear(pg_database, "qa-b1") in ({1: 25}, {1: 23})
    finally:
        first.close()
        second.close()


@pytest.mark.postgres
def test_two_passes_of_one_file_at_the_same_moment_both_go_on(
    tmp_path: Path, pg_database: str, remote: ResultStore
) -> None:
    """A run's send and a cron sync on one bench: each issued its own token in the file before
    either reached the server, so the one that finds the other's token there knows it is this
    file's and goes on."""
    store = station_file(tmp_path / "b1", "qa-b1", "SN-1", {1: 1})
    again = ResultStore(tmp_path / "b1" / "results.sqlite")  # the second process's connection
    try:
        assert sync(store, remote).sent == 1
        add_run(store, "qa-b1", "SN-2", {1: 2})
        reports = passes_at_once(pg_database, [store, again], "qa-b1")
        assert [r.problem for r in reports] == ["", ""]
        assert server_serials(pg_database, "qa-b1") == ["SN-1", "SN-2"]
    finally:
        store.close()
        again.close()


@pytest.mark.postgres
def test_a_station_file_restored_from_a_backup_is_told_so_and_sends_after_its_commands(
    tmp_path: Path, pg_database: str, remote: ResultStore
) -> None:
    folder = tmp_path / "b1"
    store = station_file(folder, "qa-b1", "SN-1", {1: 1})
    assert sync(store, remote, station="qa-b1").sent == 1
    store.close()
    shutil.copyfile(folder / "results.sqlite", tmp_path / "backup.sqlite")  # last week's backup
    store = ResultStore(folder / "results.sqlite")
    add_run(store, "qa-b1", "SN-2", {1: 2})
    assert sync(store, remote, station="qa-b1").sent == 1
    store.close()
    for stale in folder.iterdir():  # the disk replaced, the backup put back
        stale.unlink()
    shutil.copyfile(tmp_path / "backup.sqlite", folder / "results.sqlite")
    store = ResultStore(folder / "results.sqlite")
    try:
        add_run(store, "qa-b1", "SN-3", {1: 3})
        refused = sync(store, remote, station="qa-b1")
        assert (refused.sent, refused.waiting) == (0, 1)
        assert "most likely restored from a backup" in refused.problem
        assert "most likely copied from one disk image" not in refused.problem
        command = "rig sync --station STATION --new-store-id --take-over-name"
        assert f"`{command}`" in refused.problem
        # the command it gives: a new id, the name taken over, the waiting run sent
        after = sync(store, remote, "qa-b1", renew_id=True, station="qa-b1")
        assert (after.problem, after.held, after.sent) == ("", "", 1)
        assert server_serials(pg_database, "qa-b1") == ["SN-1", "SN-2", "SN-3"]
    finally:
        store.close()


@pytest.mark.postgres
def test_renamed_clones_that_both_sent_before_the_upgrade_each_keep_their_name(
    tmp_path: Path, pg_database: str
) -> None:
    """Two clones renamed (qa-a, qa-b) that sent before the server kept tokens: the server's
    schema 7 claimed both names for their one store id.  After the upgrade the second is refused
    as a copy; its new store id takes its own name's claim along (the other copy sends under
    another), so its runs are sent, not held under its own name."""
    image = ResultStore(tmp_path / "image" / "results.sqlite")
    shared = image.store_uid()
    clone = copied(image, tmp_path / "clone")
    first = ResultStore(tmp_path / "image" / "results.sqlite")
    old_server(pg_database, 7)
    with psycopg.connect(pg_database) as conn:  # the claims the schema-7 rig made as they sent
        conn.execute(
            "INSERT INTO station_names (station, store_uid, claimed_at) VALUES"
            " ('qa-a', %s, '2026-01-02'), ('qa-b', %s, '2026-01-02')",
            (shared, shared),
        )
    remote = open_postgres(pg_database, Migrate.ALWAYS)  # the upgrade to schema 8
    try:
        add_run(first, "qa-a", "SN-A", {1: 5})
        add_run(clone, "qa-b", "SN-B", {1: 3})
        assert sync(first, remote, station="qa-a").sent == 1
        refused = sync(clone, remote, station="qa-b")
        assert "disk image" in refused.problem and "(this is station 'qa-b' on" in refused.problem

        renewed = sync(clone, remote, renew_id=True, station="qa-b")
        assert (renewed.problem, renewed.held, renewed.sent) == ("", "", 1)
        assert "its station name 'qa-b' with it" in renewed.renewed
        assert server_serials(pg_database, "qa-b") == ["SN-B"]
        with psycopg.connect(pg_database) as conn:
            claims = dict(conn.execute("SELECT station, store_uid FROM station_names").fetchall())
        assert claims == {"qa-a": shared, "qa-b": clone.store_uid()}
        assert sync(first, remote, station="qa-a").problem == ""  # the first goes on as it was
    finally:
        remote.close()
        first.close()
        clone.close()
