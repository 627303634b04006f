"""A stored run as plain data (JSON) and as a CSV of its steps, straight from the results store."""

from __future__ import annotations

import csv
import io
import json
from typing import Any

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
)


def run_record(store: ResultStore, run_id: int) -> dict[str, Any]:
    """Everything kept for one run: header, steps and every raw reading."""
    run = store.run(run_id)
    for key in ("faults", "instruments", "notes"):
        run[key] = json.loads(run[key])
    steps = store.steps(run_id)
    for step in steps:
        step["extras"] = json.loads(step["extras"])
    return {"run": run, "steps": steps, "readings": store.readings(run_id)}


def steps_csv(store: ResultStore, run_id: int) -> str:
    """One row per step, with its value, limits, uncertainty and verdict."""
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=STEP_COLUMNS, extrasaction="ignore")
    writer.writeheader()
    for step in store.steps(run_id):
        writer.writerow(step)
    return buffer.getvalue()
