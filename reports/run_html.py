"""The per-run record as a self-contained HTML page: header, instruments, every step with its
reading, limits, uncertainty and verdict, a plot of the margins, the diagnosis, raw readings."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

from reports.html_page import DECISION_CLASS, VERDICT_CLASS, esc, figure, page, table
from reports.run_export import ambient_text
from reports.svg_plots import margin_chart
from rig import __version__
from rig.events import CUT_SHORT, NOT_RUN, allows_none, prompt_answer
from rig.judge.decision import COVERAGE_K, DecisionRule, Limits, judge, tur_text
from rig.steps import KINDS
from rig.value_digits import limit_at_place, shown_place, value_and_u


def num(value: object, digits: int = 7) -> str:
    """A number for a table cell; empty for a missing one."""
    if value is None:
        return ""
    if isinstance(value, float):
        return "" if not math.isfinite(value) else f"{value:.{digits}g}"
    return str(value)


def _ratio(tur: float | None) -> str:
    """A test uncertainty ratio as ``rig run`` and ``rig check`` show it (``tur_text``: under 4:1
    rounded down and marked LOW); empty where there is none."""
    if tur is None or not math.isfinite(tur):
        return ""
    return tur_text(tur)


def _header(run: Mapping[str, Any]) -> str:
    study = (
        f"part {run.get('study_part')}, trial {run.get('study_trial')}"
        if run.get("study_part")
        else "no (production run)"
    )
    rows = [
        ("unit serial", run["serial"]),
        ("sequence", run["sequence_name"]),
        ("sequence hash (SHA-256)", run["sequence_hash"]),
        ("sequence file", run["sequence_path"]),
        ("station", run["station"]),
        ("operator", run["operator"] or "(not given)"),
        ("claim / return number", run.get("claim") or "(not given)"),
        ("remark", run.get("remark") or "(none)"),
        ("unit model", run.get("unit") or "(not given)"),
        ("gauge study", study),
        ("started (UTC)", run["started_at"]),
        ("ended (UTC)", run["ended_at"] or "(not ended)"),
        ("status", run["status"]),
        ("verdict", run["verdict"] or ""),
        ("reason", run["reason"] or ""),
    ]
    if run.get("end_cause"):  # a run ended short of its end, recorded since schema 6
        rows.append(("end cause", run["end_cause"]))
    rows += [("note", note) for note in run["notes"]]
    return "<h2>Run</h2>" + table(["field", "value"], rows, table_id="run-header")


def _instruments(run: Mapping[str, Any]) -> str:
    rows = [
        [
            i.get("role", ""),
            i.get("identity", ""),
            i.get("resource", ""),
            i.get("calibration_due") or "not given",
            i.get("accuracy", ""),
        ]
        for i in run["instruments"]
    ]
    return "<h2>Instruments</h2>" + table(
        ["role", "identity", "resource", "calibration due", "accuracy"],
        rows,
        table_id="instruments",
    )


DECISION_NOTE = (
    "Each value is judged against its limits with its expanded uncertainty U (k = 2, about 95 "
    "%, GUM) under the step's decision rule (ILAC-G8:09/2019). Values and U are shown to the "
    "digits U supports: U to two significant digits, rounded up, the value to the same decimal "
    "place (GUM 7.2.6), finer where it would read as a limit it is not equal to, and the limits"
    " to the value's place; the verdicts were reached with the unrounded values, kept in the "
    "CSV and JSON records. Under the guarded rule a value within U of a limit is conditional: a"
    " conditional pass lies inside the limits and a conditional fail outside, but this "
    "measurement cannot rule out the other side. Retest, or measure with a smaller U, before "
    "deciding on such a unit."
)


def _answered(s: Mapping[str, Any]) -> bool:
    """An operator prompt's step: its value is the answer, 1 or 0, not a reading."""
    return s.get("kind") == "prompt" and s["value"] is not None and math.isfinite(s["value"])


