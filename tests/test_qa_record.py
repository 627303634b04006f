"""What a QA record of a returned sensor keeps beyond its readings (schema 6): the claim or return
number and the inspector's remark, given at the start; each model step's parameters, so that a
reviewer sees what a reading was compared with; and why a run decided nothing, as a code.

Runs are real ones on the virtual bench (real TCP sockets and a pty) into a real SQLite file.
The scenario (an NTC sender returned under a claim) is invented for the tests.  The model
parameters are checked against the sequence file's own values, read with ``tomllib``.
"""

from __future__ import annotations

import csv
import html
import io
import json
import re
import sqlite3
import sys
import tomllib
from pathlib import Path

import pytest
from bench_helpers import MIDWAY_STOP, SEQUENCES, shipped_bench

from rig.cli import EXIT_ABORTED, EXIT_BAD_INPUT, EXIT_PASS, main
from rig.config.sequence import load_sequence
from rig.config.station import load_station
from rig.quantity import parse_quantity
from rig.sim.harness_bench import harness_bench, write_invented
from rig.steps import KINDS
from rig.store import ResultStore

SCREEN = SEQUENCES / "ntc-sender-screen.toml"
CLAIM = "RMA 2026/0042"
REMARK = 'Customer: gauge reads 10 degC high when warm.\nLead insulation <scuffed> & "taped".'


def _run(station: Path, serial: str, *extra: str) -> int:
    return main(["run", str(SCREEN), "--station", str(station), "--serial", serial, *extra])


def _out(capsys: pytest.CaptureFixture[str], *args: str) -> str:
    capsys.readouterr()
    assert main(list(args)) == 0, capsys.readouterr().err
    return capsys.readouterr().out


def _model_rows(page: str) -> dict[tuple[str, str], str]:
    """(step, parameter) -> value from the HTML record's model-parameters table."""
    body = page.split('<table id="model-parameters">', 1)[1].split("</table>", 1)[0]
    cells = re.findall(r"<tr><td>(.*?)</td><td>(.*?)</td><td>(.*?)</td></tr>", body)
    return {(html.unescape(s), html.unescape(k)): html.unescape(v) for s, k, v in cells}


def test_a_run_keeps_its_claim_and_remark_and_every_record_shows_them(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with shipped_bench("ntc-sender", folder=tmp_path) as (_, station):
        base = ("--yes", "--json")
        assert _run(station.path, "NTC-7", *base, "--claim", CLAIM, "--remark", REMARK) == 0
        summary = json.loads(capsys.readouterr().out)
        assert _run(station.path, "NTC-8", *base) == EXIT_PASS  # no claim: found by none
        capsys.readouterr()
    assert (summary["claim"], summary["remark"], summary["end_cause"]) == (CLAIM, REMARK, "")
    store = str(station.store_path)
    run_id = str(summary["run_id"])
    found = json.loads(_out(capsys, "runs", "--store", store, "--claim", CLAIM, "--json"))
    assert [(r["run"], r["serial"], r["claim"]) for r in found["runs"]] == [
        (summary["run_id"], "NTC-7", CLAIM)
    ]
    assert json.loads(_out(capsys, "runs", "--store", store, "--claim", "RMA", "--json")) == {
        "runs": []
    }  # exact, as --serial is
    table = _out(capsys, "runs", "--store", store)
    assert re.search(rf"NTC-7 .* {re.escape(CLAIM)}\s*$", table, re.M)
    # each screen run with its decision, as rig run stated it (a good sender: no fault found)
    assert [r["decision"] for r in found["runs"]] == ["no fault found"]
    assert re.search(r"NTC-8 .* pass\s+no fault found", table), table
    # the match is exact, and where a claim differs in letter case or spaces alone it says so
    near = CLAIM.lower().replace(" ", "  ")
    said = _out(capsys, "runs", "--store", store, "--claim", near)
    assert said.strip() == (
        "no stored run matches; --claim matches exactly (letter case and spaces count): "
        f"stored as {CLAIM!r}"
    )
    report = ("report", run_id, "--store", store, "--out", "-", "--format")
    record = json.loads(_out(capsys, *report, "json"))
    assert (record["run"]["claim"], record["run"]["remark"]) == (CLAIM, REMARK)
    rows = list(csv.DictReader(io.StringIO(_out(capsys, *report, "csv"))))
    assert {(r["claim"], r["remark"]) for r in rows} == {(CLAIM, REMARK)}
    page = _out(capsys, *report, "html")
    header = page.split('<table id="run-header">', 1)[1].split("</table>", 1)[0]
    assert f"<td>claim / return number</td><td>{html.escape(CLAIM)}</td>" in header
    assert f"<td>remark</td><td>{html.escape(REMARK)}</td>" in header  # escaped, never markup


@pytest.mark.parametrize(
    ("option", "text", "says"),
    [
        ("--claim", "R" * 201, "--claim: the claim or return number is 201 characters long; "
         "at most 200 are kept"),
        ("--claim", "RMA-1\nRMA-2", "--claim: the claim or return number holds a control "
         "character (U+000A) at character 6; expected printable text on one line"),
        ("--claim", "   ", "--claim: the claim or return number is blank; give its text, "
         "or leave it out"),
        ("--remark", "x" * 2001, "--remark: the remark is 2001 characters long; at most 2000 "
         "are kept"),
        ("--remark", "beep\a", "--remark: the remark holds a control character (U+0007) at "
         "character 5; expected printable text (line breaks allowed)"),
    ],
    ids=["claim-too-long", "claim-two-lines", "claim-blank", "remark-too-long", "remark-bell"],
)  # fmt: skip
def test_a_claim_or_remark_that_cannot_be_kept_is_refused_before_anything_moves(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], option: str, text: str, says: str
) -> None:
    with shipped_bench("ntc-sender", folder=tmp_path) as (bench, station):
        assert _run(station.path, "NTC-9", "--yes", option, text) == EXIT_BAD_INPUT
        assert capsys.readouterr().err.strip() == f"rig: {says}"
        assert bench.relay_box.lines_handled == 0  # nothing opened
    assert not station.store_path.exists()  # nothing recorded


