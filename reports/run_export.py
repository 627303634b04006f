"""A stored run as plain data (JSON) and as CSV, straight from the results store.

CSV cells that hold text are made safe for spreadsheets: a cell starting with ``=``, ``+``,
``-``, ``@``, a tab or a carriage return gets a leading apostrophe, so it is shown and not run as
a formula (common practice, OWASP "CSV Injection").  Numbers are written as numbers.
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Iterable, Mapping
from typing import Any

from rig.config.station import Station
from rig.events import prompt_answer
from rig.planned_steps import recorded_steps, unmeasured_steps
from rig.screening import answered_no, is_screen, screen_decision, step_evidence
from rig.store import ResultStore

STEP_COLUMNS = (
    "position",
    "step_id",
    "kind",
    "title",
    "value",
    "unit",
    "low",
    "high",
    "predicted",
    "u_std",
    "expanded_u",
    "coverage_k",
    "decision_rule",
    "verdict",
    "tur",
    "settle_s",
    "note",
    "model_params",
)
RUN_COLUMNS = (
    "run_id",
    "server_run_id",
    "record_id",
    "serial",
    "sequence",
    "sequence_hash",
    "station",
    "operator",
    "claim",
    "remark",
    "unit_model",
    "study_part",
    "study_trial",
    "run_started_at",
    "run_ended_at",
    "run_status",
    "run_verdict",
    "run_reason",
    "run_end_cause",
    "instruments",
    "screen_decision",
    "screen_decision_meaning",
    "diagnosis",
    "not_measured_notes",
)
NOT_MEASURED_COLUMN = "not_measured"
"""Set only on the rows of planned steps with no result ("not finished" or "not run"): their
value, limits and verdict stay empty, so no formula over those columns counts them as results."""
_FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def csv_safe(value: object) -> object:
    """A text cell with an apostrophe in front when a spreadsheet would read it as a formula."""
    if isinstance(value, str) and value.startswith(_FORMULA_STARTS):
        return "'" + value
    return value


def run_record(
    store: ResultStore,
    run_id: int,
    diagnosis: Mapping[str, Any] | None = None,
    station: Station | None = None,
) -> dict[str, Any]:
    """Everything kept for one run: header, steps, every raw reading, the planned steps it has
    no result for (``station`` plans an older run's sequence again), and its diagnosis."""
    run = store.run(run_id)
    steps = store.steps(run_id)
    readings = store.readings(run_id)
    missing = unmeasured_steps(run, steps, readings, station)
    for key in ("faults", "instruments", "notes"):
        run[key] = json.loads(run[key])
    planned = recorded_steps(run)
    if planned is not None:
        run["planned_steps"] = list(planned)
    for step in steps:
        step["extras"] = json.loads(step["extras"])
        # what a model step's reading was compared with; None: stored before schema 6
        params = step.get("model_params")
        step["model_params"] = None if params is None else json.loads(params)
        if step["verdict"] == "skipped":  # not measured: its input step failed, say (its note)
            step["value_text"] = NOT_MEASURED
        elif step["value"] is None:  # the store keeps no number for an overload or a NaN
            step["value_text"] = no_number_text(step["step_id"], readings)
    record: dict[str, Any] = {
        "run": run,
        "steps": steps,
        "readings": readings,
        "not_measured": [
            {"position": m.position, "step_id": m.step_id, "state": m.state} for m in missing.steps
        ],
        "not_measured_notes": list(missing.notes),
    }
    record["screen_decision"] = run_screen_decision(store, run, steps)
    if diagnosis is not None:
        record["diagnosis"] = dict(diagnosis)
    return record


def run_screen_decision(
    store: ResultStore, run: Mapping[str, Any], steps: Iterable[Mapping[str, Any]]
) -> dict[str, str] | None:
    """The screen's decision on the unit from this run (``rig.screening``, as ``rig stats``
    counts it), or None where the sequence proves a harness: derived, never stored.  The
    sequence's other runs count too, so a proof ended before its proof step is still one."""
    steps = list(steps)
    units = {str(s["unit"]) for s in steps} | store.sequence_units(str(run["sequence_name"]))
    if not is_screen(units):
        return None
    no = answered_no((str(s["unit"]), str(s["verdict"])) for s in steps)
    found = screen_decision(
        str(run["status"]), run["verdict"], step_evidence(steps), answered_no=no
    )
    return {"decision": found.word, "meaning": found.meaning}


def _safe_rows(rows: Iterable[Mapping[str, Any]], columns: tuple[str, ...]) -> str:
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=columns, extrasaction="ignore")
    writer.writeheader()
    for row in rows:
        writer.writerow({k: csv_safe(v) for k, v in row.items()})
    return buffer.getvalue()


