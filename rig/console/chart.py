"""A small text chart: lines drawn in braille dots, points as plain marks, axes with numbers.

Each character cell holds 2 x 4 braille dots, so a 60 x 12 cell chart resolves 120 x 48 points,
enough to see a reading against a curve and its band.  Points are ordinary characters (``*``,
``o``, ``x``), so what matters reads without colour; colour only helps.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Sequence
from dataclasses import dataclass, field

from rich.text import Text

_DOT_BITS = ((0x01, 0x08), (0x02, 0x10), (0x04, 0x20), (0x40, 0x80))
"""Bit of the braille dot at (row, column) within one cell (Unicode braille patterns)."""


@dataclass(frozen=True)
class Line:
    """A polyline through ``points``; ``dotted`` draws every other dot (a band edge, a limit)."""

    points: Sequence[tuple[float, float]]
    style: str = ""
    dotted: bool = False


@dataclass(frozen=True)
class Mark:
    """A single point drawn as a character."""

    x: float
    y: float
    char: str
    style: str = ""


@dataclass
class Chart:
    """What to draw and how to label it."""

    lines: list[Line] = field(default_factory=list)
    marks: list[Mark] = field(default_factory=list)
    x_label: str = ""
    y_label: str = ""
    legend: str = ""
    x_ends: tuple[str, str] | None = None
    """Words for the two ends of the x axis instead of numbers (e.g. oldest, newest)."""


class BrailleCanvas:
    """A grid of character cells, each with 2 x 4 dots, plus whole-cell marks."""

    def __init__(self, cols: int, rows: int) -> None:
        self.cols = max(1, cols)
        self.rows = max(1, rows)
        self._bits = [[0] * self.cols for _ in range(self.rows)]
        self._styles = [[""] * self.cols for _ in range(self.rows)]
        self._marks: dict[tuple[int, int], tuple[str, str]] = {}

    @property
    def width(self) -> int:
        return self.cols * 2

    @property
    def height(self) -> int:
        return self.rows * 4

    def dot(self, px: int, py: int, style: str = "") -> None:
        """Set the dot at (px, py); py = 0 is the top row."""
        if 0 <= px < self.width and 0 <= py < self.height:
            row, col = py // 4, px // 2
            self._bits[row][col] |= _DOT_BITS[py % 4][px % 2]
            if style:
                self._styles[row][col] = style

    def segment(self, a: tuple[int, int], b: tuple[int, int], style: str, dotted: bool) -> None:
        steps = max(abs(b[0] - a[0]), abs(b[1] - a[1]), 1)
        for i in range(steps + 1):
            if dotted and i % 2:
                continue
            px = round(a[0] + (b[0] - a[0]) * i / steps)
            py = round(a[1] + (b[1] - a[1]) * i / steps)
            self.dot(px, py, style)

    def mark(self, col: int, row: int, char: str, style: str = "") -> None:
        if 0 <= col < self.cols and 0 <= row < self.rows:
            self._marks[(row, col)] = (char, style)

    def row_text(self, row: int) -> Text:
        text = Text()
        for col in range(self.cols):
            if (row, col) in self._marks:
                char, style = self._marks[(row, col)]
                text.append(char, style)
            else:
                text.append(chr(0x2800 + self._bits[row][col]), self._styles[row][col])
        return text


def _bounds(chart: Chart) -> tuple[float, float, float, float]:
    xs = [p[0] for line in chart.lines for p in line.points] + [m.x for m in chart.marks]
    ys = [p[1] for line in chart.lines for p in line.points] + [m.y for m in chart.marks]
    xs = [x for x in xs if math.isfinite(x)]
    ys = [y for y in ys if math.isfinite(y)]
    if not xs or not ys:
        return 0.0, 1.0, 0.0, 1.0
    x0, x1, y0, y1 = min(xs), max(xs), min(ys), max(ys)
    if x1 == x0:
        x0, x1 = x0 - 0.5, x1 + 0.5
    pad = (y1 - y0) * 0.05 or abs(y0) * 0.05 or 0.5
    return x0, x1, y0 - pad, y1 + pad


def tick(value: float) -> str:
    """A short axis number: 4 significant digits, no exponent for everyday sizes."""
    if value == 0 or 1e-3 <= abs(value) < 1e5:
        return f"{value:.4g}"
    return f"{value:.2e}"


def render(chart: Chart, cols: int, rows: int) -> Text:
    """The chart drawn into ``cols`` x ``rows`` cells, with a y axis, an x axis and a legend."""
    x0, x1, y0, y1 = _bounds(chart)
    labels = [tick(y1), tick((y0 + y1) / 2), tick(y0)]
    margin = max(len(label) for label in labels) + 1
    plot_cols = max(8, cols - margin - 1)
    legend_rows = chart.legend.count("\n") + 1 if chart.legend else 0
    plot_rows = max(3, rows - 2 - bool(chart.y_label) - legend_rows)
    canvas = BrailleCanvas(plot_cols, plot_rows)

    def to_dot(x: float, y: float) -> tuple[int, int]:
        px = round((x - x0) / (x1 - x0) * (canvas.width - 1))
        py = round((y1 - y) / (y1 - y0) * (canvas.height - 1))
        return px, py

    for line in chart.lines:
        finite = [p for p in line.points if math.isfinite(p[0]) and math.isfinite(p[1])]
        dots = [to_dot(x, y) for x, y in finite]
        if len(dots) == 1:
            canvas.dot(*dots[0], line.style)
        for a, b in itertools.pairwise(dots):
            canvas.segment(a, b, line.style, line.dotted)
    for mark in chart.marks:
        if math.isfinite(mark.x) and math.isfinite(mark.y):
            px, py = to_dot(mark.x, mark.y)
            canvas.mark(px // 2, py // 4, mark.char, mark.style)

    out = Text()
    if chart.y_label:
        out.append(chart.y_label + "\n", "bold")
    label_rows = {0: labels[0], plot_rows // 2: labels[1], plot_rows - 1: labels[2]}
    for row in range(plot_rows):
        out.append(label_rows.get(row, "").rjust(margin - 1) + " │")
        out.append_text(canvas.row_text(row))
        out.append("\n")
    out.append(" " * margin + "└" + "─" * plot_cols + "\n")
    left, right = chart.x_ends or (tick(x0), tick(x1))
    gap = max(1, plot_cols - len(left) - len(right) - len(chart.x_label) - 2)
    axis = (
        f"{left} {chart.x_label.center(gap)} {right}" if chart.x_label else left + " " * gap + right
    )
    out.append(" " * (margin + 1) + axis)
    if chart.legend:
        out.append("\n" + chart.legend, "dim")
    return out
