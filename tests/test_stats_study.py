"""Gauge-study mode on the virtual bench: `rig run --study-part --study-trial` records the part
and trial with the run, and `rig stats grr` analyses the stored study (operator from the run)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_bench

from rig.cli import main
from rig.stats.filters import RunFilter
from rig.stats.from_store import shop_stats
from rig.stats.grr import Observation, gauge_rr
from rig.store import ResultStore

SEQUENCE = SEQUENCES / "ntc-sender-screen.toml"
STEP = "sender-4wire"
# two invented parts: a good sender and one that reads 2 % high (virtual bench faults)
PARTS = {"P1": (), "P2": ("drift:sender=+2%",)}


def test_stored_study_in_one_store_matches_the_values_read_back(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    store_path = tmp_path / "shared" / "results.sqlite"
    for part, faults in PARTS.items():
        with shipped_bench("ntc-sender", faults, folder=tmp_path / part) as (bench, _):
            # both parts' benches record into one data folder, as one real station would
            station_file = bench.write_station(
                tmp_path / part / "study-station.toml", data_dir=str(store_path.parent)
            )
            for operator in ("ann", "ben"):
                for trial in (1, 2):
                    assert main(
                        [
                            "run", str(SEQUENCE), "--station", str(station_file),
                            "--serial", f"STUDY-{part}", "--operator", operator,
                            "--study-part", part, "--study-trial", str(trial), "--yes", "--json",
                        ]
                    ) in (0, 1)  # fmt: skip
    capsys.readouterr()
    assert store_path.exists()
    code = main(
        ["stats", "grr", "--store", str(store_path), "--sequence", "ntc-sender-screen",
         "--step", STEP, "--json"]
    )  # fmt: skip
    assert code == 0
    data = json.loads(capsys.readouterr().out)
    assert (data["parts"], data["operators"], data["trials"]) == (2, 2, 2)
    # the same study assembled independently from the stored run records
    store = ResultStore(store_path)
    try:
        observations = [
            Observation(
                r["study_part"],
                r["operator"],
                r["study_trial"],
                next(s["value"] for s in store.steps(r["id"]) if s["step_id"] == STEP),
            )
            for r in store.runs(limit=100)
        ]
        # study runs stay out of production statistics
        assert shop_stats(store, RunFilter()).runs == 0
    finally:
        store.close()
    assert sorted((o.part, o.operator, o.trial) for o in observations) == sorted(
        (p, o, t) for p in PARTS for o in ("ann", "ben") for t in (1, 2)
    )
    expected = gauge_rr(observations)
    assert data["percent_grr"] == pytest.approx(expected.percent_grr, rel=1e-12)
    assert data["ndc"] == expected.ndc
    # the 2 % drift makes part-to-part variation dominate the bench meter's noise
    assert data["percent_grr"] < 10.0


def test_study_options_are_checked(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    base = ["run", str(SEQUENCE), "--station", str(tmp_path / "none.toml"), "--serial", "S"]
    assert main([*base, "--study-part", "P1"]) == 2
    assert "--study-part needs --study-trial" in capsys.readouterr().err
    assert main([*base, "--study-part", "P1", "--study-trial", "0", "--operator", "a"]) == 2
    assert "expected a trial number of 1 or more, got 0" in capsys.readouterr().err
    assert main([*base, "--study-part", "P1", "--study-trial", "1"]) == 2
    assert "needs --operator" in capsys.readouterr().err
    empty = tmp_path / "empty.sqlite"
    ResultStore(empty).close()
    assert main(["stats", "grr", "--store", str(empty), "--sequence", "x", "--step", "y"]) == 2
    assert "no study-mode runs of sequence 'x'" in capsys.readouterr().err
    assert main(["stats", "grr", "--store", str(empty)]) == 2
    assert "needs --csv FILE, or" in capsys.readouterr().err