def steps_csv(store: ResultStore, run_id: int) -> str:
    """One row per step, with its value, limits, uncertainty and verdict."""
    return _safe_rows(store.steps(run_id), STEP_COLUMNS)


def instruments_text(instruments: Iterable[Mapping[str, Any]]) -> str:
    """Each instrument's role, identity and calibration due date, on one line."""
    return "; ".join(
        f"{i.get('role', '')}: {i.get('identity', '')} (calibration due "
        f"{i.get('calibration_due') or 'not given'})"
        for i in instruments
    )


def diagnosis_text(diagnosis: Mapping[str, Any] | None) -> str:
    """The diagnosis in one line: hypotheses with probabilities, or why there is none."""
    if not diagnosis:
        return ""
    if not diagnosis.get("hypotheses"):
        return str(diagnosis.get("message", ""))
    text = "; ".join(
        f"{h['spec']}{_alike(h)} {100 * float(h['probability']):.0f} %"
        for h in diagnosis["hypotheses"]
    )
    if diagnosis.get("next_check"):
        text += f"; next check: {diagnosis['next_check']}"
    return text


_MEASUREMENT_CELLS = ("low", "high", "predicted", "u_std", "expanded_u", "coverage_k", "tur")


def _answer_cells(step: Mapping[str, Any]) -> dict[str, Any]:
    """An operator prompt's row: its answer in words, and no limits, uncertainty or rule, so
    that a spreadsheet's columns of measurements hold measurements only."""
    value = step["value"]
    answer = prompt_answer(value) if value is not None else step.get("value_text", "")
    return {"value": answer, "decision_rule": "", **dict.fromkeys(_MEASUREMENT_CELLS, "")}


def _alike(hypothesis: Mapping[str, Any]) -> str:
    """The faults the sequence cannot tell from this one (they share its probability)."""
    same = hypothesis.get("same_as") or []
    return f" (or {', '.join(same)})" if same else ""


