"""Two benches set up from one disk image: their results files are byte-for-byte copies, so they
share one store id.  Sending to one server, the second copy is refused before anything of it
lands (the first's relay wear and runs stay as they were), with words naming both stations and
the way out; ``rig sync --new-store-id`` gives the copy an id of its own and keeps every run.
Real SQLite files copied on disk, the suite's real PostgreSQL server, read directly."""

from __future__ import annotations

import json
import shutil
import socket
from collections.abc import Iterator
from pathlib import Path

import pytest
from test_station_names import add_run, bench_station, server_serials, server_wear, station_file

from rig.cli import main
from rig.config.station import Station
from rig.store import ResultStore
from rig.store_copies import NotACopy
from rig.store_postgres import open_postgres
from rig.store_sync import pending_runs, sync

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
        assert f"as station 'qa-b1' on host {host!r} (this is station 'qa-b1'" in refused.problem
        assert f"store id (starts {second.store_uid()[:8]})" in refused.problem
        assert "rig sync --station STATION --new-store-id" in refused.problem
        assert server_wear(pg_database, "qa-b1") == {1: 25}
        assert server_serials(pg_database, "qa-b1") == ["SN-A", "SN-IMAGE"]
        assert sync(first, remote, station="qa-b1").problem == ""  # the first goes on

        before = run_rows(second)
        renewed = sync(second, remote, renew_id=True, station="qa-b1")
        assert second.store_uid() != first.store_uid()
        assert "new store id" in renewed.renewed and first.store_uid()[:8] in renewed.renewed
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
        token = uuid_of_next_pass(store)
        remote._db.execute(  # as the server stands after a commit the station never heard of
            "UPDATE store_senders SET send_token = ? WHERE store_uid = ?",
            (token, store.store_uid()),
        )
        assert sync(store, remote).problem == ""
    finally:
        store.close()


def uuid_of_next_pass(store: ResultStore) -> str:
    """Start a pass in the file, as ``check_pass`` does before it reaches the server."""
    token = "feedface" * 4
    store._db.execute("UPDATE store_identity SET next_token = ?", (token,))
    return token


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
