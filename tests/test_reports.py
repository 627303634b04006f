"""`rig report` on runs recorded by the virtual bench: every value from a user escaped in the
HTML, CSV cells safe against formula injection, the same data in CSV and JSON as in the store,
the diagnosis of a failed run, files written beside the store and never into the source tree."""

from __future__ import annotations

import csv
import io
import json
import re
import shutil
import sqlite3
from pathlib import Path
from typing import Any

import pytest
from bench_helpers import SEQUENCES, shipped_bench, shipped_plan

from reports.html_page import esc
from reports.run_export import csv_safe, run_record
from rig.cli import main
from rig.demo import HARNESS_CASES, run_demo
from rig.runner import run_plan
from rig.store import ResultStore

# hostile text as a user could type it at the scan prompt
SERIAL = '<img src=x onerror="alert(1)">&HAR'
OPERATOR = '=HYPERLINK("http://example.invalid","x")'


@pytest.fixture(scope="module")
def recorded(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path, int]:
    """(station file, store, run id) of a failed harness run with hostile serial and operator."""
    folder = tmp_path_factory.mktemp("bench")
    with shipped_bench("temp-circuit", ("open:signal",), folder=folder) as (_, station):
        summary = run_plan(
            shipped_plan("temp-circuit-check", station),
            SERIAL,
            operator=OPERATOR,
            unit="temp-circuit",
            ask=lambda t: True,
        )
    assert summary.verdict.value == "fail"
    return folder / "station.toml", station.store_path, summary.run_id


def stored(store_path: Path, run_id: int) -> tuple[dict[str, Any], list[Any], list[Any]]:
    """The run, its steps and its readings as the store holds them."""
    store = ResultStore(store_path)
    try:
        return store.run(run_id), store.steps(run_id), store.readings(run_id)
    finally:
        store.close()


def printed(capsys: pytest.CaptureFixture[str], run_id: int, *args: str) -> str:
    """What ``rig report RUN ARGS --out -`` prints."""
    assert main(["report", str(run_id), *args, "--out", "-"]) == 0
    return capsys.readouterr().out


def test_html_report_escapes_user_values_and_shows_everything(
    recorded: tuple[Path, Path, int], capsys: pytest.CaptureFixture[str]
) -> None:
    station_file, store_path, run_id = recorded
    assert main(["report", str(run_id), "--station", str(station_file)]) == 0
    target = store_path.parent / "reports" / f"run-{run_id}-img_src_x_onerror_alert_1_HAR.html"
    assert str(target) in capsys.readouterr().out
    html = target.read_text(encoding="utf-8")
    # source: html.escape of the Python standard library as the reference escaping
    assert SERIAL not in html and esc(SERIAL) in html
    assert "<img" not in html and 'onerror="' not in html
    assert esc(OPERATOR) in html
    run, steps, _ = stored(store_path, run_id)
    assert run["sequence_hash"] in html
    for instrument in json.loads(run["instruments"]):
        assert esc(instrument["identity"]) in html
        assert esc(instrument["calibration_due"]) in html
    for step in steps:
        assert f"<td>{esc(step['step_id'])}</td>" in html
    assert 'id="steps"' in html and 'id="readings"' in html and "<svg" in html
    # the failed run's diagnosis: a table from the fault analysis, or why there is none
    assert "<h2>Diagnosis</h2>" in html


def test_diagnosis_names_the_injected_fault_when_the_analysis_is_there(
    recorded: tuple[Path, Path, int], capsys: pytest.CaptureFixture[str]
) -> None:
    station_file, _, run_id = recorded
    text = printed(capsys, run_id, "--station", str(station_file), "--format", "json")
    diagnosis = json.loads(text)["diagnosis"]
    try:
        import rig.analysis.diagnose  # noqa: F401
    except ImportError:
        assert diagnosis["available"] is False and "no diagnosis" in diagnosis["message"]
        return
    assert diagnosis["available"] is True
    assert diagnosis["hypotheses"][0]["spec"] == "open:signal"  # the fault the bench injected