def record_csv(record: Mapping[str, Any]) -> str:
    """The whole record as one CSV table: a row per step, carrying the run's header fields, its
    instruments and diagnosis, and the step's raw readings (space separated, in order); then a
    row per planned step with no result, named in its own column and nowhere else; a run with
    no step at all still gives one row, of its own fields."""
    run = record["run"]
    header = {
        "run_id": run["id"],
        "server_run_id": run.get("server_id"),
        "record_id": run["run_uid"],
        "serial": run["serial"],
        "sequence": run["sequence_name"],
        "sequence_hash": run["sequence_hash"],
        "station": run["station"],
        "operator": run["operator"],
        "claim": run.get("claim", ""),
        "remark": run.get("remark", ""),
        "unit_model": run.get("unit", ""),
        "study_part": run.get("study_part", ""),
        "study_trial": run.get("study_trial"),
        "run_started_at": run["started_at"],
        "run_ended_at": run["ended_at"],
        "run_status": run["status"],
        "run_verdict": run["verdict"],
        "run_reason": run["reason"],
        "run_end_cause": run.get("end_cause"),
        "instruments": instruments_text(run["instruments"]),
        "screen_decision": (record.get("screen_decision") or {}).get("decision", ""),
        "screen_decision_meaning": (record.get("screen_decision") or {}).get("meaning", ""),
        "diagnosis": diagnosis_text(record.get("diagnosis")),
        "not_measured_notes": " ".join(record.get("not_measured_notes", [])),
    }
    readings: dict[str, list[str]] = {}
    for r in record["readings"]:
        readings.setdefault(r["step_id"], []).append(_reading_text(r))
    rows = [
        {
            **header,
            **step,
            "run_id": header["run_id"],  # the step's row keeps the id of the store it is in
            "value": step.get("value_text", step["value"]),  # a word where there is no number
            "model_params": model_params_text(step.get("model_params")),
            AMBIENT_COLUMN: ambient_text(step),
            **(_answer_cells(step) if step.get("kind") == "prompt" else {}),
            "readings": " ".join(readings.get(step["step_id"], [])),
        }
        for step in record["steps"]
    ]
    rows += [
        {
            **header,
            "position": m["position"],
            "step_id": m["step_id"],
            NOT_MEASURED_COLUMN: m["state"],
            "readings": " ".join(readings.get(m["step_id"], [])),
        }
        for m in record.get("not_measured", [])
    ]
    columns = (*RUN_COLUMNS, *STEP_COLUMNS, AMBIENT_COLUMN, NOT_MEASURED_COLUMN, "readings")
    return _safe_rows(rows or [header], columns)


AMBIENT_COLUMN = "ambient"
"""A harness step's ambient (``ambient_text``); empty on every other row."""


def ambient_text(step: Mapping[str, Any], degrees: str = "degC") -> str:
    """The ambient a harness step worked at, and whether it was stated or measured:
    ``limits at 23.0 °C (stated)`` for a check, whose every copper limit is moved to it (so the
    proof of a harness must state it), ``captured at ...`` for a capture; empty for any other
    step.  A record kept before the source was ``not recorded`` says so.  ``degrees`` is the
    unit's symbol: ``degC`` as the CSV's unit column writes it, ``°C`` on a page."""
    extras = step.get("extras") or {}
    if step.get("kind") != "harness-proof" or not isinstance(extras, Mapping):
        return ""
    temp_c = extras.get("temperature_c")
    if not isinstance(temp_c, int | float):
        return ""
    measured = extras.get("temperature_measured")
    source = (
        "stated or measured: not recorded"
        if not isinstance(measured, int | float)
        else ("measured" if measured else "stated")
    )
    what = "captured at" if step.get("unit") == "nets" else "limits at"
    return f"{what} {temp_c:.1f} {degrees} ({source})"


def model_params_text(params: Mapping[str, str] | None) -> str:
    """A step's model parameters on one line: ``r25 = 2 kohm; beta = 3450 K``."""
    return "; ".join(f"{key} = {value}" for key, value in (params or {}).items())


NOT_MEASURED = "not measured"
"""A skipped step's value, as ``rig run`` shows it: no reading was taken, so none failed to read
(an open circuit's ``no reading`` or ``overload`` is a finding on the unit; this is none)."""


def no_number_text(step_id: str, readings: Iterable[Mapping[str, Any]]) -> str:
    """Why a step has no value, in the words a reading gives: ``overload`` where one of its
    settled readings read over (an open circuit on a resistance range), else ``no reading``."""
    over = any(
        r["step_id"] == step_id and r.get("settled") and r.get("overload") == 1 for r in readings
    )
    return "overload" if over else "no reading"


def _reading_text(reading: Mapping[str, Any]) -> str:
    """A raw reading as text; the store keeps no number for an overload or a NaN."""
    if reading["value"] is not None:
        return repr(reading["value"])
    return "overload" if reading.get("overload") == 1 else "not-a-number"


def record_json(record: Mapping[str, Any]) -> str:
    """The record as indented JSON (NaN never appears: the store keeps none)."""
    return json.dumps(record, indent=2, default=str) + "\n"
