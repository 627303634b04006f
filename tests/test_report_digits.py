"""The HTML report's step table and margin plot: values to the digits their uncertainty supports,
no uncertainty or rule for a step with no reading to judge, and a reading that overloaded the
meter drawn at the plot's edge.

A test engineer's trial found ambient shown as ``23.00376`` against U 0.235, a prompt's row with
U ``0``, k ``2`` and rule ``guarded`` (the CSV leaves them empty), and the one failed step of the
run, an overload, missing from the margins plot.  The runs here are the demo's, recorded through
the real drivers on the virtual bench into a SQLite file.
"""

from __future__ import annotations

import csv
import io
import math
import re
from decimal import Decimal
from typing import Any

import pytest

from reports.run_export import record_csv, run_record
from reports.run_html import margin_scale, render_run
from rig.demo import CASES, run_demo
from rig.store import ResultStore
from rig.value_digits import at_place, limit_at_place, shown_place, value_and_u


@pytest.mark.parametrize(
    ("value", "u", "shown"),
    [
        # JCGM 100:2008 (GUM) 7.2.2, its example: m_S = 100.021 47 g with u_c = 0.35 mg
        (100.02147, 0.00035, ("100.02147", "0.00035")),
        # GUM 7.2.6: "u_c(y) = 10.47 mOhm might be rounded up to 11 mOhm" (from memory); the
        # value to the same decimal place, the units digit
        (2500.3, 10.47, ("2500", "11")),
        # the trial's ambient: two significant digits of U, rounded up; the value to its place
        (23.00376, 0.235, ("23.00", "0.24")),
        # a carry that takes U to one more digit keeps two significant digits: 0.0996 -> 0.10
        (1.0, 0.0996, ("1.00", "0.10")),
        # U of tens: the value rounded to tens (GUM 7.2.6, the same decimal place)
        (12345.6, 230.4, ("12350", "240")),
    ],
)
def test_a_value_is_shown_to_the_decimal_place_of_its_two_digit_uncertainty(
    value: float, u: float, shown: tuple[str, str]
) -> None:
    assert value_and_u(value, u) == shown
    # rounding up: the U shown is never smaller than the U judged with
    assert float(value_and_u(value, u)[1]) >= u


SERIALS = ("NTC-0003", "HAR-0102")
"""The demo's open sender lead (a prompt, overloads on two resistance steps) and open signal wire
(volts steps that fail, an overloaded wire drop)."""


@pytest.fixture(scope="module")
def records(tmp_path_factory: pytest.TempPathFactory) -> dict[str, dict[str, Any]]:
    """The records of those demo runs, as ``rig report`` renders them, by serial."""
    cases = tuple(c for c in CASES if c.serial in SERIALS)
    store_path, runs = run_demo(tmp_path_factory.mktemp("digits"), cases=cases)
    store = ResultStore(store_path)
    try:
        return {r.case.serial: run_record(store, r.summary.run_id) for r in runs}
    finally:
        store.close()


def step_rows(html: str) -> dict[str, dict[str, str]]:
    """The steps table as {step id: {column: cell text}}."""
    table = re.search(r'<table id="steps".*?</table>', html, re.S)
    assert table is not None
    rows = [
        [re.sub(r"<.*?>", "", cell) for cell in re.findall(r"<t[dh][^>]*>(.*?)</t[dh]>", row, re.S)]
        for row in re.findall(r"<tr>(.*?)</tr>", table.group(0), re.S)
    ]
    header, *body = rows
    return {row[1]: dict(zip(header, row, strict=True)) for row in body}


def test_a_prompt_row_has_no_uncertainty_factor_or_rule_as_in_the_csv(
    records: dict[str, dict[str, Any]],
) -> None:
    record = records["NTC-0003"]
    prompts = [s for s in record["steps"] if s["kind"] == "prompt"]
    assert prompts and all(s["expanded_u"] == 0.0 for s in prompts)  # as the store keeps it
    rows = step_rows(render_run(record))
    in_csv = {r["step_id"]: r for r in csv.DictReader(io.StringIO(record_csv(record)))}
    for step in prompts:
        row = rows[step["step_id"]]
        assert row["value"] == "confirmed"
        shown = [row[c] for c in ("U (expanded)", "k", "decision rule", "TUR", "low limit")]
        assert shown == ["", "", "", "", ""]
        kept = in_csv[step["step_id"]]
        assert [kept[c] for c in ("expanded_u", "coverage_k", "decision_rule")] == ["", "", ""]


