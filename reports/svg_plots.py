"""Plots as inline SVG text, drawn with matplotlib's Figure API (no pyplot, no display needed).

Text in the plots is drawn as paths, so no string from a file ever becomes SVG markup.
"""

from __future__ import annotations

import io
import math
import re
from collections.abc import Sequence
from datetime import datetime

import matplotlib

matplotlib.use("Agg")
import numpy as np
from matplotlib.figure import Figure

LIMIT_COLOUR = "#c62828"
GUARD_COLOUR = "#ef6c00"
DATA_COLOUR = "#1565c0"
_METADATA = re.compile(r"<metadata>.*?</metadata>", re.DOTALL)
TREND_POINTS = 400
"""Above this many values a trend chart shows the mean and range of consecutive groups."""


def to_svg(fig: Figure) -> str:
    """The figure as an ``<svg>`` element, without the XML prolog, ready to inline."""
    buffer = io.StringIO()
    fig.savefig(buffer, format="svg", bbox_inches="tight", metadata={"Date": None})
    text = buffer.getvalue()
    return _METADATA.sub("", text[text.index("<svg") :])


def _figure(width_in: float = 7.0, height_in: float = 3.0) -> Figure:
    return Figure(figsize=(width_in, height_in), dpi=96, layout="constrained")


OVERLOAD_X = 1.55
"""Where a margin chart draws a reading over the meter's range: its right edge."""
MARGIN_EDGES = (-0.55, 1.55)
"""The margin chart's x span: an open side of a one-limit band runs to its edge."""
BAND_COLOUR = "#d7f0d7"


def margin_chart(
    labels: Sequence[str],
    positions: Sequence[float],
    half_u: Sequence[float],
    sides: Sequence[tuple[bool, bool]] | None = None,
) -> str:
    """Each step's value as a fraction of its limit band (0 = low limit, 1 = high limit), with
    its expanded uncertainty as an error bar; outside 0..1 is outside the limits.  ``sides``
    says which limits each step has (low, high; both where not given): a step with one limit
    has that limit's line only and its band open to the chart's edge on the other side.  A
    position that is not finite (an overload: no number) is drawn at the right edge, marked
    overload."""
    n = max(1, len(labels))
    fig = _figure(7.0, 0.6 + 0.3 * n)
    ax = fig.add_subplot()
    ys = list(range(len(labels)))[::-1]
    for y, (has_low, has_high) in zip(ys, sides or [(True, True)] * len(labels), strict=True):
        left = 0.0 if has_low else MARGIN_EDGES[0]
        right = 1.0 if has_high else MARGIN_EDGES[1]
        ax.barh(y, right - left, left=left, height=0.9, color=BAND_COLOUR, zorder=0)
        for x, limit_here in ((0.0, has_low), (1.0, has_high)):
            if limit_here:
                ax.vlines(x, y - 0.45, y + 0.45, color=LIMIT_COLOUR)
    drawn = [(y, p, u) for y, p, u in zip(ys, positions, half_u, strict=True) if math.isfinite(p)]
    if drawn:
        shown = [max(-0.5, min(1.5, p)) for _, p, _ in drawn]
        ax.errorbar(shown, [y for y, _, _ in drawn], xerr=[u for _, _, u in drawn], fmt="o",
                    color=DATA_COLOUR, capsize=3)  # fmt: skip
    over = [y for y, p in zip(ys, positions, strict=True) if not math.isfinite(p)]
    for y in over:  # no number to place: at the edge, beyond every limit, and said so
        ax.plot([OVERLOAD_X], [y], marker=">", ms=9, color=LIMIT_COLOUR, clip_on=False)
        ax.annotate("overload", (OVERLOAD_X, y), xytext=(-8, 0), textcoords="offset points",
                    ha="right", va="center", color=LIMIT_COLOUR)  # fmt: skip
    ax.set_yticks(ys, list(labels))
    ax.set_xlim(*MARGIN_EDGES)
    ax.set_xlabel(
        "position in the limit band (0 low limit, 1 high limit; clipped at -0.5, 1.5)\n"
        "a step with one limit: scaled by that limit's size, the other side open"
    )
    return to_svg(fig)


def histogram_chart(
    values: Sequence[float],
    unit: str,
    low: float | None,
    high: float | None,
    guard: float | None,
) -> str:
    """A histogram of a step's values with its limits (solid) and guard bands (dashed: the
    acceptance limits moved inside by the expanded uncertainty)."""
    fig = _figure()
    ax = fig.add_subplot()
    finite = [v for v in values if math.isfinite(v)]
    ax.hist(finite, bins=min(50, max(5, int(math.sqrt(len(finite) or 1)))), color=DATA_COLOUR)
    for limit, sign in ((low, 1.0), (high, -1.0)):
        if limit is None:
            continue
        ax.axvline(limit, color=LIMIT_COLOUR, label="limit")
        if guard:
            ax.axvline(limit + sign * guard, color=GUARD_COLOUR, ls="--", label="guard band")
    handles, names = ax.get_legend_handles_labels()
    unique = dict(zip(names, handles, strict=True))
    if unique:
        ax.legend(unique.values(), unique.keys(), loc="upper right")
    ax.set_xlabel(unit or "value")
    ax.set_ylabel("count")
    return to_svg(fig)


def trend_chart(
    times: Sequence[datetime],
    values: Sequence[float],
    unit: str,
    low: float | None,
    high: float | None,
) -> str:
    """A step's values over time with its limits; long series as group means and ranges."""
    fig = _figure()
    ax = fig.add_subplot()
    n = len(values)
    if n > TREND_POINTS:
        size = math.ceil(n / TREND_POINTS)
        xs: list[np.datetime64] = []
        mean: list[float] = []
        lo: list[float] = []
        hi: list[float] = []
        for start in range(0, n, size):
            chunk = [v for v in values[start : start + size] if math.isfinite(v)]
            if not chunk:
                continue
            xs.append(np.datetime64(times[start], "ms"))
            mean.append(sum(chunk) / len(chunk))
            lo.append(min(chunk))
            hi.append(max(chunk))
        ax.fill_between(
            np.array(xs), lo, hi, color=DATA_COLOUR, alpha=0.25, label=f"range of {size}"
        )
        ax.plot(np.array(xs), mean, color=DATA_COLOUR, label=f"mean of {size}")
    else:
        stamps = np.array([np.datetime64(t, "ms") for t in times])
        ax.plot(stamps, list(values), "o-", ms=3, color=DATA_COLOUR, label="value")
    for limit in (low, high):
        if limit is not None:
            ax.axhline(limit, color=LIMIT_COLOUR)
    ax.set_ylabel(unit or "value")
    ax.legend(loc="upper right")
    fig.autofmt_xdate()
    return to_svg(fig)


def pareto_chart(labels: Sequence[str], counts: Sequence[int]) -> str:
    """Bars of failure counts, largest first, with the cumulative share as a line."""
    fig = _figure(7.0, 3.2)
    ax = fig.add_subplot()
    xs = list(range(len(labels)))
    ax.bar(xs, list(counts), color=DATA_COLOUR)
    ax.set_xticks(xs, list(labels), rotation=30, ha="right")
    ax.set_ylabel("failures")
    total = sum(counts) or 1
    running, cumulative = 0, []
    for c in counts:
        running += c
        cumulative.append(100.0 * running / total)
    share = ax.twinx()
    share.plot(xs, cumulative, "o-", color=LIMIT_COLOUR)
    share.set_ylim(0, 105)
    share.set_ylabel("cumulative %")
    return to_svg(fig)
