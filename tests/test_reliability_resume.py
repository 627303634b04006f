"""A run its controller never finished: marked incomplete on the next start, continued from its
next step in the same record, refused when it cannot belong to the same test.  Real virtual bench,
real SQLite file; the controller's death is an exception that no handler in rig catches."""

from __future__ import annotations

import contextlib
import io
import json
import sqlite3
from pathlib import Path

import pytest

from rig.cli import main
from rig.config.fixture import load_fixture
from rig.config.unit_file import load_unit
from rig.events import Event, StepFinished
from rig.resume import INCOMPLETE_REASON, ResumeRefused
from rig.runner import load_plan, run_plan
from rig.sim.bench import VirtualBench
from rig.sim.fault_drill import DRILL_SEQUENCE, UNIT_FILE
from rig.store import ResultStore

STEPS = ["signal", "signal-at-controller", "feed", "feed-at-controller", "signal-to-chassis"]


class ControllerDied(BaseException):
    """Stands for the process dying: nothing in rig catches a BaseException of its own."""


@pytest.fixture()
def bench_files(tmp_path: Path):  # type: ignore[no-untyped-def]
    unit = load_unit(UNIT_FILE)
    with VirtualBench(unit, load_fixture(unit.fixture_path)) as bench:
        station = bench.write_station(tmp_path / "station.toml", data_dir=str(tmp_path / "data"))
        sequence = tmp_path / "drill.toml"
        sequence.write_text(DRILL_SEQUENCE, encoding="utf-8")
        yield sequence, station


def _die_after(step_id: str):  # type: ignore[no-untyped-def]
    def listener(event: Event) -> None:
        if isinstance(event, StepFinished) and event.result.step_id == step_id:
            raise ControllerDied

    return listener


def _dead_run(sequence: Path, station: Path, after: str) -> int:
    with pytest.raises(ControllerDied):
        run_plan(load_plan(sequence, station), "SN-DEAD", listener=_die_after(after))
    store = ResultStore(load_plan(sequence, station).station.store_path)
    try:
        run = store.runs(limit=1)[0]  # the newest
        assert run["status"] == "running"  # what a dead controller leaves behind
        return int(run["id"])
    finally:
        store.close()


def test_continuing_runs_only_the_remaining_steps(bench_files: tuple[Path, Path]) -> None:
    sequence, station = bench_files
    dead = _dead_run(sequence, station, after="feed")
    plan = load_plan(sequence, station)
    summary = run_plan(plan, "ignored", resume=dead)
    assert summary.run_id == dead and summary.status == "complete"
    assert [r.step_id for r in summary.results] == STEPS
    store = ResultStore(plan.station.store_path)
    try:
        steps = store.steps(dead)
        run = store.run(dead)
    finally:
        store.close()
    assert [s["step_id"] for s in steps] == STEPS  # each once: none repeated, none lost
    assert [s["position"] for s in steps] == [1, 2, 3, 4, 5]
    assert run["serial"] == "SN-DEAD" and run["status"] == "complete"
    assert "3 of 5 steps were already done" in run["notes"]
    # the run continued is not also warned of as one left unfinished (it was, and is no more)
    assert not any(f"run {dead} was left unfinished" in w for w in summary.warnings)


def test_a_new_start_marks_the_dead_run_incomplete(bench_files: tuple[Path, Path]) -> None:
    sequence, station = bench_files
    dead = _dead_run(sequence, station, after="signal")
    plan = load_plan(sequence, station)
    summary = run_plan(plan, "SN-NEXT")
    store = ResultStore(plan.station.store_path)
    try:
        old = store.run(dead)
    finally:
        store.close()
    assert old["status"] == "incomplete" and old["reason"] == INCOMPLETE_REASON
    assert any(f"run {dead} was left unfinished" in n for n in summary.notes)


def test_a_finished_or_changed_run_is_not_continued(bench_files: tuple[Path, Path]) -> None:
    sequence, station = bench_files
    done = run_plan(load_plan(sequence, station), "SN-DONE")
    with pytest.raises(ResumeRefused, match="is complete, not incomplete"):
        run_plan(load_plan(sequence, station), "x", resume=done.run_id)
    dead = _dead_run(sequence, station, after="signal")
    sequence.write_text(DRILL_SEQUENCE.replace('high = "6 V"', 'high = "5.5 V"'), "utf-8")
    with pytest.raises(ResumeRefused, match="changed since run"):
        run_plan(load_plan(sequence, station), "x", resume=dead)


def test_the_continue_command_explains_a_refusal(bench_files: tuple[Path, Path]) -> None:
    # A run id that cannot be continued is bad input (exit 2, README); 3 is kept for a run that
    # was aborted or an instrument that failed.
    sequence, station = bench_files
    done = run_plan(load_plan(sequence, station), "SN-DONE")
    dead = _dead_run(sequence, station, after="signal")
    sequence.write_text(DRILL_SEQUENCE.replace('high = "6 V"', 'high = "5.5 V"'), "utf-8")
    for run_id, words in (
        (done.run_id, "is complete, not incomplete"),
        (999, "no run 999"),
        (dead, "changed since run"),
    ):
        err, out = io.StringIO(), io.StringIO()
        with contextlib.redirect_stderr(err), contextlib.redirect_stdout(out):
            code = main(["continue", str(run_id), "--station", str(station)])
        assert code == 2 and words in err.getvalue() and "Traceback" not in err.getvalue()
        assert "Caution" not in out.getvalue()  # refused from the record: no bench opened
    # another station's file (a copy under another name): refused from the record as well
    other = station.with_name("other-station.toml")
    text = station.read_text(encoding="utf-8")
    other.write_text(text.replace('name = "virtual-bench"', 'name = "bench-b"'), "utf-8")
    assert other.read_text(encoding="utf-8") != text
    err, out = io.StringIO(), io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(out):
        code = main(["continue", str(dead), "--station", str(other)])
    assert code == 2 and "ran on station 'virtual-bench'" in err.getvalue()
    assert "Caution" not in out.getvalue()


def test_a_continued_run_keeps_the_steps_it_planned(bench_files: tuple[Path, Path]) -> None:
    # the list a run recorded at its start is its own: continuing does not plan it again (the
    # station's plan could order the steps otherwise by then, as the one written here does);
    # a run begun by an older rig, which recorded none, gets the plan it is continued with
    sequence, station = bench_files
    store_path = load_plan(sequence, station).station.store_path
    own = _dead_run(sequence, station, after="signal")
    older = _dead_run(sequence, station, after="signal")
    with sqlite3.connect(store_path) as db:
        (recorded,) = db.execute("SELECT planned_steps FROM runs WHERE id=?", (own,)).fetchone()
        assert json.loads(recorded) == STEPS  # recorded as the run started
        other_order = json.dumps([STEPS[0], *reversed(STEPS[1:])])
        db.execute("UPDATE runs SET planned_steps=? WHERE id=?", (other_order, own))
        db.execute("UPDATE runs SET planned_steps=NULL WHERE id=?", (older,))
    for run_id in (own, older):
        assert run_plan(load_plan(sequence, station), "x", resume=run_id).status == "complete"
    with sqlite3.connect(store_path) as db:
        planned = dict(db.execute("SELECT id, planned_steps FROM runs").fetchall())
    assert planned[own] == other_order
    assert json.loads(planned[older]) == STEPS