@pytest.mark.parametrize("serial", SERIALS)
def test_values_and_u_are_rounded_in_html_and_kept_whole_in_csv_with_verdicts_unchanged(
    serial: str, records: dict[str, dict[str, Any]]
) -> None:
    record = records[serial]
    rows = step_rows(render_run(record))
    in_csv = {r["step_id"]: r for r in csv.DictReader(io.StringIO(record_csv(record)))}
    measured = [s for s in record["steps"] if s["value"] is not None and s["kind"] != "prompt"]
    assert measured
    for step in measured:
        row = rows[step["step_id"]]
        limits = [x for x in (step["low"], step["high"]) if x is not None]
        shown = value_and_u(step["value"], step["expanded_u"], limits)
        assert (row["value"], row["U (expanded)"]) == shown
        place = shown_place(step["value"], step["expanded_u"], limits)
        assert place is not None  # each measured step here has a U
        for column, limit in (("low limit", step["low"]), ("high limit", step["high"])):
            # each limit to the value's decimal place (GUM 7.2.6 gives the value's), a stated
            # limit that place holds exactly without trailing zeros
            assert row[column] == ("" if limit is None else limit_at_place(limit, place)), column
            if limit is not None:
                assert Decimal(row[column]) == Decimal(at_place(limit, place)), column
        assert float(in_csv[step["step_id"]]["value"]) == step["value"]  # full precision
    for step in record["steps"]:  # the stored verdicts, reached with the unrounded values
        assert rows[step["step_id"]]["verdict"] == step["verdict"]


def test_the_trials_ambient_shows_two_digits_of_u_and_the_value_to_match(
    records: dict[str, dict[str, Any]],
) -> None:
    ambient = next(s for s in records["NTC-0003"]["steps"] if s["unit"] == "degC")
    row = step_rows(render_run(records["NTC-0003"]))[ambient["step_id"]]
    assert 0.1 <= ambient["expanded_u"] < 1.0  # a reference probe's U of tenths of a degree
    assert re.fullmatch(r"-?\d+\.\d\d", row["value"]) and re.fullmatch(
        r"0\.\d\d", row["U (expanded)"]
    )


def test_a_value_rounded_onto_its_limit_keeps_the_verdict_judged_without_rounding(
    records: dict[str, dict[str, Any]],
) -> None:
    record = records["HAR-0102"]
    step = next(s for s in record["steps"] if s["kind"] == "volts" and s["high"] is not None)
    u = 0.0026
    over = dict(step, value=step["high"] + u / 100, expanded_u=u, verdict="conditional fail")
    row = step_rows(render_run({**record, "steps": [over]}))[step["step_id"]]
    # to U's digits (0.0026: four decimals) the reading would read as its limit; it is shown
    # one decimal finer, above the limit shown beside it, as rig run shows it
    assert Decimal(row["high limit"]) == Decimal(f"{step['high']:.5f}")  # 4.8 V, as stated
    assert float(row["high limit"]) < float(row["value"]) < step["high"] + u / 10
    assert row["U (expanded)"] == "0.0026"
    assert row["verdict"] == "conditional fail"  # the verdict of the unrounded reading


@pytest.mark.parametrize("serial", SERIALS)
def test_a_failed_overload_is_drawn_at_the_plots_edge_marked_overload(
    serial: str, records: dict[str, dict[str, Any]]
) -> None:
    record = records[serial]
    overloads = [s for s in record["steps"] if s.get("value_text") == "overload"]
    both_limits = [s for s in overloads if s["low"] is not None and s["high"] is not None]
    assert both_limits and all(s["verdict"] == "fail" for s in both_limits)
    html = render_run(record)
    svg = html[html.index("<h2>Margins</h2>") :]
    svg = svg[: svg.index("</figure>")]
    # matplotlib writes each text it draws as paths after a comment holding the text
    drawn = re.findall(r"<!-- (.*?) -->", svg)
    for step in both_limits:
        assert step["step_id"] in drawn
    assert drawn.count("overload") == len(both_limits)
    assert "marked overload" in svg


