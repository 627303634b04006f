"""A screen's decision on a returned unit, stated by the run's own record (``rig run``, ``rig
report`` in HTML, CSV and JSON) and counted by ``rig stats``: real runs of the shipped NTC sender
screen on the virtual bench, each decision worked out again here from the stored reading, its
limits and its expanded uncertainty."""

from __future__ import annotations

import contextlib
import csv
import io
import json
from collections import Counter
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_bench

from rig.cli import main
from rig.config.station import load_station
from rig.demo import HARNESS_CASES, run_demo
from rig.stats.filters import RunFilter
from rig.stats.from_store import shop_stats
from rig.store import ResultStore

SCREEN = str(SEQUENCES / "ntc-sender-screen.toml")
# the sender as returned: good, drifted to its 5 % tolerance edge, drifted far beyond it
UNITS = {"S-GOOD": (), "S-EDGE": ("drift:sender=+5%",), "S-BAD": ("drift:sender=+20%",)}


def decided_from(step: dict[str, object]) -> str:
    """The decision on a reading, from its limits and U alone.  ILAC-G8:09/2019, guarded
    acceptance: a reading within U of a limit supports neither side (inconclusive); beyond U
    outside the limits the fault is confirmed; beyond U inside them no fault is found."""
    value, low, high, u = (float(step[k]) for k in ("value", "low", "high", "expanded_u"))  # type: ignore[arg-type]
    if min(abs(value - low), abs(value - high)) <= u:
        return "inconclusive"
    return "no fault found" if low < value < high else "confirmed failure"


@pytest.fixture(scope="module")
def screened(
    tmp_path_factory: pytest.TempPathFactory,
) -> tuple[Path, dict[str, tuple[int, str, str]]]:
    """(station file, {serial: (run id, what rig run printed, decision from the stored step)})."""
    folder = tmp_path_factory.mktemp("screen")
    printed: dict[str, str] = {}
    for serial, faults in UNITS.items():
        with shipped_bench("ntc-sender", faults, folder=folder) as (_, station):
            args = ["run", SCREEN, "--station", str(station.path), "--serial", serial, "--yes"]
            capture = io.StringIO()
            with contextlib.redirect_stdout(capture):
                main(args)
            printed[serial] = capture.getvalue()
    store = ResultStore(station.store_path)
    try:
        found = {}
        for run in store.runs(limit=10):
            (step,) = [s for s in store.steps(run["id"]) if s["step_id"] == "sender-resistance"]
            found[run["serial"]] = (run["id"], printed[run["serial"]], decided_from(step))
    finally:
        store.close()
    return station.path, found


def test_rig_run_prints_the_decision_and_what_it_means(
    screened: tuple[Path, dict[str, tuple[int, str, str]]],
) -> None:
    _, found = screened
    # the bench gave the three cases, as the stored readings show
    assert {serial: d for serial, (_, _, d) in found.items()} == {
        "S-GOOD": "no fault found",
        "S-EDGE": "inconclusive",
        "S-BAD": "confirmed failure",
    }
    for _, text, decision in found.values():
        (line,) = [x for x in text.splitlines() if x.startswith("screen decision:")]
        assert line.startswith(f"screen decision: {decision} (")
    edge = found["S-EDGE"][1]
    # the edge case names its step near the limit, its margin and its U
    (said,) = [x for x in edge.splitlines() if x.startswith("screen decision:")]
    assert " its nearer limit, within its U of " in said and "retest" in said, said
    # the sender sits in a well the bench Pt100 reads: its caution comes before the run (the
    # usual cautions for hot liquids, common practice, no published source)
    assert "Caution: a heated well or liquid bath burns" in edge


def test_rig_run_json_carries_the_decision(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with shipped_bench("ntc-sender", UNITS["S-BAD"], folder=tmp_path) as (_, station):
        args = ["run", SCREEN, "--station", str(station.path), "--serial", "J-1", "--yes"]
        assert main([*args, "--json"]) == 1
    data = json.loads(capsys.readouterr().out)
    assert data["screen_decision"]["decision"] == "confirmed failure"
    assert "beyond the uncertainty" in data["screen_decision"]["meaning"]


def test_every_report_states_the_decision_rig_stats_counts(
    screened: tuple[Path, dict[str, tuple[int, str, str]]], capsys: pytest.CaptureFixture[str]
) -> None:
    station, found = screened
    for run_id, _, decision in found.values():
        base = ["report", str(run_id), "--station", str(station), "--out", "-"]
        assert main([*base, "--format", "json"]) == 0
        assert json.loads(capsys.readouterr().out)["screen_decision"]["decision"] == decision
        assert main([*base, "--format", "csv"]) == 0
        rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
        assert {r["screen_decision"] for r in rows} == {decision}
        assert all(r["screen_decision_meaning"] for r in rows)
        assert main(base) == 0
        assert f'<strong id="screen-decision">{decision}</strong>' in capsys.readouterr().out
    # the tally of rig stats is the same decisions, one per unit
    store = ResultStore(load_station(station).store_path)
    try:
        screens = shop_stats(store, RunFilter()).screens.iloc[0]
    finally:
        store.close()
    tally = Counter(d for _, _, d in found.values())
    assert screens["confirmed_failure"] == tally["confirmed failure"] == 1
    assert screens["no_fault_found"] == tally["no fault found"] == 1
    assert screens["inconclusive"] == tally["inconclusive"] == 1


def test_a_harness_proof_states_no_screen_decision(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # a harness proof ships or rejects a harness; rig stats lists no screen of it, nor does its
    # record state one
    run_demo(tmp_path, cases=HARNESS_CASES[:1])
    base = ["report", "1", "--station", str(tmp_path / "station-harness.toml"), "--out", "-"]
    assert main([*base, "--format", "json"]) == 0
    assert json.loads(capsys.readouterr().out)["screen_decision"] is None
    assert main(base) == 0
    assert "Screen decision" not in capsys.readouterr().out


def test_a_no_to_the_set_up_question_decides_nothing_and_fails_no_part(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    """A good sender whose placing question was answered no: the prompt's step fails (its
    default), every reading passes.  An operator's answer is no reading beyond any uncertainty
    (ILAC-G8:09/2019 decides on measurements), so the screen decides nothing, and the tally
    counts no part failure: the run is listed apart, as an operator's no."""
    with shipped_bench("ntc-sender", (), folder=tmp_path) as (_, station):
        monkeypatch.setattr("sys.stdin", io.StringIO("n\n"))
        args = ["run", SCREEN, "--station", str(station.path), "--serial", "N-1"]
        assert main(args) == 1  # the run's verdict is the prompt's fail, as before
        printed = capsys.readouterr().out
        (line,) = [x for x in printed.splitlines() if x.startswith("screen decision:")]
        assert line.startswith("screen decision: undecided (an operator answered no")
        report = ["report", "1", "--station", str(station.path), "--format", "json", "--out", "-"]
        assert main(report) == 0
        record = json.loads(capsys.readouterr().out)
        assert record["screen_decision"]["decision"] == "undecided"
        store = ResultStore(station.store_path)
        try:
            stats = shop_stats(store, RunFilter())
        finally:
            store.close()
    screen = stats.screens.iloc[0]
    assert (screen["confirmed_failure"], screen["undecided"]) == (0, 1)
    assert stats.pareto_steps.empty or "place" not in " ".join(stats.pareto_steps["step"])
    assert stats.undecided.to_dict(orient="records") == [
        {"cause": "an operator answered no", "runs": 1}
    ]
