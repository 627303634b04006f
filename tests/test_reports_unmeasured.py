"""The record of a run that ended early lists the planned steps it never measured: in the HTML
report after the judged steps, in the CSV in a column of their own (never as results), in JSON;
an older run without a recorded plan is read against its sequence file only while that file is
unchanged, and says so when it cannot be.  An aborted run gets no diagnosis.  Real virtual bench,
real SQLite file."""

from __future__ import annotations

import csv
import io
import json
import re
import sqlite3
import sys
from pathlib import Path
from typing import Any

import pytest
from bench_helpers import MIDWAY_STOP, SEQUENCES, shipped_bench

from rig.cli import EXIT_ABORTED, main
from rig.events import CUT_SHORT, NOT_RUN
from rig.runner import load_plan, run_plan
from rig.store import ResultStore
from rig.unmeasured import unmeasured

PLANNED = ["lead-check", "seated", "lead-check-4w", "hold"]  # MIDWAY_STOP, in run order
EVERY_ONE_NOT_RUN = [
    ["2", "seated", NOT_RUN],
    ["3", "lead-check-4w", NOT_RUN],
    ["4", "hold", NOT_RUN],
]
"""The report's rows when the record cannot say the question was under way."""


def aborted_at_the_question(
    folder: Path, monkeypatch: pytest.MonkeyPatch, sequence_text: str = MIDWAY_STOP
) -> tuple[Path, Path, Path]:
    """(station file, store, sequence file) after `rig run` of a sequence whose question got no
    answer (the input had ended): the run is aborted at that step."""
    sequence = folder / "sequence.toml"
    sequence.write_text(sequence_text, encoding="utf-8")
    monkeypatch.setattr(sys, "stdin", io.StringIO(""))
    with shipped_bench("ntc-sender", folder=folder / "bench") as (_, station):
        args = ["run", str(sequence), "--station", str(station.path), "--serial", "Q-7"]
        assert main(args) == EXIT_ABORTED
    return station.path, station.store_path, sequence


def report(capsys: pytest.CaptureFixture[str], fmt: str, *where: str) -> str:
    capsys.readouterr()
    assert main(["report", "1", *where, "--format", fmt, "--out", "-"]) == 0
    return capsys.readouterr().out


def html_rows(page: str, table_id: str) -> list[list[str]]:
    """The cell texts of the table ``table_id``, row by row."""
    body = page.split(f'id="{table_id}"')[1].split("</tbody>")[0]
    return [re.findall(r"<td[^>]*>(.*?)</td>", row) for row in body.split("<tr>")[2:]]


def as_older_rig_left_it(store_path: Path) -> None:
    """The run as a rig before planned steps were recorded left it: the migration gives such a
    run no list and no step under way (NULL)."""
    with sqlite3.connect(store_path) as db:
        db.execute("UPDATE runs SET planned_steps = NULL, cut_short_step = NULL")