def test_report_from_a_store_without_station_says_why_there_is_no_diagnosis(
    recorded: tuple[Path, Path, int], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    _, store_path, run_id = recorded
    out = tmp_path / "r.html"
    assert main(["report", str(run_id), "--store", str(store_path), "--out", str(out)]) == 0
    assert "no diagnosis is available: give --station" in out.read_text(encoding="utf-8")


def test_report_of_a_run_with_no_unit_file_says_so_and_what_to_give(
    recorded: tuple[Path, Path, int], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # the same run as if run without --unit: a copy of the station whose store has no unit
    station_file, store_path, run_id = recorded
    data = tmp_path / "data"
    data.mkdir()
    shutil.copy(store_path, data / store_path.name)
    with sqlite3.connect(data / store_path.name) as db:
        db.execute("UPDATE runs SET unit = '' WHERE id = ?", (run_id,))
    db.close()
    text = station_file.read_text(encoding="utf-8")
    copied = tmp_path / "station.toml"
    copied.write_text(re.sub(r"(?m)^data_dir = .*$", f"data_dir = {json.dumps(str(data))}", text))
    diagnosis = json.loads(printed(capsys, run_id, "--station", str(copied), "--format", "json"))
    assert diagnosis["diagnosis"]["message"] == (
        "no diagnosis is available: the run records no unit file (it was run without --unit); "
        "give --unit FILE"
    )


def test_csv_carries_the_record_with_formula_safe_cells(
    recorded: tuple[Path, Path, int], capsys: pytest.CaptureFixture[str]
) -> None:
    _, store_path, run_id = recorded
    text = printed(capsys, run_id, "--store", str(store_path), "--format", "csv")
    rows = list(csv.DictReader(io.StringIO(text)))
    _, steps, readings = stored(store_path, run_id)
    assert len(rows) == len(steps)
    # source: OWASP "CSV Injection": a cell starting with = + - @ tab or CR gets a leading '
    assert rows[0]["operator"] == "'" + OPERATOR
    assert rows[0]["serial"] == SERIAL  # starts with "<": left as it is
    for row, step in zip(rows, steps, strict=True):
        assert row["step_id"] == step["step_id"] and row["verdict"] == step["verdict"]
        if step["value"] is not None:
            assert float(row["value"]) == step["value"]  # numbers stay numbers, unrounded
        raw = [
            repr(r["value"])
            if r["value"] is not None
            else ("overload" if r["overload"] == 1 else "not-a-number")
            for r in readings
            if r["step_id"] == step["step_id"]
        ]
        assert row["readings"].split() == raw


@pytest.mark.parametrize(
    ("text", "safe"),
    [
        ("=1+2", "'=1+2"),
        ("+1", "'+1"),
        ("-1", "'-1"),
        ("@SUM(A1)", "'@SUM(A1)"),
        ("\tx", "'\tx"),
        ("\rx", "'\rx"),
        ("plain", "plain"),
        (-1.5, -1.5),
    ],
)
def test_csv_safe_cells(text: object, safe: object) -> None:
    # source: OWASP "CSV Injection" (the characters that start a formula)
    assert csv_safe(text) == safe


def test_json_is_the_stored_record(
    recorded: tuple[Path, Path, int], capsys: pytest.CaptureFixture[str]
) -> None:
    _, store_path, run_id = recorded
    data = json.loads(printed(capsys, run_id, "--store", str(store_path), "--format", "json"))
    store = ResultStore(store_path)
    try:
        expected = run_record(store, run_id)
    finally:
        store.close()
    assert data["run"] == json.loads(json.dumps(expected["run"], default=str))
    assert data["steps"] == json.loads(json.dumps(expected["steps"]))
    assert data["readings"] == json.loads(json.dumps(expected["readings"]))
    assert data["run"]["serial"] == SERIAL and data["run"]["operator"] == OPERATOR


def test_bad_run_id_and_places_are_reported_without_traceback(
    recorded: tuple[Path, Path, int], capsys: pytest.CaptureFixture[str]
) -> None:
    _, store_path, _ = recorded
    assert main(["report", "999", "--store", str(store_path)]) == 2
    assert "RUN 999: no run 999" in capsys.readouterr().err
    assert main(["report", "1", "--store", str(store_path.parent / "missing.sqlite")]) == 2
    assert "no such results store file" in capsys.readouterr().err
    assert (
        main(["report", "1", "--store", str(store_path), "--out", str(SEQUENCES / "r.html")]) == 2
    )
    assert "not written into the source tree" in capsys.readouterr().err
    assert not (SEQUENCES / "r.html").exists()
    with pytest.raises(SystemExit) as stop:
        main(["report", "first", "--store", str(store_path)])
    assert stop.value.code == 2
    assert "RUN: expected a run id (a whole number" in capsys.readouterr().err


def test_the_record_gives_a_prompts_answer_and_says_what_conditional_means(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # ILAC-G8:09/2019 decision rules: the record a customer gets says what a conditional verdict
    # is; an operator's answer reads as one, not as 1 against a limit of 0.5
    with shipped_bench("ntc-sender", folder=tmp_path) as (_, station):
        run_plan(shipped_plan("ntc-sender-screen", station), "R-1", ask=lambda text: True)
        assert main(["report", "1", "--station", str(station.path), "--out", "-"]) == 0
    page = capsys.readouterr().out
    steps = page.split('id="steps"')[1].split("</table>")[0]
    place = next(row for row in steps.split("<tr") if ">place<" in row)
    assert ">confirmed<" in place and ">0.5<" not in place
    assert "ILAC-G8" in page and "conditional fail" in page.split('id="steps"')[1]


def test_a_harness_record_gives_each_nets_reading_against_its_limit(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # what a shop ships a harness on: every net's continuity reading and its limit, in the record
    _, runs = run_demo(tmp_path, cases=HARNESS_CASES[:1])  # the good harness
    assert runs[0].summary.verdict.value == "pass"
    station = tmp_path / "station-harness.toml"
    assert main(["report", "1", "--station", str(station), "--out", "-"]) == 0
    page = capsys.readouterr().out
    assert "Continuity, net by net" in page
    nets = page.split('id="nets"')[1].split("</table>")[0]
    proof = next(r for r in runs[0].summary.results if r.kind == "harness-proof")
    assert nets.count("<tr") - 1 == sum(1 for key in proof.extras if key.endswith(" max_ohm"))
    assert nets.count(">pass<") == nets.count("<tr") - 1 >= int(proof.extras["nets"])
    # the shipped sequence reads the ambient with the bench's Pt100 before the proof
    # (docs/harness.md): the record says the limits were worked out at that reading
    ambient = next(r for r in runs[0].summary.results if r.kind == "reference-temperature")
    assert f"harness: limits at {ambient.value:.1f} °C (measured)" in page


def test_a_net_with_no_reading_is_listed_over_its_limit() -> None:
    # an open net reads overload, which the record keeps as no reading: the net is still listed
    from reports.run_html import _nets

    step = {
        "step_id": "harness",
        "kind": "harness-proof",
        "decision_rule": "simple",
        "extras": {
            "net N1 A-1>B-1 ohm": 0.05,
            "net N1 A-1>B-1 max_ohm": 0.1,
            "net N1 A-1>B-1 u_ohm": 0.004,
            "net N2 A-2>B-2 max_ohm": 0.1,  # its reading was overload
        },
    }
    html = _nets([step])
    rows = html.split("<tr")[2:]
    assert len(rows) == 2
    assert ">pass<" in rows[0] and "no reading" in rows[1] and ">fail<" in rows[1]


def test_a_record_without_each_nets_u_takes_it_from_the_raw_reading() -> None:
    # A record written before the step kept each net's U: the table takes U from the pair's raw
    # reading, as the run did (U = k u, k = 2, JCGM 100:2008 6.2).  0.097 ohm against 0.1 ohm
    # with U = 4 mohm is inside by less than U: a conditional pass under the guarded rule
    # (ILAC-G8:09/2019), where a plain comparison reads it good.
    from reports.run_html import _nets

    step = {
        "step_id": "harness",
        "kind": "harness-proof",
        "decision_rule": "guarded",
        "extras": {"net N1 A-1>B-1 ohm": 0.097, "net N1 A-1>B-1 max_ohm": 0.1},
    }
    raw = {"step_id": "harness", "role": "continuity A-1>B-1", "value": 0.097, "u_std": 0.002}
    other = {**raw, "role": "continuity A-2>B-2", "u_std": 0.0001}
    row = _nets([step], [raw, other]).split("<tr")[2]
    assert ">conditional pass<" in row and ">0.0040<" in row  # U to two digits (GUM 7.2.6)


def test_an_open_sender_reads_overload_in_every_format_not_a_blank(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # A broken lead: the resistance range reads over (SCPI-1999: 9.9E37 is no number) and the
    # store keeps no number for it; the report must say overload where the value goes, as the
    # terminal does, not leave the most common confirmed failure's value blank.
    with shipped_bench("ntc-sender", ("open:lead_b",), folder=tmp_path) as (_, station):
        summary = run_plan(shipped_plan("ntc-sender-screen", station), "OPEN-1", ask=lambda t: True)
    run_id = summary.run_id
    assert summary.verdict.value == "fail"
    step = next(r for r in summary.results if r.kind == "ntc")
    args = ("--station", str(station.path))
    rows = list(csv.DictReader(io.StringIO(printed(capsys, run_id, *args, "--format", "csv"))))
    assert next(r for r in rows if r["step_id"] == step.step_id)["value"] == "overload"
    data = json.loads(printed(capsys, run_id, *args, "--format", "json"))
    in_json = next(s for s in data["steps"] if s["step_id"] == step.step_id)
    assert in_json["value"] is None and in_json["value_text"] == "overload"
    html = printed(capsys, run_id, *args, "--format", "html")
    row = html[html.index(f"<td>{step.step_id}</td>") :]
    assert "overload" in row[: row.index("</tr>")]


def test_the_csv_diagnosis_names_the_faults_the_sequence_cannot_tell_apart() -> None:
    # as the terminal and the HTML do: a spreadsheet reader must not take the first for proved
    from reports.run_export import diagnosis_text

    text = diagnosis_text(
        {
            "hypotheses": [
                {
                    "spec": "drift:sender=+8%",
                    "probability": 0.9,
                    "same_as": ["series:lead_a=288ohm"],
                },
                {"spec": "none", "probability": 0.1, "same_as": []},
            ]
        }
    )
    assert text == "drift:sender=+8% (or series:lead_a=288ohm) 90 %; none 10 %"


def test_a_prompt_s_csv_row_holds_its_answer_and_no_measurement_columns(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with shipped_bench("ntc-sender", folder=tmp_path) as (_, station):
        summary = run_plan(shipped_plan("ntc-sender-screen", station), "ASK-1", ask=lambda t: True)
    args = ("--station", str(station.path), "--format", "csv")
    rows = list(csv.DictReader(io.StringIO(printed(capsys, summary.run_id, *args))))
    prompt = next(r for r in rows if r["kind"] == "prompt")
    assert prompt["value"] == "confirmed" and prompt["verdict"] == "pass"
    assert all(prompt[c] == "" for c in ("low", "high", "u_std", "expanded_u", "coverage_k"))
    assert prompt["decision_rule"] == ""
    measured = next(r for r in rows if r["kind"] == "ntc")
    assert measured["coverage_k"] and measured["decision_rule"]  # measurements keep theirs


def test_the_html_record_lets_a_reviewer_rebuild_a_model_steps_prediction_and_u(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """The sender was judged at the well's measured temperature, with a U made of the meter's
    and the reference probe's parts (GUM 5.1.2): the page names the probe's accuracy and, under
    the model parameters, the temperature judged at and both parts of u(T)."""
    with shipped_bench("ntc-sender", (), folder=tmp_path) as (_, station):
        summary = run_plan(shipped_plan("ntc-sender-screen", station), "REV-1", ask=lambda t: True)
    well = next(r for r in summary.results if r.kind == "reference-temperature")
    html = printed(capsys, summary.run_id, "--station", str(station.path), "--format", "html")
    instruments = html[html.index('id="instruments"') :]
    assert "class A (IEC 60751)" in instruments[: instruments.index("</table>")]
    parameters = html[html.index('id="model-parameters"') :]
    parameters = parameters[: parameters.index("</table>")]
    assert f"<td>judged at</td><td>{well.value:.6g} degC</td>" in parameters.replace(
        ' class="num"', ""
    )
    for part in ("u_meter_c", "u_probe_c"):
        assert f"{well.extras[part]:.6g} degC" in parameters
