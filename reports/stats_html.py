"""Shop statistics as a self-contained HTML page: yield and screen tables, failure Pareto, and
per numeric step its capability with a histogram (limits, guard bands) and a trend chart."""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Callable, Sequence
from typing import Any

import pandas as pd

from reports.html_page import esc, figure, page, table
from reports.run_html import num
from reports.svg_plots import histogram_chart, pareto_chart, trend_chart
from rig.stats.from_store import (
    RELATIVE,
    SHARE,
    ShopStats,
    StepStats,
    deviation_of,
    judged_as,
)

SeriesLoader = Callable[[StepStats], Sequence[tuple[dt.datetime, float]]]
"""The (start time, value) series of one step group, in time order."""


def frame_table(frame: pd.DataFrame, percent: Sequence[str] = (), table_id: str = "") -> str:
    """A DataFrame as an HTML table; the ``percent`` columns (fractions) shown in percent."""
    rows = []
    for record in frame.to_dict(orient="records"):
        row = []
        for column, value in record.items():
            if column in percent:
                row.append("" if pd.isna(value) else f"{100 * float(value):.1f} %")
            elif isinstance(value, float):
                row.append(num(value, 5))
            else:
                row.append(str(value))
        rows.append(row)
    numeric = [i for i, c in enumerate(frame.columns) if frame[c].dtype.kind in "fiu"]
    heads = [str(c).replace("_", " ") for c in frame.columns]  # the JSON's keys, in words
    return table(heads, rows, numeric=numeric, table_id=table_id)


def _step_section(step: StepStats, series: Sequence[tuple[dt.datetime, float]]) -> str:
    limits = f"{num(step.low)} .. {num(step.high)} {step.unit}"
    rows: list[list[Any]] = [
        ["values", step.n],
        ["mean", num(step.mean)],
        ["standard deviation", num(step.std)],
        ["Cp", num(step.cp, 4)],
        ["Cpk", num(step.cpk, 4)],
        ["mean expanded uncertainty (guard band)", num(step.mean_expanded_u, 4)],
    ]
    parts = [
        f"<h3>{esc(step.sequence)} / {esc(step.step_id)} (limits {esc(limits)})</h3>",
        table(["figure", "value"], rows, numeric=(1,)),
    ]
    values = [v for _, v in series]
    if values:
        parts.append(
            figure(
                histogram_chart(values, step.unit, step.low, step.high, step.mean_expanded_u),
                f"Histogram of {len(values)} values with limits (solid) and guard bands (dashed).",
            )
        )
        parts.append(
            figure(
                trend_chart([t for t, _ in series], values, step.unit, step.low, step.high),
                "Values over time with the limits.",
            )
        )
    return "\n".join(parts)


def render_stats(stats: ShopStats, series: SeriesLoader) -> str:
    """The statistics as a complete HTML page."""
    where = ", ".join(
        f"{k} {v}" for k, v in stats.to_dict()["filter"].items() if v is not None and v is not False
    )
    sections = [
        "<h1>Shop statistics</h1>",
        f"<p>{esc(stats.runs)} production runs{esc(' (' + where + ')' if where else '')}.</p>",
        "<h2>Yield per sequence</h2>",
        frame_table(stats.by_sequence, ("first_pass_yield", "final_yield"), "yield"),
        "<h2>Yield per day</h2>",
        frame_table(stats.by_day, ("first_pass_yield", "final_yield"), "yield-by-day"),
        "<h2>Returned-unit screens: confirmed failure or no fault found</h2>",
        frame_table(stats.screens, ("confirmed_share",), "screens"),
        "<h2>Failure Pareto by step</h2>",
        '<p class="note">Part failures only: fail or conditional fail in a run that completed. '
        "Runs stopped or ended by an instrument fault are counted apart, below.</p>",
        frame_table(stats.pareto_steps, ("share", "cumulative"), "pareto-steps"),
    ]
    if len(stats.pareto_steps):
        sections.append(
            figure(
                pareto_chart(
                    stats.pareto_steps["step"].tolist()[:15],
                    stats.pareto_steps["count"].astype(int).tolist()[:15],
                ),
                "Failed steps, most frequent first, with the cumulative share.",
            )
        )
    sections.append("<h2>Runs not decided (not counted as part failures)</h2>")
    if len(stats.undecided):
        sections.append(frame_table(stats.undecided, (), "not-decided"))
    else:
        sections.append('<p class="note">none: every run completed and measured every step</p>')
    sections.append("<h2>Failure Pareto by diagnosed fault kind</h2>")
    if stats.pareto_faults is None:
        sections.append(f'<p class="note">{esc(stats.fault_note)}</p>')
    else:
        sections.append(frame_table(stats.pareto_faults, ("share", "cumulative"), "pareto-faults"))
    if stats.pareto_findings is not None:
        sections.append("<h2>Harness findings by kind (every finding of each failed proof)</h2>")
        sections.append(
            frame_table(stats.pareto_findings, ("share", "cumulative"), "pareto-findings")
        )
        sections.append(f'<p class="note">{esc(stats.findings_note)}</p>')
    sections.append("<h2>Numeric steps: capability</h2>")
    for step in stats.steps:
        sections.append(_step_section(step, series(step)))
    return page("Shop statistics", sections)


def series_from_rows(
    rows: Sequence[Sequence[Any]], step: StepStats
) -> list[tuple[dt.datetime, float]]:
    """(time, value) pairs of ``ResultStore.step_series`` rows that share the step's limits; for
    a step judged around a prediction, each reading's deviation from it (``model_step_stats``)."""
    found = []
    model = step.unit in (RELATIVE, SHARE) or step.unit.endswith(" off prediction")
    for row in rows:
        _, started, value, low, high = row[:5]
        predicted = row[9]
        if value is None or not math.isfinite(value):
            continue
        if model:
            if predicted is None or not judged_as(step, low, high, float(predicted)):
                continue  # another tolerance's row
            value = deviation_of(float(value), float(predicted), step.unit, low, high)
        elif low != step.low or high != step.high:
            continue
        stamp = dt.datetime.fromisoformat(str(started)).astimezone(dt.UTC).replace(tzinfo=None)
        found.append((stamp, float(value)))
    return found
