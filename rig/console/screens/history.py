"""Recent runs at the station, and the stored record of one run, read from the results store."""

from __future__ import annotations

import json
from collections.abc import Callable, Mapping
from functools import partial
from typing import Any, ClassVar

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import VerticalScroll
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Static

from rig.console.decision import decision_style, stored_decision
from rig.console.setup import ConsoleSetup
from rig.console.widgets import RunList, TextTable
from rig.console.words import (
    VERDICT_STYLES,
    kind_cells,
    note_cell,
    note_parts,
    stored_run_word,
    verdict_word,
)
from rig.judge.decision import Limits, Verdict
from rig.planned_steps import unmeasured_steps
from rig.screening import ScreenDecision, decision_line
from rig.store import ResultStore


class HistoryScreen(Screen[None]):
    """The station's recent runs, each screen's with its decision on the unit (``decide``: by
    run id, None for a harness proof); Enter opens one."""

    DEFAULT_CSS = """
    HistoryScreen #history-title { text-style: bold; height: 1; }
    HistoryScreen RunList { height: 1fr; }
    """

    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape", "back", "Back")]

    def __init__(
        self,
        setup: ConsoleSetup,
        recent: Callable[[], list[dict[str, Any]]],
        on_open_run: Callable[[int], None],
        decide: Callable[[list[dict[str, Any]]], Mapping[int, ScreenDecision | None]],
    ) -> None:
        super().__init__()
        self.setup = setup
        self._recent = recent
        self._on_open_run = on_open_run
        self._decide = decide

    def compose(self) -> ComposeResult:
        yield Static(
            f"Recent runs at station {self.setup.station.name} (Enter opens the record)",
            id="history-title",
        )
        yield RunList(self._on_open_run, decisions=True, id="history")
        yield Footer()

    def on_mount(self) -> None:
        runs = self.query_one(RunList)
        recent = self._recent()
        runs.show_runs(recent, partial(self.setup.show_time, short=True), self._decide(recent))
        runs.focus()

    def action_back(self) -> None:
        self.dismiss(None)


RECORD_COLUMNS = ("#", "step", "verdict", "reading", "unit", "limits", "± U (k=2)", "rule", "note")


def _limits(row: dict[str, Any]) -> Limits | None:
    if row["low"] is None and row["high"] is None:
        return None
    return Limits(row["low"], row["high"])


class RecordScreen(Screen[None]):
    """Everything the store holds about one run: header, instruments, steps, notes.

    The record is one page that scrolls as a whole (keys and mouse), every text wrapped to its
    width: a step's note longer than its cell, a remark, a run's notes are read in full."""

    DEFAULT_CSS = """
    RecordScreen #record { overflow-x: auto; }
    RecordScreen #record-head { height: auto; padding: 0 1; }
    RecordScreen #record-steps { height: auto; }
    RecordScreen #record-notes { height: auto; padding: 0 1; }
    """

    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape", "back", "Back")]

    def __init__(self, setup: ConsoleSetup, store: ResultStore, run_id: int) -> None:
        super().__init__()
        self.setup = setup
        self.store = store
        self.run_id = run_id

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="record"):
            yield Static(id="record-head")
            yield TextTable(id="record-steps", cursor_type="none", zebra_stripes=True)
            yield Static(id="record-notes")
        yield Footer()

    def on_mount(self) -> None:
        run = self.store.run(self.run_id)
        verdict = run["verdict"]
        word = stored_run_word(str(run["status"] or ""), verdict)
        style = VERDICT_STYLES[Verdict(verdict)] if verdict else ""
        head = Text()
        head.append(f"Run {run['id']}  ", "bold")
        head.append(word, style)
        head.append(f"  ({run['status']})\n")
        units = self.store.sequence_units(str(run["sequence_name"]))
        decision = stored_decision(self.store, self.run_id, units)
        if decision is not None:
            head.append(decision_line(decision) + "\n", decision_style(decision))
        head.append(
            f"serial {run['serial']} · sequence {run['sequence_name']} · station {run['station']}\n"
        )
        head.append(
            f"started {self.setup.show_time(run['started_at'])} · "
            f"ended {self.setup.show_time(run['ended_at'])}"
        )
        if run["operator"]:
            head.append(f" · operator {run['operator']}")
        if run["unit"]:
            head.append(f" · unit model {run['unit']}")
        faults = json.loads(run["faults"] or "[]")
        if faults:
            head.append(f"\ninjected faults (virtual bench): {', '.join(faults)}")
        if run["reason"]:
            head.append(f"\nreason: {run['reason']}")
        if run["claim"]:
            head.append(f"\nclaim or return number: {run['claim']}")
        if run["remark"]:
            head.append(f"\nremark: {run['remark']}")
        self.query_one("#record-head", Static).update(head)

        table = self.query_one("#record-steps", DataTable)
        table.styles.max_height = None  # every row on the page: the page scrolls, not the table
        table.add_columns(*RECORD_COLUMNS)
        steps = self.store.steps(self.run_id)
        readings = self.store.readings(self.run_id)
        for row in steps:
            value = row["value"] if row["value"] is not None else float("nan")
            cells = kind_cells(row["kind"], value, row["unit"], _limits(row), row["expanded_u"])
            step_verdict = Verdict(row["verdict"])
            table.add_row(
                str(row["position"]),
                row["step_id"],
                Text(verdict_word(step_verdict), VERDICT_STYLES[step_verdict]),
                cells.reading,
                cells.unit,
                cells.limits,
                cells.uncertainty,
                row["decision_rule"],
                Text(note_cell(row["note"])),
            )
        missing = unmeasured_steps(run, steps, readings, self.setup.station)
        for step in missing.steps:  # after the judged steps: what the run never measured
            state = Text(step.state.upper(), "dim")
            table.add_row(str(step.position), step.step_id, state, *[""] * 6)
        notes = Text()
        cut = [row for row in steps if note_cell(row["note"]) != row["note"]]
        if cut:
            notes.append("Step notes in full\n", "bold")
        for row in cut:
            notes.append(f"{row['step_id']}\n", "bold")
            for part in note_parts(row["note"]):
                notes.append(f"- {part}\n")
        for line in missing.notes:
            notes.append(f"{line}\n", "dim")
        for inst in json.loads(run["instruments"] or "[]"):
            due = inst.get("calibration_due") or "not given"
            notes.append(f"{inst['role']}: {inst['identity']} (calibration due {due})\n", "dim")
        for note in json.loads(run["notes"] or "[]"):
            notes.append(f"note: {note}\n")
        notes.append(f"{len(readings)} raw readings kept in the results store", "dim")
        self.query_one("#record-notes", Static).update(notes)
        self.query_one("#record", VerticalScroll).focus()

    def action_back(self) -> None:
        self.dismiss(None)
