"""A station clock that is wrong: a run started while the clock is behind the newest run in the
station's own file is warned about (and still run), and a station clock far from the results
server's is named.  A real SQLite file on a virtual bench, and the suite's real PostgreSQL
server's own clock."""

from __future__ import annotations

import datetime as dt
import sqlite3
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_bench, shipped_plan

from rig.cli import main
from rig.runner import run_plan
from rig.station_clock import SKEW_ALLOWED, skew, went_back

NOW = dt.datetime(2026, 3, 4, 12, 0, tzinfo=dt.UTC)


def test_a_clock_behind_the_newest_run_is_named_with_both_times() -> None:
    # the dates are invented; the rule is ours: warn when now is before the newest start
    assert went_back("2026-03-04T11:59:59.000+00:00", NOW) == ""
    assert went_back(None, NOW) == "" and went_back("not a time", NOW) == ""
    text = went_back("2027-04-08T09:30:00.000+00:00", NOW)
    assert "2026-03-04 12:00 UTC" in text and "2027-04-08 09:30 UTC" in text


def test_clocks_a_few_minutes_apart_pass_and_farther_are_named() -> None:
    assert skew(NOW, NOW + SKEW_ALLOWED) == ""
    assert "400 days behind" in skew(NOW, NOW - dt.timedelta(days=400))
    assert "3 hours ahead of" in skew(NOW, NOW + dt.timedelta(hours=3))


def test_a_run_started_before_the_newest_run_in_the_file_is_warned_and_run(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    monkeypatch.delenv("RIG_DATABASE_URL", raising=False)
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        plan = shipped_plan("temp-circuit-check", station)
        assert not run_plan(plan, "CLK-1").warnings
        future = (dt.datetime.now(dt.UTC) + dt.timedelta(days=400)).isoformat(
            timespec="milliseconds"
        )
        db = sqlite3.connect(station.store_path)  # as a run made while the clock ran ahead
        db.execute("UPDATE runs SET started_at=?", (future,))
        db.commit()
        db.close()
        second = run_plan(plan, "CLK-2")
        seq = str(SEQUENCES / "temp-circuit-check.toml")
        assert main(["run", seq, "--station", str(station.path), "--serial", "CLK-3"]) == 0
    printed = capsys.readouterr().out
    assert second.status == "complete"  # warned, not refused
    said = [w for w in second.warnings if "earlier than the start of the newest run" in w]
    assert len(said) == 1 and future[:10] in said[0]
    assert "earlier than the start of the newest run" in printed


@pytest.mark.postgres
def test_the_servers_own_clock_is_read_and_compared(pg_database: str) -> None:
    from rig.store_postgres import open_postgres

    server = open_postgres(pg_database)
    try:
        server_now = server.server_time()
    finally:
        server.close()
    assert server_now is not None and server_now.tzinfo is not None
    here = dt.datetime.now(dt.UTC)
    assert skew(server_now, here) == ""  # one machine, one clock
    assert "400 days behind" in skew(server_now, here - dt.timedelta(days=400))