def _value_cells(s: Mapping[str, Any]) -> tuple[str, str, str, str]:
    """The value, U, low and high limit cells: an answer or a word where there is no number; a
    reading and its limits to the digits its U supports (``value_and_u``, GUM 7.2.6), the
    limits to the value's decimal place, finer where the value would read as one of them (as
    the nets and ``rig run`` show them); for a step with no reading to judge (a prompt, a soak)
    no U, since none was stated."""
    value, u, low, high = s["value"], s["expanded_u"], s["low"], s["high"]
    if _answered(s):
        return prompt_answer(value), "", "", num(high)
    if s.get("value_text") or value is None or not math.isfinite(value):
        return s.get("value_text") or num(value), num(u, 3), num(low), num(high)
    if not _judged(s) or u is None:
        return num(value), "", num(low), num(high)
    bounds = [x for x in (low, high) if x is not None and math.isfinite(x)]
    place = shown_place(value, u, bounds)
    if place is None:
        return (*value_and_u(value, u), num(low), num(high))
    low_text, high_text = (limit_at_place(x, place) if x in bounds else num(x) for x in (low, high))
    return (*value_and_u(value, u, bounds), low_text, high_text)


def _judged(s: Mapping[str, Any]) -> bool:
    """Whether the step's value is a reading judged against limits with an uncertainty (not an
    operator's answer or a time waited); a kind rig no longer knows is shown as judged."""
    kind = KINDS.get(str(s.get("kind")))
    return kind is None or kind.judged


def _predicted_cell(s: Mapping[str, Any]) -> str:
    """A model's prediction beside its reading: to the reading's decimal place, as the limits
    computed from it are (``limit_at_place``), where the reading has digits U supports."""
    predicted, value, u = s["predicted"], s["value"], s["expanded_u"]
    if predicted is None or not math.isfinite(predicted) or value is None or u is None:
        return num(predicted)
    bounds = [x for x in (s["low"], s["high"]) if x is not None and math.isfinite(x)]
    place = shown_place(value, u, bounds) if math.isfinite(value) else None
    return num(predicted) if place is None else limit_at_place(predicted, place)


def _step_row(s: Mapping[str, Any]) -> list[object]:
    value, u, low, high = _value_cells(s)
    judged = _judged(s)
    return [
        s["position"],
        s["step_id"],
        s["title"],
        value,
        s["unit"],
        low,
        high,
        _predicted_cell(s),
        u,
        num(s["coverage_k"], 3) if judged else "",
        s["decision_rule"] if judged else "",
        _ratio(s["tur"]),
        s["verdict"],
        s["note"],
    ]


def _steps(steps: list[Mapping[str, Any]]) -> str:
    rows = [_step_row(s) for s in steps]
    headers = [
        "#",
        "step",
        "title",
        "value",
        "unit",
        "low limit",
        "high limit",
        "predicted",
        "U (expanded)",
        "k",
        "decision rule",
        "TUR",
        "verdict",
        "note",
    ]
    return (
        "<h2>Steps</h2>"
        + table(
            headers, rows, numeric=(0, 3, 5, 6, 7, 8, 9, 11), verdict_column=12, table_id="steps"
        )
        + f'<p class="note">{esc(DECISION_NOTE)}</p>'
    )


NOT_MEASURED_NOTE = (
    f"The run ended before these planned steps gave a result, so nothing was judged for them: "
    f"{CUT_SHORT} is the step under way when the run ended (any raw readings it took are listed "
    f"below), {NOT_RUN} a step never begun."
)


MODEL_NOTE = (
    "Each reading of these steps was judged against what the sensor model predicts at the "
    "step's temperature (or pressure) with these parameters, as the sequence file gave them "
    "when the run was made."
)


def _model_parameters(steps: list[Mapping[str, Any]]) -> str:
    """What each model step's reading was compared with, under the steps: a reviewer of the
    record must see it without the sequence file (which may since have changed)."""
    rows = [
        [s["step_id"], key, _parameter_text(s, key, value)]
        for s in steps
        for key, value in [*(s.get("model_params") or {}).items(), *_conditions(s)]
    ]
    if not rows:
        return ""
    return (
        "<h2>Model parameters</h2>"
        + table(["step", "parameter", "value"], rows, table_id="model-parameters")
        + f'<p class="note">{esc(MODEL_NOTE)}</p>'
    )


def _parameter_text(step: Mapping[str, Any], key: str, value: str) -> str:
    """A recorded parameter in the words its step kind shows it in (a ratiometric tolerance
    as percentage points of supply); the record's text for a kind this rig does not know."""
    kind = KINDS.get(str(step.get("kind")))
    return value if kind is None else kind.parameter_text(key, value)


