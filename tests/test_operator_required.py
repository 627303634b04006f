"""A station that must record who tested each unit: ``operator_required = true`` in its
``[station]`` table makes every command that starts a run refuse to start without a name.

Each entry point is run as a user runs it (``rig.cli.main``) on the virtual bench: pyvisa-py over
TCP to the DMM and supply, pyserial on a pty to the relay box, a real SQLite store.  A refusal
must come before any instrument is opened: the relay box has handled no line and no run is
recorded.  Source of the rule: the shop's own need to name who tested each unit (common practice
in quality records, no published source); the setting's name and wording are rig's own.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_bench

from rig.bench_open import close_bench, open_bench
from rig.cli import EXIT_BAD_INPUT, EXIT_PASS, main
from rig.config.fixture import load_fixture
from rig.config.station import load_station
from rig.config.unit_file import load_unit
from rig.engine import Engine
from rig.errors import ConfigError
from rig.run_admission import RunRefused
from rig.runner import load_plan, run_plan
from rig.sim.bench import VirtualBench
from rig.sim.fault_drill import DRILL_SEQUENCE, UNIT_FILE
from rig.sim.harness_bench import harness_bench, write_invented
from rig.store import ResultStore

SEQUENCE = SEQUENCES / "temp-circuit-check.toml"
SETTING = "operator_required = true"


def _require_operator(station: Path, line: str = SETTING) -> Path:
    """The station file with ``line`` added to its own table, after its name."""
    text = station.read_text(encoding="utf-8")
    head, name, rest = text.partition("\nname = ")
    first, newline, tail = rest.partition("\n")
    station.write_text(head + name + first + newline + line + "\n" + tail, encoding="utf-8")
    return station


def _runs(station: Path) -> list[tuple[str, str, str]]:
    """(operator, status, notes) of every recorded run; none when the store was never made."""
    store = load_station(station).store_path
    if not store.exists():
        return []
    with sqlite3.connect(store) as db:
        return list(db.execute("SELECT operator, status, notes FROM runs ORDER BY id"))


def _assert_refused(code: int, err: str, station: Path, prefix: str = "rig") -> None:
    assert code == EXIT_BAD_INPUT
    assert err.strip() == (
        f"{prefix}: {station} sets operator_required = true under [station]: give --operator "
        "NAME (who tests; it is recorded with the run)"
    )


def test_the_setting_is_a_boolean_named_by_file_line_and_key(tmp_path: Path) -> None:
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        assert station.operator_required is False  # the default: as before
        path = _require_operator(station.path)
        assert load_station(path).operator_required is True
        path.write_text(path.read_text().replace(SETTING, 'operator_required = "yes"'))
        with pytest.raises(ConfigError) as caught:
            load_station(path)
    line = path.read_text().splitlines().index('operator_required = "yes"') + 1
    assert [str(p) for p in caught.value.problems] == [
        f"{path}:{line} [station.operator_required]: expected true or false, found 'yes'"
    ]


def test_run_refuses_without_an_operator_and_records_the_one_given(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, st):
        station = _require_operator(st.path)
        base = ["run", str(SEQUENCE), "--station", str(station), "--serial", "A1", "--yes"]
        for blank in ([], ["--operator", ""], ["--operator", "   "]):
            code = main([*base, *blank])
            _assert_refused(code, capsys.readouterr().err, station)
        assert bench.relay_box.lines_handled == 0 and _runs(station) == []
        assert main([*base, "--operator", "kim"]) == EXIT_PASS
    assert [run[0] for run in _runs(station)] == ["kim"]


def test_the_engine_itself_refuses_a_run_with_no_name_or_no_serial(tmp_path: Path) -> None:
    """Callers other than the commands (a script, the console's worker) go through the engine:
    it refuses too, before any relay moves and before anything is recorded."""
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, st):
        plan = load_plan(SEQUENCE, _require_operator(st.path))
        with pytest.raises(RunRefused, match="operator_required = true"):
            run_plan(plan, "A1", operator=" ")
        with pytest.raises(RunRefused, match="serial number is blank"):
            run_plan(plan, "  ", operator="kim")
        assert bench.relay_box.lines_handled == 0 and _runs(st.path) == []
        opened, store = open_bench(plan.station), ResultStore(plan.station.store_path)
        try:
            with pytest.raises(RunRefused, match="operator_required = true"):
                Engine(plan, opened, store).run("A1", operator="")
        finally:
            close_bench(opened)
            store.close()
        assert _runs(st.path) == []
        assert run_plan(plan, "A1", operator="kim").verdict.value == "pass"
    assert [run[0] for run in _runs(st.path)] == ["kim"]


def test_harness_check_and_capture_refuse_without_an_operator(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    wires, fixture = write_invented(tmp_path / "list", 4, seed=2, spare=1)
    captured = tmp_path / "captured.csv"
    bench = harness_bench(wires, fixture, seed=2, ambient_c=20.0)
    with bench:
        station = _require_operator(bench.write_station(tmp_path / "station.toml"))
        common = ["--station", str(station), "--serial", "H1", "--ambient", "20 degC"]
        capture = ["harness", "capture", "--out", str(captured), *common]
        check = ["harness", "check", str(wires.path), *common]
        for args in (capture, check):
            _assert_refused(main(args), capsys.readouterr().err, station)
        assert bench.relay_box.lines_handled == 0 and _runs(station) == []
        assert not captured.exists()
        assert main([*capture, "--operator", "kim", "--json"]) == EXIT_PASS
        assert main([*check, "--operator", "lee", "--json"]) == EXIT_PASS
    assert [run[0] for run in _runs(station)] == ["kim", "lee"]


class ControllerDied(BaseException):
    """Stands for the process dying: nothing in rig catches a BaseException of its own."""


def test_continue_refuses_without_an_operator_and_notes_who_carried_on(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    unit = load_unit(UNIT_FILE)
    sequence = tmp_path / "drill.toml"
    sequence.write_text(DRILL_SEQUENCE, encoding="utf-8")

    def die(event: object) -> None:
        if getattr(getattr(event, "result", None), "step_id", "") == "feed":
            raise ControllerDied

    with VirtualBench(unit, load_fixture(unit.fixture_path)) as bench:
        station = _require_operator(bench.write_station(tmp_path / "station.toml"))
        with pytest.raises(ControllerDied):
            run_plan(load_plan(sequence, station), "SN-1", operator="kim", listener=die)
        before = bench.relay_box.lines_handled
        code = main(["continue", "1", "--station", str(station), "--yes"])
        _assert_refused(code, capsys.readouterr().err, station)
        assert bench.relay_box.lines_handled == before
        assert [run[:2] for run in _runs(station)] == [("kim", "running")]  # left as it was
        code = main(["continue", "1", "--station", str(station), "--operator", "lee", "--yes"])
    assert code == EXIT_PASS
    [(operator, status, notes)] = _runs(station)
    assert (operator, status) == ("kim", "complete")  # the header keeps who started it
    assert "continued by operator lee" in notes


def test_console_refuses_to_open_without_an_operator(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    from rig.console import ConsoleApp

    opened: list[str] = []  # the full-screen app is not run in a test; its setup is noted
    monkeypatch.setattr(ConsoleApp, "run", lambda app: opened.append(app.setup.operator))
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, st):
        station = _require_operator(st.path)
        args = ["console", str(SEQUENCE), "--station", str(station)]
        for blank in ([], ["--operator", " "]):
            code = main([*args, *blank])
            _assert_refused(code, capsys.readouterr().err, station, prefix="rig console")
        assert opened == [] and bench.relay_box.lines_handled == 0
        assert main([*args, "--operator", "kim"]) == 0
    assert opened == ["kim"]


def test_check_says_that_the_station_requires_an_operator(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, st):
        check = ["check", str(SEQUENCE), "--station", str(st.path)]
        assert main(check) == 0
        assert "operator:" not in capsys.readouterr().out
        _require_operator(st.path)
        assert main(check) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[1] == (
        "operator: required by the station (operator_required); run with --operator NAME"
    )
