"""Widgets of the console: the run's status and verdict, a chart, and the list of recent runs."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from rich.text import Text
from textual.widget import Widget
from textual.widgets import DataTable

from rig.console.big_letters import big_letters, width_of
from rig.console.chart import Chart, render
from rig.console.words import RunVerdict, stored_run_word


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

    def __init__(self, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self._lines: list[str] = ["waiting for the bench"]
        self.verdict: RunVerdict | None = None
        self.warnings: list[str] = []
        self.record_text = ""

    def progress(self, *lines: str) -> None:
        self._lines = list(lines)
        self.refresh()

    def show_verdict(
        self, verdict: RunVerdict, warnings: list[str] | None = None, record_text: str = ""
    ) -> None:
        """The verdict, and under it the claim and remark the run was filed with and what the
        technician must act on (relay wear, a bench not made safe, a retried fault): the panel
        grows to the wrapped lines (up to its max-height), so a long reason does not push the
        warnings out of sight."""
        self.verdict = verdict
        self.warnings = list(warnings or [])
        self.record_text = record_text
        self.styles.height = "auto"
        word = verdict.word
        self.remove_class("-pass", "-fail", "-other")
        if word == "PASS":
            self.add_class("-pass")
        elif word == "FAIL":
            self.add_class("-fail")
        else:
            self.add_class("-other")
        self.refresh()

    def render(self) -> Text:
        if self.verdict is None:
            return Text("\n".join(self._lines))
        width = self.size.width
        text = Text()
        word = self.verdict.word
        if width_of(word) <= width:
            for line in big_letters(word):
                text.append(line + "\n", self.verdict.style)
        else:
            text.append(f"RUN VERDICT: {word}\n", self.verdict.style)
        text.append(f"{word}: {self.verdict.line}", "bold")
        if self.record_text:
            text.append(f"\n{self.record_text}")
        for warning in self.warnings[: self.MOST_WARNINGS]:
            text.append(f"\nwarning: {warning}", "bold yellow")
        if len(self.warnings) > self.MOST_WARNINGS:
            more = len(self.warnings) - self.MOST_WARNINGS
            text.append(f"\n... and {more} more warning(s) in the run's record (F2)", "yellow")
        return text


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
    """Recent runs at one station, newest first; Enter opens the run's record."""

    def __init__(self, opener: Callable[[int], None], **kwargs: Any) -> None:
        super().__init__(cursor_type="row", zebra_stripes=True, **kwargs)
        self._opener = opener

    def on_mount(self) -> None:
        self.add_columns(*RUN_COLUMNS)

    def show_runs(self, runs: list[dict[str, Any]], time_text: Callable[[str], str]) -> None:
        self.clear()
        for run in runs:
            word = stored_run_word(str(run["status"] or ""), run["verdict"])
            self.add_row(
                str(run["id"]),
                run["serial"],
                run["sequence_name"],
                word,
                run["status"],
                time_text(run["started_at"]),
                key=str(run["id"]),
            )

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        event.stop()
        if event.row_key.value is not None:
            self._opener(int(event.row_key.value))
