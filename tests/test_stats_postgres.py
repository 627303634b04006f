"""The statistics' SQL on a real PostgreSQL server: the demo's runs sent to the server give the
same yield, Pareto and capability figures as the station's own SQLite file."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from rig.demo import CASES, run_demo
from rig.stats.filters import make_filter
from rig.stats.from_store import shop_stats
from rig.store import ResultStore
from rig.store_postgres import open_postgres
from rig.store_sync import sync

pytestmark = pytest.mark.postgres


def same(a: object, b: object) -> bool:
    """Equal data; floats to 1e-6: the engines add up in their own order, and a variance from
    sums carries a relative error near 1e-16 x ((mean - limit) / std)^2 (a drop step: ~1e-8)."""
    if isinstance(a, float) and isinstance(b, float):
        return (math.isnan(a) and math.isnan(b)) or math.isclose(a, b, rel_tol=1e-6, abs_tol=1e-12)
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(same(a[k], b[k]) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(same(x, y) for x, y in zip(a, b, strict=True))
    return a == b


def test_stats_agree_between_sqlite_and_postgresql(tmp_path: Path, pg_database: str) -> None:
    store_path, _ = run_demo(tmp_path / "demo", cases=CASES)
    local = ResultStore(store_path)
    remote = open_postgres(pg_database)
    try:
        assert sync(local, remote).sent == 10
        for where in (
            make_filter(),
            make_filter(serial_prefix="HAR-"),
            make_filter(sequence="pressure-circuit-check", until="2999-12-31"),
        ):
            mine, theirs = shop_stats(local, where).to_dict(), shop_stats(remote, where).to_dict()
            assert mine["runs"] > 0
            assert same(mine, theirs), (mine, theirs)
    finally:
        local.close()
        remote.close()
