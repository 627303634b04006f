"""The run view: each step as it is judged, the live reading, the verdict, diagnosis and plots.

The engine runs in a worker thread and reports into an inbox; a timer empties it at most
``BATCH_ITEMS`` at a time and adds the finished steps to the table in one call, so a run of
hundreds of steps costs the screen a few table updates a second, whatever the engine's pace.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from functools import partial
from pathlib import Path
from typing import Any, ClassVar

from rich.text import Text
from textual import events
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, VerticalScroll
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Input, Static
from textual.worker import Worker

from rig.console.decision import stored_decision
from rig.console.diagnosis import DiagnosisView, diagnose
from rig.console.plots import ntc_chart, step_history, trend_chart
from rig.console.screens.prompt import PromptScreen
from rig.console.screens.start import serial_problem
from rig.console.setup import ConsoleSetup
from rig.console.widgets import ChartView, StatusPanel, TextTable
from rig.console.words import (
    VERDICT_STYLES,
    live_text,
    note_parts,
    pins_text,
    record_text_line,
    run_verdict,
    step_cells,
    verdict_word,
)
from rig.console.worker import (
    EarlierRuns,
    Inbox,
    LiveReading,
    PromptGate,
    RunEnded,
    RunRequest,
    SafeStateMade,
    StopSwitch,
    SyncNote,
    run_in_worker,
)
from rig.engine import RunSummary
from rig.events import CUT_SHORT, NOT_RUN, StepFinished, StepResult, StepStarted
from rig.judge.decision import Verdict
from rig.steps import KINDS
from rig.store import ResultStore

HARNESS_PROOF = "harness-proof"
"""The step kind whose findings (one per wire or net fault) the run view lists after a failure."""
STOP_KEY = "f8"
"""Stops the run: a function key, because a barcode scanner types only printable keys and Enter."""
BATCH_ITEMS = 120
"""Most inbox items handled per timer tick; the rest wait for the next tick."""
TICK_S = 0.1
STEP_COLUMNS = ("#", "step", "verdict", "reading", "unit", "limits", "± U (k=2)", "pins")


def harness_findings(results: list[StepResult]) -> list[tuple[str, list[str]]]:
    """The findings of each failed harness proof: its note, one finding per ``; ``-joined part."""
    return [
        (r.step_id, note_parts(r.note) or ["(no finding)"])
        for r in results
        if r.kind == HARNESS_PROOF and r.verdict in (Verdict.FAIL, Verdict.CONDITIONAL_FAIL)
    ]


class SerialField(Input):
    """The next-serial field: it takes keys only once the run view lets it (``takes_keys``)."""

    async def _on_key(self, event: events.Key) -> None:
        screen = self.screen
        if (
            isinstance(screen, RunScreen)
            and (event.is_printable or event.key == "enter")
            and not screen.takes_keys()
        ):
            event.stop()
            event.prevent_default()  # Input's own handler does not insert it
            screen.ignore_key()


class RunScreen(Screen[str | None]):
    """One run of one unit, from start to verdict; then the next serial can be scanned at once.

    Dismissed with the next serial (same sequence) or None (back to the start view).  No key a
    barcode scanner can type (letters, digits, Enter) is a command: a scan during the run only
    earns a line saying so, and keys that arrive within ``QUIET_S`` of the run's end or of an
    ignored key are dropped, so the tail of such a scan, or a stray key, never becomes the next
    serial.
    """

    QUIET_S = 0.8
    """Keyboard quiet the next-serial field waits for after the run ends or a key is ignored
    (a scanner types its label in a few milliseconds per key)."""

    DEFAULT_CSS = """
    RunScreen #run-title { text-style: bold; height: 1; }
    RunScreen #steps { height: 1fr; min-height: 5; }
    RunScreen #lower { height: 2fr; max-height: 16; min-height: 8; }
    RunScreen #diagnosis { width: 1fr; height: 100%; border: round $secondary; padding: 0 1; }
    RunScreen #plot { width: 1fr; height: 100%; border: round $secondary; }
    RunScreen #findings { width: 1fr; height: 100%; border: round $error; padding: 0 1; }
    RunScreen #next-serial { border: tall $success; }
    """

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding(STOP_KEY, "stop", "Stop & make safe"),
        Binding("escape", "back", "Back to start"),
        Binding("f2", "history", "History"),
        Binding("f3", "toggle_plot", "Plot: curve/trend"),
        Binding("up", "cursor(-1)", "Step up", show=False),
        Binding("down", "cursor(1)", "Step down", show=False),
    ]

    def __init__(
        self,
        setup: ConsoleSetup,
        request: RunRequest,
        units_dir: Path,
        store: ResultStore,
        on_history: Callable[[], None],
    ) -> None:
        super().__init__()
        self.setup = setup
        self.request = request
        self.units_dir = units_dir
        self.store = store
        self._on_history = on_history
        self.inbox = Inbox()
        self.stop_switch = StopSwitch(self.inbox)
        self.gate = PromptGate(self._show_prompt_from_worker, self.stop_switch)
        self.results: list[StepResult] = []
        self.summary: RunSummary | None = None
        self.diagnosis: DiagnosisView | None = None
        self.problem = ""
        self.batches: list[int] = []
        """Rows added per table update (the test checks they stay bounded)."""
        self.worker: Worker[None] | None = None
        self._total = len(request.plan.steps)
        self._current = ""
        self._live = ""
        self._prompt: PromptScreen | None = None
        self._plot_mode = "curve"
        self._stopping = False
        self._safe_note = ""
        self._started = setup.clock()
        self.quit_when_done = False
        self._quiet_until = 0.0
        """Monotonic time before which typed keys are dropped (see ``QUIET_S``)."""
        self._told_keys = False
        self.ignored_keys = 0

    # --- layout -------------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        plan = self.request.plan
        yield Static(
            f"{plan.sequence.name} · serial {self.request.serial} · station "
            f"{self.setup.station.name} · started {self._started:%H:%M}",
            id="run-title",
        )
        yield StatusPanel(id="status")
        yield TextTable(id="steps", cursor_type="row", zebra_stripes=True)
        with Horizontal(id="lower"):
            yield Static("", id="diagnosis")
            with VerticalScroll(id="findings"):
                yield Static("", id="findings-text")
            yield ChartView(id="plot")
        yield SerialField(
            placeholder="scan the next serial (Enter runs the same sequence)",
            id="next-serial",
        )
        yield Footer()

    def on_mount(self) -> None:
        table = self.query_one("#steps", DataTable)
        table.add_columns(*STEP_COLUMNS)
        self.query_one("#diagnosis", Static).display = False
        self.query_one("#findings").display = False
        self.query_one("#next-serial", Input).display = False
        self.query_one("#next-serial", Input).cursor_blink = False  # steady, like the start view
        plot = self.query_one("#plot", ChartView)
        plot.border_title = "plot"
        plot.show(None, "the plot appears when the run has ended")
        self.query_one("#lower").display = False  # the table has the room while the run goes on
        self.query_one(StatusPanel).progress(f"starting: 0 of {self._total} steps")
        self.set_interval(TICK_S, self.drain)
        self.worker = self.run_worker(
            partial(
                run_in_worker,
                self.request,
                self.inbox,
                self.gate,
                self.stop_switch,
                self._after_run,
            ),
            name="engine",
            group="run",
            thread=True,
            exit_on_error=False,
        )

    def on_unmount(self) -> None:
        # the app is closing under a run (a quit, a lost terminal): the engine must still end safe
        if self.running:
            self.stop_switch.throw()

    @property
    def running(self) -> bool:
        return self.summary is None and not self.problem

    # --- from the worker thread ---------------------------------------------------------------

    def _show_prompt_from_worker(
        self, step_id: str, text: str, answer: Callable[[bool], None]
    ) -> None:
        stops_run = self.gate.stops_run  # noted from the prompt's event, before it asked
        self.app.call_from_thread(self._open_prompt, step_id, text, stops_run, answer)

    def _after_run(self, summary: RunSummary, store: ResultStore) -> None:
        """In the worker: diagnose a completed failed run (simulation is slow work).  A failed
        harness proof is not diagnosed from a unit model: its own findings say what is wrong."""
        if harness_findings(summary.results):
            return
        if summary.status == "complete" and summary.verdict in (
            Verdict.FAIL,
            Verdict.CONDITIONAL_FAIL,
        ):
            self.inbox.put(
                diagnose(store, summary.run_id, self.request.plan, self.setup.unit, self.units_dir)
            )

    # --- on the UI thread ---------------------------------------------------------------------

    def _open_prompt(
        self, step_id: str, text: str, stops_run: bool, answer: Callable[[bool], None]
    ) -> None:
        def answered(yes: bool | None) -> None:
            self._prompt = None
            answer(bool(yes))

        self._prompt = PromptScreen(step_id, text, self.action_stop, stops_run=stops_run)
        self.app.push_screen(self._prompt, answered)

    def drain(self) -> None:
        """Take a bounded batch from the inbox and show it with as few widget updates as can be."""
        items = self.inbox.take(BATCH_ITEMS)
        if not items:
            return
        rows: list[tuple[Any, ...]] = []
        keys: list[str] = []
        ended: RunEnded | None = None
        for item in items:
            if isinstance(item, StepStarted):
                title = f" ({item.title})" if item.title and item.title != item.step_id else ""
                self._current = f"step {item.position} of {self._total}: {item.step_id}{title}"
                self._live = ""
            elif isinstance(item, LiveReading):
                self._live = f"reading {item.count}: {live_text(item.value, item.unit)}"
            elif isinstance(item, StepFinished):
                self.results.append(item.result)
                rows.append(self._row(item.result))
                keys.append(str(item.result.position))
            elif isinstance(item, SafeStateMade):
                self._safe_note = (
                    "relays opened and supply off (read back)"
                    if not item.failures
                    else "COULD NOT MAKE SAFE: " + "; ".join(item.failures)
                )
            elif isinstance(item, DiagnosisView):
                self._show_diagnosis(item)
            elif isinstance(item, SyncNote):
                self.notify(item.text, title="results server")
            elif isinstance(item, EarlierRuns):
                self.query_one(StatusPanel).add_note(item.text)
            elif isinstance(item, RunEnded):
                ended = item
        if rows:
            table = self.query_one("#steps", DataTable)
            for row, key in zip(rows, keys, strict=True):
                table.add_row(*row, key=key)
            self.batches.append(len(rows))
            if self.running:
                table.move_cursor(row=table.row_count - 1, animate=False)
        if ended is not None:
            self._finish(ended)
        elif self.running:
            self._show_progress()

    def _row(self, result: StepResult) -> tuple[Any, ...]:
        cells = step_cells(result)
        word = verdict_word(result.verdict)
        if result.tur_low:
            word += " (TUR low)"
        return (
            str(result.position),
            result.step_id,
            Text(word, VERDICT_STYLES[result.verdict]),
            cells.reading,
            cells.unit,
            cells.limits,
            cells.uncertainty,
            pins_text(result.pins),
        )

    def _show_progress(self) -> None:
        done = len(self.results)
        lines = [f"RUNNING  {done} of {self._total} steps judged", self._current or "starting"]
        if self._live:
            lines.append(f"  live: {self._live} (settling)")
        if self._stopping:
            lines.append("STOPPING: " + (self._safe_note or "making the bench safe"))
        self.query_one(StatusPanel).progress(*lines)

    def _finish(self, ended: RunEnded) -> None:
        if not self.running:  # a late problem after the verdict (already logged by the worker)
            return
        status = self.query_one(StatusPanel)
        if ended.summary is None:
            self.problem = ended.problem or "the run could not start"
            status.progress("NO RUN: " + self.problem, "", "Press Escape for the start view.")
            self._ready_for_next()
            return
        summary = ended.summary
        self.summary = summary
        if self.quit_when_done:
            self.app.exit()
            return
        units = {KINDS[p.spec.kind].unit for p in self.request.plan.steps}
        status.show_verdict(
            run_verdict(summary.status, summary.verdict, summary.reason, summary.safe),
            summary.warnings,
            record_text_line(summary.claim, summary.remark),
            stored_decision(self.store, summary.run_id, units),
        )
        self._add_unjudged(summary)
        table = self.query_one("#steps", DataTable)
        failed = [r for r in self.results if r.step_id in summary.failed_steps]
        if failed:
            table.move_cursor(row=self.results.index(failed[0]), animate=False)
            # a failed NTC is best seen against its curve; any other failure over the last runs
            self._plot_mode = "curve" if failed[0].kind == "ntc" else "trend"
        findings = harness_findings(summary.results)
        if findings:
            self._show_findings(findings)
        elif summary.status != "complete":
            self._show_diagnosis(
                DiagnosisView(summary.run_id, unavailable="run aborted: no diagnosis")
            )
        elif summary.verdict not in (Verdict.FAIL, Verdict.CONDITIONAL_FAIL):
            self.query_one("#diagnosis", Static).display = False
        elif self.diagnosis is None:
            self.query_one("#diagnosis", Static).update("diagnosing ...")
            self.query_one("#diagnosis", Static).display = True
        self._update_plot()
        self._ready_for_next()

    def _add_unjudged(self, summary: RunSummary) -> None:
        """Rows after the judged ones for the planned steps the run has no result for, so whoever
        reads an aborted run sees what was never measured (nothing is stored for them)."""
        marks = [(summary.cut_short, CUT_SHORT)] if summary.cut_short else []
        marks += [(step_id, NOT_RUN) for step_id in summary.not_run]
        if not marks:
            return
        planned = {p.spec.id: (n, p.spec) for n, p in enumerate(self.request.plan.steps, start=1)}
        table = self.query_one("#steps", DataTable)
        for step_id, word in marks:
            position, spec = planned[step_id]
            word_cell = Text(word.upper(), "dim")
            pins = pins_text(dict(spec.pins))
            table.add_row(
                str(position), step_id, word_cell, "", "", "", "", pins, key=str(position)
            )

    def _ready_for_next(self) -> None:
        self._quiet_until = max(self._quiet_until, time.monotonic() + self.QUIET_S)
        self.refresh_bindings()
        self.query_one("#lower").display = True
        field = self.query_one("#next-serial", Input)
        field.display = True
        field.focus()

    def _show_findings(self, findings: list[tuple[str, list[str]]]) -> None:
        """Each failed harness proof's findings, one a line, wrapped and in full (the pane
        scrolls), where the likely faults of a sensor would be."""
        pane = self.query_one("#findings")
        count = sum(len(lines) for _, lines in findings)
        pane.border_title = f"harness findings ({count})"
        text = Text()
        for step_id, lines in findings:
            if len(findings) > 1:
                text.append(f"{step_id}\n", "bold")
            for line in lines:
                text.append("- " + line + "\n")
        self.query_one("#findings-text", Static).update(text)
        self.query_one("#diagnosis", Static).display = False
        pane.display = True

    def _show_diagnosis(self, view: DiagnosisView) -> None:
        """The next check first (what the operator does now), then the ranked hypotheses."""
        self.diagnosis = view
        if self.query_one("#findings").display:  # a harness proof's findings say it better
            return
        box = self.query_one("#diagnosis", Static)
        box.border_title = "likely faults"
        box.display = True
        text = Text()
        if view.unavailable:
            text.append(view.unavailable, "dim")
        if view.next_check:
            text.append("Next check: ", "bold")
            text.append(view.next_check + "\n")
        elif not view.unavailable:
            text.append("No further check suggested.\n", "dim")
        for rank, h in enumerate(view.hypotheses, start=1):
            text.append(
                f"{rank}. {h.probability * 100:3.0f} %  {h.fault}\n", "bold" if rank == 1 else ""
            )
            if h.same_as:  # the percentage is theirs together: the sequence cannot separate them
                text.append(f"         or, alike to this sequence, {', '.join(h.same_as)}\n")
            if h.where:
                text.append(f"         {h.where}\n", "dim")
        box.update(text)

    # --- plots --------------------------------------------------------------------------------

    def _ntc_pair(self) -> tuple[Any, StepResult] | None:
        for result in self.results:
            if result.kind == "ntc":
                spec = next(p.spec for p in self.request.plan.steps if p.spec.id == result.step_id)
                return spec, result
        return None

    def _highlighted(self) -> StepResult | None:
        table = self.query_one("#steps", DataTable)
        if not self.results or table.cursor_row < 0 or table.cursor_row >= len(self.results):
            return None
        return self.results[table.cursor_row]

    def _update_plot(self) -> None:
        if self.running:
            return
        view = self.query_one("#plot", ChartView)
        pair = self._ntc_pair()
        if self._plot_mode == "curve" and pair is not None:
            chart = ntc_chart(*pair)
            view.border_title = f"{pair[1].step_id} against its curve"
            view.show(chart, "no curve: the step has no temperature")
            return
        chosen = self._highlighted()
        if chosen is None or chosen.kind == "prompt":
            view.border_title = "trend"
            view.show(None, "choose a measured step (up/down) to see it over the last runs")
            return
        rows = step_history(
            self.store, self.setup.station.name, self.request.plan.sequence.name, chosen.step_id
        )
        view.border_title = f"{chosen.step_id} over the last runs"
        view.show(trend_chart(rows, chosen.step_id), "no stored readings of this step yet")

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        if self._plot_mode == "trend" or self._ntc_pair() is None:
            self._update_plot()

    # --- keys ---------------------------------------------------------------------------------

    def action_stop(self) -> None:
        if not self.running or self._stopping:
            return
        self._stopping = True
        self.stop_switch.throw()
        if self._prompt is not None:
            self._prompt.dismiss(False)
        self._show_progress()

    def action_back(self) -> None:
        if self.running:
            self.notify("the run is still going; press F8 to stop it first", severity="warning")
            return
        self.dismiss(None)

    def action_cursor(self, delta: int) -> None:
        table = self.query_one("#steps", DataTable)
        if table.row_count:
            table.move_cursor(row=max(0, min(table.row_count - 1, table.cursor_row + delta)))

    def takes_keys(self) -> bool:
        """Whether a typed key now goes into the next-serial field."""
        return not self.running and time.monotonic() >= self._quiet_until

    def ignore_key(self) -> None:
        """A typed key that is no command and must not become a serial: dropped, and said once
        per burst (a scan is a burst of keys)."""
        now = time.monotonic()
        if now >= self._quiet_until:
            self._told_keys = False
        self._quiet_until = now + self.QUIET_S
        self.ignored_keys += 1
        if self._told_keys:
            return
        self._told_keys = True
        if self.running:
            self.notify("finish or stop this run first (F8 stops it); typed keys are ignored")
        else:
            self.notify("keys typed as the run ended were ignored; scan the next serial again")

    def on_key(self, event: events.Key) -> None:
        # keys that reach the screen while the run goes on (the field is hidden then)
        typed = event.is_printable or event.key == "enter"
        if typed and (self.running or time.monotonic() < self._quiet_until):
            event.stop()
            event.prevent_default()
            self.ignore_key()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        serial = event.value.strip()
        problem = serial_problem(serial)
        if problem:
            self.notify(problem, severity="warning")
            return
        self.dismiss(serial)

    def action_toggle_plot(self) -> None:
        self._plot_mode = "trend" if self._plot_mode == "curve" else "curve"
        self._update_plot()

    def action_history(self) -> None:
        self._on_history()

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        """Show only the keys that do something now (stop while running, the rest after)."""
        if action == "stop":
            return self.running
        if action in ("back", "toggle_plot"):
            return not self.running
        return True
