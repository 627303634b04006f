"""Widgets of the console: the run's status and verdict, a chart, and the list of recent runs."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

from rich.text import Text
from textual.widget import Widget
from textual.widgets import DataTable

from rig.console.big_letters import big_letters, width_of
from rig.console.chart import Chart, render
from rig.console.decision import decision_style
from rig.console.words import RunVerdict, stored_run_word
from rig.screening import CONFIRMED, NO_FAULT, ScreenDecision, decision_line


class StatusPanel(Widget):
    """Progress while the run goes on; the whole run's verdict in block letters when it ends."""

    DEFAULT_CSS = """
    StatusPanel { height: 8; max-height: 16; border: heavy $secondary; padding: 0 1; }
    StatusPanel.-pass { border: heavy $success; }
    StatusPanel.-fail { border: heavy $error; }
    StatusPanel.-other { border: heavy $warning; }
    """

    MOST_WARNINGS = 3
    """Warning lines shown under the verdict; more are counted, and all are in the run's record."""
    BESIDE_GAP = "    "
    """Between the verdict's block letters and the screen decision beside them."""
    NOTE_STYLE = "bold cyan"

    def __init__(self, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self._lines: list[str] = ["waiting for the bench"]
        self.verdict: RunVerdict | None = None
        self.warnings: list[str] = []
        self.record_text = ""
        self.decision: ScreenDecision | None = None
        self.notes: list[str] = []
        """Lines about the unit said from the run's start to the end of its view: its earlier
        runs (``rig.tested_before``)."""

    def add_note(self, line: str) -> None:
        """A line kept under the progress and then under the verdict (a quick run would take
        it out of sight before it is read); the panel grows to hold it."""
        self.notes.append(line)
        self.styles.height = "auto"
        self.styles.min_height = 8
        self.refresh()

    def progress(self, *lines: str) -> None:
        self._lines = list(lines)
        self.refresh()

    def show_verdict(
        self,
        verdict: RunVerdict,
        warnings: list[str] | None = None,
        record_text: str = "",
        decision: ScreenDecision | None = None,
    ) -> None:
        """The verdict, a screen's decision on the unit beside it, and under them the claim and
        remark the run was filed with and what the technician must act on (relay wear, a bench
        not made safe, a retried fault): the panel grows to the wrapped lines (up to its
        max-height), so a long reason does not push the warnings out of sight.  A screen's
        border follows its decision, not its verdict: a pass within U of a limit is no clean
        pass for a returned unit."""
        self.verdict = verdict
        self.warnings = list(warnings or [])
        self.record_text = record_text
        self.decision = decision
        self.styles.height = "auto"
        self.remove_class("-pass", "-fail", "-other")
        self.add_class(_border_class(verdict, decision))
        self.refresh()

    def render(self) -> Text:
        if self.verdict is None:
            text = Text("\n".join(self._lines))
            self._append_notes(text)
            return text
        width = self.size.width
        text = Text()
        word = self.verdict.word
        beside = "" if self.decision is None else f" screen decision: {self.decision.word} "
        if width_of(word) <= width:
            letters = big_letters(word)
            # the decision beside the letters' middle row, where it fits; always written below
            fits = width_of(word) + len(self.BESIDE_GAP) + len(beside) <= width
            for row, line in enumerate(letters):
                text.append(line, self.verdict.style)
                if beside and fits and row == len(letters) // 2:
                    text.append(" " * (width_of(word) - len(line)) + self.BESIDE_GAP)
                    text.append(beside, self._decision_style() + " reverse")
                text.append("\n")
        else:
            text.append(f"RUN VERDICT: {word}\n", self.verdict.style)
        text.append(f"{word}: {self.verdict.line}", "bold")
        if self.decision is not None:
            text.append("\n")
            text.append(decision_line(self.decision), self._decision_style())
        if self.record_text:
            text.append(f"\n{self.record_text}")
        for warning in self.warnings[: self.MOST_WARNINGS]:
            text.append(f"\nwarning: {warning}", "bold yellow")
        if len(self.warnings) > self.MOST_WARNINGS:
            more = len(self.warnings) - self.MOST_WARNINGS
            text.append(f"\n... and {more} more warning(s) in the run's record (F2)", "yellow")
        self._append_notes(text)
        return text

    def _append_notes(self, text: Text) -> None:
        for note in self.notes:
            text.append(f"\n{note}", self.NOTE_STYLE)

    def _decision_style(self) -> str:
        return "bold" if self.decision is None else decision_style(self.decision)


def _border_class(verdict: RunVerdict, decision: ScreenDecision | None) -> str:
    """The panel's border: green for a pass (a screen's: no fault found), red for a fail (a
    screen's: a confirmed failure), amber for anything else."""
    if decision is not None:
        return {NO_FAULT: "-pass", CONFIRMED: "-fail"}.get(decision.word, "-other")
    return {"PASS": "-pass", "FAIL": "-fail"}.get(verdict.word, "-other")


class ChartView(Widget):
    """A chart redrawn to the widget's size, or a line saying why there is none."""

    DEFAULT_CSS = "ChartView { height: 1fr; }"

    def __init__(self, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.chart: Chart | None = None
        self.message = "the plot appears when the run has readings"

    def show(self, chart: Chart | None, message: str = "") -> None:
        self.chart = chart
        self.message = message
        self.refresh()

    def render(self) -> Text:
        if self.chart is None:
            return Text(self.message, "dim")
        return render(self.chart, self.size.width, self.size.height)


RUN_COLUMNS = ("run", "serial", "sequence", "verdict", "status", "started")
DECISION_COLUMN = "screen decision"
"""After the verdict in the history's list: a screen's decision on the unit (a simple-rule PASS
may be inconclusive), blank for a harness proof."""


class TextTable(DataTable[Any]):
    """A table whose text cells are shown as written.  textual reads a ``str`` cell as markup,
    so a serial or note holding ``[/b]`` would stop the console and ``[red]`` would be eaten;
    serials, step notes and pin names are text, never markup."""

    def add_row(
        self,
        *cells: Any,
        height: int | None = 1,
        key: str | None = None,
        label: Any = None,
    ) -> Any:
        shown = [Text(cell) if isinstance(cell, str) else cell for cell in cells]
        return super().add_row(*shown, height=height, key=key, label=label)


class RunList(TextTable):
    """Recent runs at one station, newest first; Enter opens the run's record.  With
    ``decisions``, a column after the verdict for each screen's decision on the unit."""

    def __init__(
        self, opener: Callable[[int], None], *, decisions: bool = False, **kwargs: Any
    ) -> None:
        super().__init__(cursor_type="row", zebra_stripes=True, **kwargs)
        self._opener = opener
        self._decisions = decisions

    def on_mount(self) -> None:
        columns = list(RUN_COLUMNS)
        if self._decisions:
            columns.insert(columns.index("verdict") + 1, DECISION_COLUMN)
        self.add_columns(*columns)

    def show_runs(
        self,
        runs: list[dict[str, Any]],
        time_text: Callable[[str], str],
        decisions: Mapping[int, ScreenDecision | None] | None = None,
    ) -> None:
        """``decisions``: each run's screen decision by its id (None: not a screen), shown where
        the list has the column."""
        self.clear()
        for run in runs:
            word = stored_run_word(str(run["status"] or ""), run["verdict"])
            cells: list[Any] = [str(run["id"]), run["serial"], run["sequence_name"], word]
            if self._decisions:
                decision = (decisions or {}).get(int(run["id"]))
                cells.append(
                    "" if decision is None else Text(decision.word, decision_style(decision))
                )
            cells += [run["status"], time_text(run["started_at"])]
            self.add_row(*cells, key=str(run["id"]))

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        event.stop()
        if event.row_key.value is not None:
            self._opener(int(event.row_key.value))