def test_margins_name_a_step_with_no_reading_under_the_plot(
    records: dict[str, dict[str, Any]],
) -> None:
    record = records["HAR-0102"]
    step = next(s for s in record["steps"] if s.get("value_text") == "overload")
    lost = {**step, "step_id": "lost", "value_text": "no reading", "verdict": "error"}
    html = render_run({**record, "steps": [*record["steps"], lost]})
    assert "Not drawn, no value: lost (no reading, error)." in html


@pytest.mark.parametrize(
    ("low", "high", "value", "position"),
    [
        # worked by hand from the plot's scale: two limits, 0 at the low and 1 at the high
        (0.6, 4.8, 2.7, 0.5),
        # a max alone (a voltage drop under 0.02 V): 0 V at 0, the limit at 1
        (None, 0.02, 0.005, 0.25),
        (None, 0.02, 0.03, 1.5),
        # a max below zero: the limit at 1, twice as far below at 0
        (None, -0.1, -0.2, 0.0),
        # a min alone (isolation of at least 1 Mohm): the limit at 0, twice it at 1
        (1e6, None, 2e6, 1.0),
        (1e6, None, 0.5e6, -0.5),
    ],
)
def test_a_step_with_one_limit_is_placed_against_that_limit_scaled_by_its_size(
    low: float | None, high: float | None, value: float, position: float
) -> None:
    scale = margin_scale(low, high)
    assert scale is not None
    zero, width = scale
    assert (value - zero) / width == pytest.approx(position)


def test_steps_with_one_limit_are_drawn_in_the_margins_and_a_prompt_is_not(
    records: dict[str, dict[str, Any]],
) -> None:
    # the report used to leave out every step with a max alone or a min alone
    record = records["HAR-0102"]
    step = next(s for s in record["steps"] if s["step_id"] == "sensor-ground-drop")
    only_max = {**step, "step_id": "drop-max-only", "low": None, "high": 0.02}
    only_min = {**step, "step_id": "iso-min-only", "low": 1e6, "high": None, "value": 5e7}
    at_zero = {**step, "step_id": "max-at-zero", "low": None, "high": 0.0}
    html = render_run({**record, "steps": [*record["steps"], only_max, only_min, at_zero]})
    svg = html[html.index("<h2>Margins</h2>") :]
    svg = svg[: svg.index("</figure>")]
    drawn = re.findall(r"<!-- (.*?) -->", svg)
    assert "drop-max-only" in drawn and "iso-min-only" in drawn
    assert "max-at-zero" not in drawn
    assert "Not drawn: max-at-zero, whose only limit is zero, so there is nothing" in svg
    # the demo's prompt (a one-sided low of 0.5 on its answer) is not a reading to draw
    prompt_html = render_run(records["NTC-0003"])
    prompt_svg = prompt_html[prompt_html.index("<h2>Margins</h2>") :]
    assert "place" not in re.findall(r"<!-- (.*?) -->", prompt_svg[: prompt_svg.index("</figure>")])


def test_a_prediction_is_shown_to_its_readings_digits(records: dict[str, dict[str, Any]]) -> None:
    # a model's prediction beside its reading (GUM 7.2.6 gives the reading's place; the
    # prediction, computed as its limits are, is rounded there, not left at seven digits)
    shown = 0
    for record in records.values():
        rows = step_rows(render_run(record))
        for step in record["steps"]:
            value, u, predicted = step["value"], step["expanded_u"], step["predicted"]
            if predicted is None or u is None or value is None or not math.isfinite(value):
                continue
            limits = [x for x in (step["low"], step["high"]) if x is not None]
            place = shown_place(value, u, limits)
            assert place is not None
            assert rows[step["step_id"]]["predicted"] == limit_at_place(predicted, place)
            assert len(rows[step["step_id"]]["predicted"]) < len(f"{predicted:.7g}")
            shown += 1
    assert shown  # the open signal wire's run has a curve step read against its prediction