CONDITIONS = (
    ("temperature_c", "judged at", "degC"),
    ("reference_v", "reference measured", "V"),
    ("predicted_r_ohm", "predicted resistance", "ohm"),
    ("u_meter_c", "u(T) from the meter", "degC"),
    ("u_probe_c", "u(T) from the probe", "degC"),
)
"""A model step's extras that say where its prediction came from and what its U is made of:
(key, row name, unit)."""


def _conditions(step: Mapping[str, Any]) -> list[tuple[str, str]]:
    """The conditions a model step was judged at, from its extras, as rows under its parameters
    (none for a step with no model): a reviewer can rebuild its prediction and its U."""
    extras = step.get("extras") or {}
    if not step.get("model_params") or not isinstance(extras, Mapping):
        return []
    return [
        (name, f"{float(extras[key]):.6g} {unit}")
        for key, name, unit in CONDITIONS
        if isinstance(extras.get(key), int | float)
    ]


def _not_measured(record: Mapping[str, Any]) -> str:
    """The planned steps with no result, after the judged ones, in plan order: a record of an
    aborted run must show what was never measured."""
    missing = record.get("not_measured") or []
    notes = "".join(f'<p class="note">{esc(n)}</p>' for n in record.get("not_measured_notes", []))
    if not missing and not notes:
        return ""
    text = "<h2>Planned steps not measured</h2>" + notes
    if missing:
        rows = [[m["position"], m["step_id"], m["state"]] for m in missing]
        text += table(["#", "step", "state"], rows, numeric=(0,), table_id="not-measured")
        text += f'<p class="note">{esc(NOT_MEASURED_NOTE)}</p>'
    return text


def _nets(steps: list[Mapping[str, Any]], readings: Sequence[Mapping[str, Any]] = ()) -> str:
    """A harness proof's continuity net by net: each reading against its limit, the figures a
    shop ships or rejects a harness on (kept in the step's extras as ``net N A>B ohm``,
    ``... max_ohm`` and ``... u_ohm``).  Each is judged as the run judged it: with the step's
    decision rule and the reading's expanded U, so that a net within U of its limit under the
    guarded rule reads conditional here too, not within or over by a plain comparison."""
    rows = []
    for s in steps:
        extras = s.get("extras") or {}
        if s.get("kind") != "harness-proof" or not isinstance(extras, Mapping):
            continue
        rule = _rule(s.get("decision_rule"))
        for key, limit in extras.items():
            if not (key.startswith("net ") and key.endswith(" max_ohm")):
                continue
            name = key.removesuffix(" max_ohm")
            net, _, ends = name.removeprefix("net ").rpartition(" ")
            hi, _, lo = ends.partition(">")
            value = extras.get(f"{name} ohm")  # absent: no reading (an open net reads overload)
            u = extras.get(f"{name} u_ohm")
            if u is None:  # a record from before U was kept: that of the pair's raw reading
                u = _raw_expanded_u(readings, str(s["step_id"]), ends)
            verdict = (
                judge(math.nan if value is None else value, Limits(None, limit), u, rule).value
                if math.isfinite(limit)
                else "no limit"
            )
            rows.append([s["step_id"], net, hi, lo, *_net_cells(value, limit, u), verdict])
    ambients = [_ambient_line(s) for s in steps if ambient_text(s)]
    if not rows and not ambients:
        return ""
    headers = ["step", "net", "from", "to", "reading (ohm)", "limit (ohm)", "U (ohm)", "verdict"]
    nets = (
        table(headers, rows, numeric=(4, 5, 6), verdict_column=7, table_id="nets")
        + f'<p class="note">{esc(NETS_NOTE)}</p>'
        if rows
        else ""
    )
    heading = "Continuity, net by net" if rows else "Harness ambient"
    return f"<h2>{heading}</h2>" + "".join(ambients) + nets


def _ambient_line(step: Mapping[str, Any]) -> str:
    """The ambient a harness step's copper limits were moved to, above its nets: every limit
    depends on it, so the proof of a harness states it."""
    text = f"{step['step_id']}: {ambient_text(step, '°C')}"
    if step.get("unit") != "nets":
        text += "; every copper limit below is moved to this ambient"
    return f'<p class="ambient">{esc(text)}</p>'