def test_a_model_steps_parameters_are_in_its_record_as_the_sequence_gives_them(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with shipped_bench("ntc-sender", folder=tmp_path) as (_, station):
        assert _run(station.path, "NTC-10", "--yes") == EXIT_PASS
    capsys.readouterr()
    report = ("report", "1", "--store", str(station.store_path), "--out", "-", "--format")
    shown = _model_rows(_out(capsys, *report, "html"))
    steps = {s["id"]: s for s in tomllib.loads(SCREEN.read_text(encoding="utf-8"))["steps"]}
    ntc, well = steps["sender-resistance"], steps["well-temperature"]
    for key, unit in (("r25", "ohm"), ("beta", "K"), ("tolerance", "%")):
        on_page = parse_quantity(shown["sender-resistance", key], unit)
        assert on_page == pytest.approx(parse_quantity(ntc[key], unit), rel=1e-12)
    assert shown["sender-resistance", "measure"] == ntc["measure"]
    assert shown["sender-resistance", "temperature_from"] == ntc["temperature_from"]
    on_page = parse_quantity(shown["well-temperature", "r0"], "ohm")
    assert on_page == pytest.approx(parse_quantity(well["r0"], "ohm"), rel=1e-12)
    assert not [key for key in shown if key[0] in ("place", "sender-4wire")]  # no model
    record = json.loads(_out(capsys, *report, "json"))
    by_step = {s["step_id"]: s["model_params"] for s in record["steps"]}
    assert by_step["sender-resistance"]["beta"] == shown["sender-resistance", "beta"]
    assert by_step["place"] == {}
    rows = {r["step_id"]: r for r in csv.DictReader(io.StringIO(_out(capsys, *report, "csv")))}
    assert f"r25 = {shown['sender-resistance', 'r25']}" in rows["sender-resistance"]["model_params"]


def test_a_ratiometric_tolerance_reads_as_points_of_supply_and_is_recorded_as_written(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """The shipped pressure check's ``tolerance = "2 %"`` is 2 percentage points of the supply
    (its limits are the prediction +- 2, not +- 2 % of it): the HTML record says so, and the
    record itself (JSON, CSV) keeps the file's text, which parses back to the file's value."""
    sequence = SEQUENCES / "pressure-circuit-check.toml"
    with shipped_bench("pressure-circuit", folder=tmp_path) as (_, station):
        args = ["run", str(sequence), "--station", str(station.path), "--serial", "P-1", "--yes"]
        main(args)
    report = ("report", "1", "--store", str(station.store_path), "--out", "-", "--format")
    shown = _model_rows(_out(capsys, *report, "html"))
    assert shown["output-fraction", "tolerance"] == "2 percentage points of supply"
    record = json.loads(_out(capsys, *report, "json"))
    [params] = [s["model_params"] for s in record["steps"] if s["step_id"] == "output-fraction"]
    assert params["tolerance"] == "2 %" and parse_quantity(params["tolerance"], "%") == 2.0
    rows = {r["step_id"]: r for r in csv.DictReader(io.StringIO(_out(capsys, *report, "csv")))}
    assert "tolerance = 2 %" in rows["output-fraction"]["model_params"]


RTD_AND_RATIO = """\
# Model steps of each kind, invented for the test: what each records of its file.
[sequence]
name = "models"

[[steps]]
id = "well"
kind = "reference-temperature"
force_hi = "PT_FH"
sense_hi = "PT_SH"
force_lo = "PT_FL"
sense_lo = "PT_SL"
r0 = "1000 ohm"

[[steps]]
id = "element"
kind = "rtd"
hi = "T1"
lo = "T2"
r0 = "1000 ohm"
temperature = "-12.5 degC"
tolerance = "0.35 ohm"

[[steps]]
id = "element-b"
kind = "rtd"
hi = "T1"
lo = "T2"
r0 = "100 ohm"
temperature_from = "well"
tolerance_class = "B"

[[steps]]
id = "signal"
kind = "ntc"
hi = "SIG"
lo = "GND"
measure = "voltage"
steinhart_hart = [1.129148e-3, 2.34125e-4, 8.76741e-8]
temperature = "30 degC"
pullup = "2.49 kohm"
reference = "5 V"
tolerance = "0.05 V"
supply = { pos = "V+", neg = "GND", voltage = "5 V", limit = "50 mA" }

[[steps]]
id = "pressure"
kind = "ratiometric"
output = "OUT"
power = "V+"
ground = "GND"
range_low = "-100 kPa"
range_high = "1.5 MPa"
fraction_low = 0.05
fraction_high = 0.95
pressure = "101.3 kPa"
tolerance = "2 %"
"""


def test_each_model_kind_records_every_parameter_its_file_gives(tmp_path: Path) -> None:
    """Each value written back as text parses to the file's own value (``rig.quantity``)."""
    path = tmp_path / "models.toml"
    path.write_text(RTD_AND_RATIO, encoding="utf-8")
    specs = {s.id: s for s in load_sequence(path).steps}
    given = {s["id"]: s for s in tomllib.loads(RTD_AND_RATIO)["steps"]}
    units = {
        "r0": "ohm", "temperature": "degC", "pullup": "ohm", "reference": "V",
        "range_low": "Pa", "range_high": "Pa", "pressure": "Pa",
    }  # fmt: skip
    for step_id, spec in specs.items():
        recorded = KINDS[spec.kind].model_parameters(spec)
        for key, value in given[step_id].items():
            if key in ("id", "kind", "supply") or key in spec.pins:
                continue
            if key in units:
                assert parse_quantity(recorded[key], units[key]) == pytest.approx(
                    parse_quantity(value, units[key]), rel=1e-12
                ), (step_id, key)
            elif key == "tolerance":
                unit = "%" if value.endswith("%") else value.split()[-1]
                assert parse_quantity(recorded[key], unit) == pytest.approx(
                    parse_quantity(value, unit), rel=1e-12
                ), (step_id, key)
            elif key == "steinhart_hart":
                assert json.loads(recorded[key]) == value  # every digit the file holds
            elif isinstance(value, float):
                assert float(recorded[key]) == value, (step_id, key)
            else:
                assert recorded[key] == value, (step_id, key)
    assert (
        specs["element"].kind == "rtd"
        and "IEC 60751" in KINDS["rtd"].model_parameters(specs["element"])["curve"]
    )


def _causes(store_path: Path) -> list[tuple[str, str, str | None]]:
    with sqlite3.connect(store_path) as db:
        return list(db.execute("SELECT serial, status, end_cause FROM runs ORDER BY id"))


def test_a_run_that_decided_nothing_stores_why_and_the_tally_reads_it(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    from rig.stats.filters import RunFilter
    from rig.stats.from_store import shop_stats

    sequence = tmp_path / "stops-midway.toml"
    asks = 'text = "Is the sender seated in the well?"\n'
    assert MIDWAY_STOP.count(asks) == 1
    sequence.write_text(MIDWAY_STOP.replace(asks, asks + 'declined = "stop"\n'), encoding="utf-8")
    with shipped_bench("ntc-sender", folder=tmp_path / "bench") as (_, station):
        run = ["run", str(sequence), "--station", str(station.path)]
        assert main([*run, "--serial", "Q-1", "--yes"]) == EXIT_PASS
        monkeypatch.setattr(sys, "stdin", io.StringIO(""))  # nobody answers the question
        assert main([*run, "--serial", "Q-2"]) == EXIT_ABORTED
        monkeypatch.setattr(sys, "stdin", io.StringIO("n\n"))  # a no stops this sequence
        assert main([*run, "--serial", "Q-3"]) == EXIT_ABORTED
    assert _causes(station.store_path) == [
        ("Q-1", "complete", ""),
        ("Q-2", "aborted", "no-answer"),
        ("Q-3", "aborted", "declined"),
    ]
    store = ResultStore(station.store_path)
    try:
        # the tally reads the stored code, not the reason's words: reword a reason and the
        # run stays under its cause
        store._db.execute("UPDATE runs SET reason = 'reworded' WHERE serial = 'Q-2'")
        undecided = shop_stats(store, RunFilter()).undecided.to_dict(orient="records")
    finally:
        store.close()
    assert sorted(undecided, key=lambda row: row["cause"]) == [
        {"cause": "a question got no answer", "runs": 1},
        {"cause": "an operator answered no", "runs": 1},  # no step failed to measure
    ]


def test_a_controller_stopped_run_is_coded_so_and_continuing_clears_it(tmp_path: Path) -> None:
    from rig.store import RunHeader

    store = ResultStore(tmp_path / "r.sqlite")
    try:
        run_id = store.start_run(RunHeader("SN", "seq", "h", "/s.toml", "bench", "op"))
        assert store.run(run_id)["end_cause"] is None  # running: no cause yet
        assert store.mark_incomplete("bench", "the controller stopped") == [run_id]
        assert store.run(run_id)["end_cause"] == "controller-stopped"
        store.reopen_run(run_id)
        assert store.run(run_id)["end_cause"] is None
        store.finish_run(run_id, status="aborted", verdict="error", end_cause="instrument-fault")
        assert store.run(run_id)["end_cause"] == "instrument-fault"
    finally:
        store.close()


@pytest.mark.parametrize(
    ("status", "reason", "code", "cause"),
    [
        # schema 6: the stored code decides, whatever the reason says
        ("aborted", "step well: the reading 1.078 kohm is outside", "configuration",
         "a sequence or station setting to correct"),
        ("aborted", "step well: the reading 1.078 kohm is outside", "step-error",
         "a step could not measure, or ended the run"),
        ("aborted", "anything", "no-answer", "a question got no answer"),
        ("aborted", "interrupted (Ctrl-C or SIGTERM)", "operator-stop", "stopped by the operator"),
        ("aborted", "instrument fault: gone", "instrument-fault", "instrument fault"),
        ("aborted", "cannot write", "store", "other (see the run's reason)"),
        ("incomplete", "the controller stopped", "controller-stopped",
         "the controller stopped mid-run"),
        # before schema 6 (no code): the start of the reason, as the engine words it
        ("aborted", "step well: the reading 1.078 kohm is outside", None,
         "a step could not measure, or ended the run"),
        ("aborted", "the prompt 'Seated?' got no answer", None, "a question got no answer"),
        ("aborted", "the bench could not be made safe", None, "other (see the run's reason)"),
        ("incomplete", "the controller stopped", None, "the controller stopped mid-run"),
    ],
)  # fmt: skip
def test_the_stored_cause_decides_and_an_older_run_is_read_from_its_reason(
    status: str, reason: str, code: str | None, cause: str
) -> None:
    from rig.screening import undecided_cause

    assert undecided_cause(status, reason, code) == cause


def test_a_harness_check_keeps_its_claim_and_remark_and_refuses_one_it_cannot_keep(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    wires, fixture = write_invented(tmp_path / "list", 4, seed=2, spare=1)
    bench = harness_bench(wires, fixture, seed=2, ambient_c=20.0)
    with bench:
        station = bench.write_station(tmp_path / "station.toml")
        check = ["harness", "check", str(wires.path), "--station", str(station), "--serial", "H1"]
        check += ["--ambient", "20 degC", "--json"]
        assert main([*check, "--claim", "R" * 201]) == EXIT_BAD_INPUT
        assert "--claim: the claim or return number is 201 characters long" in (
            capsys.readouterr().err
        )
        assert bench.relay_box.lines_handled == 0
        assert main([*check, "--claim", CLAIM, "--remark", REMARK]) == EXIT_PASS
        printed = json.loads(capsys.readouterr().out)
        # the claim screened again on another harness: said before the check, as by rig run
        again = [a if a != "H1" else "H2" for a in check if a != "--json"]
        assert main([*again, "--claim", CLAIM]) == EXIT_PASS
        said = capsys.readouterr().out
    assert (printed["claim"], printed["remark"]) == (CLAIM, REMARK)
    assert f"note: claim {CLAIM!r} was given to an earlier run of " in said
    assert " on this station (serial H1); the latest: run 1, pass (complete), started " in said
    assert _causes(load_station(station).store_path) == [
        ("H1", "complete", ""),
        ("H2", "complete", ""),
    ]
    with sqlite3.connect(load_station(station).store_path) as db:
        assert db.execute("SELECT claim, remark FROM runs").fetchall() == [
            (CLAIM, REMARK),
            (CLAIM, ""),
        ]