def test_an_aborted_runs_record_lists_the_steps_it_never_measured(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    station, store_path, _ = aborted_at_the_question(tmp_path, monkeypatch)
    with sqlite3.connect(store_path) as db:
        planned, under_way = db.execute("SELECT planned_steps, cut_short_step FROM runs").fetchone()
    assert json.loads(planned) == PLANNED and under_way == "seated"

    page = report(capsys, "html", "--station", str(station))
    assert [row[1] for row in html_rows(page, "steps")] == ["lead-check"]  # results only
    assert html_rows(page, "not-measured") == [
        ["2", "seated", CUT_SHORT],
        ["3", "lead-check-4w", NOT_RUN],
        ["4", "hold", NOT_RUN],
    ]
    assert page.index('id="steps"') < page.index('id="not-measured"')
    # an aborted run is not diagnosed, and the page says so rather than asking for a unit file
    diagnosis = page.split('id="diagnosis">')[1].split("</p>")[0]
    assert "aborted run" in diagnosis and "--unit" not in diagnosis

    rows = list(csv.DictReader(io.StringIO(report(capsys, "csv", "--station", str(station)))))
    assert [(r["step_id"], r["verdict"], r["not_measured"]) for r in rows] == [
        ("lead-check", "pass", ""),
        ("seated", "", CUT_SHORT),
        ("lead-check-4w", "", NOT_RUN),
        ("hold", "", NOT_RUN),
    ]
    for row in rows[1:]:  # nothing in a result's columns: no formula counts them as results
        assert row["value"] == row["low"] == row["high"] == row["expanded_u"] == ""
    assert {r["run_status"] for r in rows} == {"aborted"}
    assert all("got no answer" in r["run_reason"] for r in rows)

    data = json.loads(report(capsys, "json", "--station", str(station)))
    assert data["run"]["planned_steps"] == PLANNED
    assert [(m["step_id"], m["state"]) for m in data["not_measured"]] == [
        ("seated", CUT_SHORT),
        ("lead-check-4w", NOT_RUN),
        ("hold", NOT_RUN),
    ]


def test_a_run_with_no_step_result_keeps_its_status_and_reason_in_the_csv(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    # the shipped screen begins with a question: no answer, no step result at all
    screen = (SEQUENCES / "ntc-sender-screen.toml").read_text(encoding="utf-8")
    station, store_path, _ = aborted_at_the_question(tmp_path, monkeypatch, screen)
    rows = list(csv.DictReader(io.StringIO(report(capsys, "csv", "--station", str(station)))))
    assert rows and all(r["not_measured"] for r in rows) and rows[0]["not_measured"] == CUT_SHORT
    # an older run of it, read with no station: its plan is not known, so no step row at all;
    # the run's own fields still make one row
    as_older_rig_left_it(store_path)
    text = report(capsys, "csv", "--store", str(store_path))
    (row,) = csv.DictReader(io.StringIO(text))
    assert (row["run_status"], row["run_verdict"]) == ("aborted", "error")
    assert "got no answer" in row["run_reason"]
    assert row["step_id"] == "" and "not known" in row["not_measured_notes"]


def test_an_older_run_is_read_against_its_sequence_file_only_while_it_is_unchanged(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    station, store_path, sequence = aborted_at_the_question(tmp_path, monkeypatch)
    as_older_rig_left_it(store_path)
    page = report(capsys, "html", "--station", str(station))
    # the plan comes from the unchanged file; which step was under way is not recorded, and the
    # question takes no reading: every step is "not run", and one line says why
    assert html_rows(page, "not-measured") == EVERY_ONE_NOT_RUN
    assert "unchanged since the run (same SHA-256)" in page
    assert "does not say whether step seated was under way" in page
    # without a station the plan cannot be made again
    page = report(capsys, "html", "--store", str(store_path))
    assert 'id="not-measured"' not in page
    assert "not known" in page and "no station file was given" in page
    # once the file has changed, its steps may not be the run's
    sequence.write_text(MIDWAY_STOP.replace('"0.1 s"', '"0.2 s"'), encoding="utf-8")
    page = report(capsys, "html", "--station", str(station))
    assert 'id="not-measured"' not in page
    assert "has changed since the run" in page


class ControllerDied(BaseException):
    """Stands for the process dying: nothing in rig catches a BaseException of its own."""


def test_a_run_whose_controller_died_lists_its_steps_and_cannot_say_which_was_under_way(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    sequence = tmp_path / "stops-midway.toml"
    sequence.write_text(MIDWAY_STOP, encoding="utf-8")

    def dies(text: str) -> bool:
        raise ControllerDied

    with shipped_bench("ntc-sender", folder=tmp_path / "bench") as (_, station):
        with pytest.raises(ControllerDied):
            run_plan(load_plan(sequence, station), "D-1", ask=dies)
        run_plan(load_plan(sequence, station), "D-2", ask=lambda text: True)  # marks it
        page = report(capsys, "html", "--station", str(station.path))
    assert "<td>incomplete</td>" in page
    assert html_rows(page, "not-measured") == EVERY_ONE_NOT_RUN
    assert "does not say whether step seated was under way" in page
    assert "no diagnosis is made of an incomplete run" in page


READS_AHEAD = """\
# A test sequence, invented for the test: three readings of one route, taken in one query
[sequence]
name = "one-route-thrice"
reorder = false
"""
READS_AHEAD += "".join(
    f'\n[[steps]]\nid = "{name}"\nkind = "resistance"\nhi = "T1"\nlo = "T2"\n'
    'low = "1 kohm"\nhigh = "4 kohm"\n'
    for name in ("first", "second", "third")
)


def test_a_reading_taken_ahead_for_a_step_does_not_show_it_begun(tmp_path: Path) -> None:
    # the second step's query also reads for the third (rig.read_ahead): the third's reading was
    # taken while the second was under way, in the same query, so it shows nothing of the third
    sequence = tmp_path / "one-route.toml"
    sequence.write_text(READS_AHEAD, encoding="utf-8")
    with shipped_bench("ntc-sender", folder=tmp_path / "bench") as (_, station):
        run_plan(load_plan(sequence, station), "A-1")
        store = ResultStore(station.store_path)
        try:
            readings: list[dict[str, Any]] = store.readings(1)
        finally:
            store.close()
    taken = {r["step_id"]: r["taken_at"] for r in readings}
    assert taken["third"] == taken["second"]  # one query: what the rule below relies on
    planned = ["first", "second", "third"]
    # as if the record ended after the second step's result, with no end saying more
    after_second = unmeasured(planned, {"first", "second"}, None, readings)
    assert [(m.step_id, m.state) for m in after_second.steps] == [("third", NOT_RUN)]
    assert after_second.notes and "third" in after_second.notes[0]
    # ... or after the first: the second's own readings show it was under way
    after_first = unmeasured(planned, {"first"}, None, readings)
    assert [(m.step_id, m.state) for m in after_first.steps] == [
        ("second", CUT_SHORT),
        ("third", NOT_RUN),
    ]
    assert after_first.notes == ()