def _net_cells(value: float | None, limit: float, u: float) -> tuple[str, str, str]:
    """A net's reading, limit and U: the reading and U to the digits U supports, the limit to
    the reading's decimal place, finer where the two would read alike (``shown_place``); with
    no reading or no U, the limit to three significant digits, as the findings quote it."""
    place = None if value is None else shown_place(value, u, [limit])
    if value is None or place is None:
        reading = "no reading" if value is None else num(value)
        return reading, num(limit, 3), num(u, 3)
    reading, u_text = value_and_u(value, u, [limit])
    return reading, limit_at_place(limit, place) if math.isfinite(limit) else "", u_text


NETS_NOTE = (
    "Each net is judged as the run judged it: its reading against its limit with the reading's "
    "expanded uncertainty U (k = 2) under the step's decision rule (ILAC-G8:09/2019). Readings "
    "and U are shown to the digits U supports (GUM 7.2.6), each limit to its reading's decimal "
    "place; the verdicts were reached with the unrounded figures, kept in the CSV and JSON."
)


def _rule(text: object) -> DecisionRule:
    """The step's stored decision rule; simple where the record names none it knows."""
    try:
        return DecisionRule(text)
    except ValueError:
        return DecisionRule.SIMPLE


def _raw_expanded_u(readings: Sequence[Mapping[str, Any]], step_id: str, ends: str) -> float:
    """U (k = 2) of the last raw reading of the pair ``HI>LO`` in the step, 0 where none has
    one: the figure the run judged the net with (``rig.harness.continuity.read_check``)."""
    roles = {f"continuity {ends}", f"join {ends}"}
    found = [
        r["u_std"]
        for r in readings
        if r.get("step_id") == step_id
        and r.get("role") in roles
        and r.get("value") is not None
        and isinstance(r.get("u_std"), float)
        and math.isfinite(r["u_std"])
    ]
    return COVERAGE_K * found[-1] if found else 0.0


def margin_scale(low: float | None, high: float | None) -> tuple[float, float] | None:
    """Where a step's limits put 0 and what one unit of the margin plot is, in the step's unit:
    the low limit and the band's width for two limits; for one limit alone, its own size, with
    the limit at 0 (a low limit) or 1 (a high one; 0 is then zero for a positive limit).  None
    where there is no band to scale by (no limit, an empty band, one limit at zero)."""
    if low is not None and high is not None:
        return (low, high - low) if high > low else None
    limit = low if low is not None else high
    if limit is None or limit == 0.0:
        return None
    size = abs(limit)
    return (limit, size) if low is not None else (limit - size, size)


def _margins(steps: list[Mapping[str, Any]]) -> str:
    """Each step with limits where its value lies against them (one limit alone: scaled by its
    size, the other side open); a reading that overloaded the meter (a failed step, often the
    one that matters) at the plot's edge, marked so, and a step with no reading at all, or one
    limit at zero, named under the plot."""
    labels, positions, half, sides, unplotted, unscaled, counts = [], [], [], [], [], [], []
    for s in steps:
        if not _judged(s):  # a prompt's answer or a wait: no reading to place against limits
            continue
        low, high, value = s["low"], s["high"], s["value"]
        scale = margin_scale(low, high)
        if scale is None:
            if allows_none(Limits(low, high), str(s.get("unit"))):  # a harness's faults
                counts.append(str(s["step_id"]))
            elif (low is None) != (high is None):  # one limit at zero: nothing to scale by
                unscaled.append(str(s["step_id"]))
            continue
        zero, width = scale
        if value is None or not math.isfinite(value):
            if s.get("value_text") != "overload":
                unplotted.append(f"{s['step_id']} ({s.get('value_text') or 'no reading'}, "
                                 f"{s['verdict']})")  # fmt: skip
                continue
            value = math.inf  # over the meter's range: no number, at the right edge
        labels.append(str(s["step_id"]))
        positions.append((value - zero) / width)
        half.append((s["expanded_u"] or 0.0) / width)
        sides.append((low is not None, high is not None))
    missing = " ".join(
        why.format(", ".join(names))
        for why, names in (
            ("Not drawn, no value: {}.", unplotted),
            (
                "Not drawn: {}, whose only limit is zero, so there is nothing to measure how far "
                "its value lies from it against.",
                unscaled,
            ),
            (
                "Not drawn: {}, a count of faults found where none is allowed (the faults are "
                "named in its note; each net's reading against its limit is in the table above).",
                counts,
            ),
        )
        if names
    )
    if not labels:
        none = f"No step has limits and a value: no margin plot. {missing}".strip()
        return f'<p class="note">{esc(none)}</p>'
    caption = (
        "Each step's value within its limits (green band), with its expanded uncertainty; a "
        "step with only a low or only a high limit against that limit, scaled by the limit's "
        "size, its band open on the other side; a reading over the meter's range at the right "
        "edge, marked overload."
    )
    return "<h2>Margins</h2>" + figure(
        margin_chart(labels, positions, half, sides), f"{caption} {missing}".strip()
    )


