"""The two pictures the console draws: an NTC reading against its curve, and a step over runs.

An NTC is judged at one temperature, but seeing the reading against the whole nominal curve and
its tolerance band tells at a glance whether the part is off by a little, off its curve, or open.
The trend of one step over the last runs of a sequence shows drift toward a limit before it fails.
"""

from __future__ import annotations

import math
from typing import Any

from rig.console.chart import Chart, Line, Mark
from rig.console.words import quantity_cells, verdict_word
from rig.events import StepResult
from rig.judge.decision import Verdict
from rig.models.divider import divider_voltage
from rig.models.ntc import NtcModel
from rig.steps import StepSpec
from rig.steps.limits import apply_tolerance
from rig.store import ResultStore

NTC_SPAN_C = 8.0
"""The curve is drawn this far either side of the measured temperature."""

CURVE_POINTS = 61
TREND_RUNS = 20
FAILING = {"fail", "conditional fail", "error"}


def ntc_nominal(spec: StepSpec, result: StepResult, temp_c: float) -> float:
    """What the step expects at ``temp_c``: R(T), or the pull-up divider voltage of R(T)."""
    model: NtcModel = spec.params["model"]
    r = float(model.r_at(temp_c))
    if spec.params.get("mode") != "voltage":
        return r
    v_ref = float(result.extras.get("reference_v") or spec.params.get("reference_v") or math.nan)
    return float(divider_voltage(v_ref, float(spec.params["pullup_ohm"]), r))


def ntc_chart(spec: StepSpec, result: StepResult) -> Chart | None:
    """Nominal curve, tolerance band and the reading at the measured temperature."""
    temp = result.extras.get("temperature_c")
    tolerance = spec.params.get("tolerance")
    if temp is None or not math.isfinite(temp) or tolerance is None:
        return None
    first = math.floor(temp - NTC_SPAN_C)
    span = math.ceil(temp + NTC_SPAN_C) - first
    temps = [first + span * i / (CURVE_POINTS - 1) for i in range(CURVE_POINTS)]
    nominal = [ntc_nominal(spec, result, t) for t in temps]
    if not all(math.isfinite(v) for v in nominal):
        return None
    bands = [apply_tolerance(v, tolerance) for v in nominal]
    cells = quantity_cells(result.value, result.unit, result.limits, None)
    lines = [
        Line(list(zip(temps, nominal, strict=True)), "cyan"),
        Line(
            [(t, b.low) for t, b in zip(temps, bands, strict=True) if b.low is not None],
            "yellow",
            dotted=True,
        ),
        Line(
            [(t, b.high) for t, b in zip(temps, bands, strict=True) if b.high is not None],
            "yellow",
            dotted=True,
        ),
    ]
    marks = []
    if math.isfinite(result.value):
        marks.append(Mark(temp, result.value, "*", "bold reverse"))
    legend = (
        "line: nominal curve   dots: tolerance band\n"
        f"*: reading {cells.reading} {cells.unit} at {temp:.2f} °C, "
        f"{verdict_word(result.verdict)}"
    )
    unit = "ohm" if result.unit == "ohm" else result.unit
    return Chart(
        lines, marks, x_label="temperature °C", y_label=f"{spec.id} ({unit})", legend=legend
    )


def step_history(
    store: ResultStore, station: str, sequence: str, step_id: str, runs: int = TREND_RUNS
) -> list[dict[str, Any]]:
    """The step's stored rows in the last ``runs`` runs of ``sequence`` at ``station``, oldest
    first."""
    found: list[dict[str, Any]] = []
    for run in store.runs(limit=runs * 5):
        if run["station"] != station or run["sequence_name"] != sequence:
            continue
        row = next((s for s in store.steps(int(run["id"])) if s["step_id"] == step_id), None)
        if row is not None:
            found.append({**row, "serial": run["serial"]})
        if len(found) >= runs:
            break
    return list(reversed(found))


def trend_chart(rows: list[dict[str, Any]], step_id: str) -> Chart | None:
    """Each run's reading (o within limits, x outside) with the limits as dotted lines."""
    points = [(i + 1, r["value"]) for i, r in enumerate(rows) if r["value"] is not None]
    if not points:
        return None
    marks = [
        Mark(
            float(i + 1),
            float(r["value"]),
            "x" if r["verdict"] in FAILING else "o",
            "bold red" if r["verdict"] in FAILING else "green",
        )
        for i, r in enumerate(rows)
        if r["value"] is not None and math.isfinite(r["value"])
    ]
    lines = []
    for key in ("low", "high"):
        limit = [(float(i + 1), float(r[key])) for i, r in enumerate(rows) if r[key] is not None]
        if limit:
            lines.append(Line(limit, "yellow", dotted=True))
    unit = str(rows[-1]["unit"])
    failing = sum(1 for r in rows if r["verdict"] in FAILING)
    legend = (
        f"o: within limits   x: outside ({failing} of {len(rows)})   dots: limits\n"
        f"last: {rows[-1]['serial']} {verdict_word(Verdict(rows[-1]['verdict']))}"
    )
    return Chart(
        lines,
        marks,
        x_label=f"last {len(rows)} run{'s' if len(rows) != 1 else ''}",
        x_ends=("oldest", "newest"),
        y_label=f"{step_id} ({unit})",
        legend=legend,
    )