def _diagnosis(diagnosis: Mapping[str, Any] | None) -> str:
    if diagnosis is None:
        return ""
    if not diagnosis.get("hypotheses"):
        return f'<h2>Diagnosis</h2><p id="diagnosis">{esc(diagnosis.get("message"))}</p>'
    rows = [
        [
            h["spec"],
            f"{100 * float(h['probability']):.1f} %",
            h.get("where", ""),
            ", ".join(h.get("same_as", [])),
        ]
        for h in diagnosis["hypotheses"]
    ]
    headers = ["fault hypothesis", "probability", "where", "cannot be told apart from"]
    text = "<h2>Diagnosis</h2>" + table(headers, rows, numeric=(1,), table_id="diagnosis")
    if diagnosis.get("next_check"):
        text += f"<p>Next check: {esc(diagnosis['next_check'])}</p>"
    return text


def _readings(readings: list[Mapping[str, Any]]) -> str:
    rows = [
        [
            r["step_id"],
            r["role"],
            r["function"],
            num(r["value"], 10)
            if r["value"] is not None
            else ("overload" if r["overload"] == 1 else "not a number"),
            num(r["range"]),
            num(r["nplc"]),
            num(r["u_std"], 3),
            "yes" if r["settled"] else "",
        ]
        for r in readings
    ]
    headers = ["step", "role", "function", "reading", "range", "NPLC", "u (std)", "value taken"]
    return "<h2>Raw readings</h2>" + table(headers, rows, numeric=(3, 4, 5, 6), table_id="readings")


def _headline(verdict: str, found: Mapping[str, str] | None) -> str:
    """The verdict and, for a screen, its decision on the unit beside it, coloured by the
    decision: a simple-rule pass within U of a limit is no clean pass for a returned unit
    (ILAC-G8:09/2019), so its colour must not say so.  A harness proof's is the verdict's."""
    shown = f'Verdict: <strong id="verdict">{esc(verdict.upper())}</strong>'
    if not found:
        colour = VERDICT_CLASS.get(verdict, "")
        return f'<p id="headline"><span class="{colour}">{shown}</span></p>'
    colour = DECISION_CLASS.get(found["decision"], "")
    return (
        f'<p id="headline"><span class="{colour}">{shown} · Screen decision: '
        f'<strong id="screen-decision">{esc(found["decision"])}</strong></span>'
        f" ({esc(found['meaning'])})</p>"
    )


def _which_run(run: Mapping[str, Any]) -> str:
    """The run as its station numbers it (None: not known here), the results server's own
    number where the record was read from there, and the record id, the same in every store."""
    own = f"run {run['id']}" if run["id"] is not None else "a run"
    server = run.get("server_id")
    where = f"results server record {server}; " if server is not None else ""
    return f"{own} of station {run['station']} ({where}record id {run['run_uid']})"


def render_run(record: Mapping[str, Any]) -> str:
    """The record (``reports.run_export.run_record``) as a complete HTML page."""
    run = record["run"]
    verdict = str(run["verdict"] or run["status"])
    found = record.get("screen_decision")
    outcome = f"{verdict}; screen decision: {found['decision']}" if found else verdict
    title = f"Test record {run['serial']}: {run['sequence_name']} ({outcome})"
    sections = [
        f"<h1>{esc(title)}</h1>",
        _headline(verdict, found),
        _header(run),
        _instruments(run),
        _steps(record["steps"]),
        _model_parameters(record["steps"]),
        _not_measured(record),
        _nets(record["steps"], record["readings"]),
        _margins(record["steps"]),
        _diagnosis(record.get("diagnosis")),
        _readings(record["readings"]),
        f'<p class="note">Written by rig {esc(__version__)} from {esc(_which_run(run))}.</p>',
    ]
    return page(title, sections)
