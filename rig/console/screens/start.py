"""The start view: scan or type a serial, confirm the sequence, start; recent runs beside it.

A barcode scanner types the serial and presses Enter, so Enter in the serial field starts the run
with the highlighted sequence.  The arrow keys move the sequence choice without leaving the field.
A returned unit's claim or return number and a remark may be typed first (Tab), checked as
``rig run --claim/--remark`` checks them; Enter in either starts the run too.
"""

from __future__ import annotations

from collections.abc import Callable
from functools import partial
from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical
from textual.screen import Screen
from textual.widgets import Footer, Input, OptionList, Static
from textual.widgets.option_list import Option

from rig.console.setup import ConsoleSetup
from rig.console.widgets import RunList
from rig.plan import Plan
from rig.run_admission import claim_problem, entered_serial_problem, remark_problem

RECENT_RUNS = 15


def serial_problem(text: str) -> str:
    """Why ``text`` cannot be a serial number, or empty when it can: the rule ``rig run``
    keeps (``rig.run_admission``), said to the technician at the scanner."""
    if not text:
        return "scan or type the unit's serial number first"
    problem = entered_serial_problem(text)
    return f"{problem}; scan it again" if "control character" in problem else problem


def operator_line(operator: str) -> str:
    """Who each run is recorded as: a QA or shop record names who tested, so its absence is
    said where the operator starts every run."""
    if operator:
        return f"Operator: {operator} (recorded with each run)"
    return "Operator: not given; runs are recorded without one (start with --operator NAME)"


class StartScreen(Screen[None]):
    """Where each unit's test begins."""

    DEFAULT_CSS = """
    StartScreen #start-title { text-style: bold; height: 1; }
    StartScreen #start-bench { color: $text-muted; height: auto; }
    StartScreen #start-operator { color: $text-muted; height: auto; }
    StartScreen #start-left { width: 52; padding: 1 1; }
    StartScreen #start-right { width: 1fr; padding: 1 1; }
    StartScreen .label { text-style: bold; margin-top: 1; }
    StartScreen #serial-problem { color: $error; text-style: bold; height: auto; }
    StartScreen #sequences { height: auto; max-height: 12; }
    StartScreen RunList { height: 1fr; }
    """

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("up", "sequence(-1)", "Sequence up", show=False),
        Binding("down", "sequence(1)", "Sequence down", show=False),
        Binding("f5", "refresh_runs", "Refresh runs"),
    ]

    def __init__(
        self,
        setup: ConsoleSetup,
        on_start: Callable[[Plan, str, str, str], None],
        on_open_run: Callable[[int], None],
        recent: Callable[[], list[dict[str, object]]],
    ) -> None:
        super().__init__()
        self.setup = setup
        self._on_start = on_start
        self._on_open_run = on_open_run
        self._recent = recent

    def compose(self) -> ComposeResult:
        station = self.setup.station
        yield Static(f"rig console · station {station.name}", id="start-title", markup=False)
        if self.setup.bench_label:
            yield Static(self.setup.bench_label, id="start-bench", markup=False)
        yield Static(operator_line(self.setup.operator), id="start-operator", markup=False)
        with Horizontal():
            with Vertical(id="start-left"):
                yield Static("Serial number (scan, or type and press Enter)", classes="label")
                yield Input(placeholder="serial number", id="serial")
                yield Static("", id="serial-problem")
                yield Static("Claim or return number", classes="label")
                yield Input(placeholder="optional, kept with the run", id="claim")
                yield Static("Remark", classes="label")
                yield Input(placeholder="optional, e.g. what the customer reported", id="remark")
                yield Static("Sequence (up/down to choose)", classes="label")
                yield OptionList(
                    *[
                        Option(
                            f"{p.sequence.name}  ({len(p.steps)} steps)\n"
                            f"  {p.sequence.description}",
                            id=p.sequence.name,
                        )
                        for p in self.setup.plans
                    ],
                    id="sequences",
                )
            with Vertical(id="start-right"):
                yield Static("Recent runs at this station (Tab here, Enter opens)", classes="label")
                yield RunList(self._on_open_run, id="recent")
        yield Footer()

    def on_mount(self) -> None:
        options = self.query_one("#sequences", OptionList)
        options.highlighted = 0
        serial = self.query_one("#serial", Input)
        serial.cursor_blink = False  # steady: nothing on the bench screen blinks
        serial.focus()
        self.action_refresh_runs()

    def on_screen_resume(self) -> None:
        for field in ("#claim", "#remark"):  # they belong to the unit just run
            self.query_one(field, Input).value = ""
        serial = self.query_one("#serial", Input)
        serial.value = ""
        serial.focus()
        self.action_refresh_runs()

    def action_refresh_runs(self) -> None:
        self.query_one(RunList).show_runs(self._recent(), partial(self.setup.show_time, short=True))

    def action_sequence(self, delta: int) -> None:
        options = self.query_one("#sequences", OptionList)
        count = options.option_count
        if count:
            options.highlighted = ((options.highlighted or 0) + delta) % count

    def chosen_plan(self) -> Plan | None:
        options = self.query_one("#sequences", OptionList)
        if options.highlighted is None:
            return None
        option_id = options.get_option_at_index(options.highlighted).id
        return self.setup.plan_named(option_id or "")

    def on_input_submitted(self, event: Input.Submitted) -> None:
        """Enter in any field: start with the serial, claim and remark as typed, or say what
        stops it (and put the cursor where it is fixed)."""
        fields = {name: self.query_one(f"#{name}", Input) for name in ("serial", "claim", "remark")}
        serial, claim, remark = (fields[name].value.strip() for name in fields)
        plan = self.chosen_plan()
        problem, where = "", "serial"
        for name, found in (
            ("serial", serial_problem(serial)),
            ("claim", claim_problem(claim)),
            ("remark", remark_problem(remark)),
        ):
            if found:
                problem, where = found, name
                break
        if not problem and plan is None:
            problem = "choose a sequence first"
        self.query_one("#serial-problem", Static).update(problem)
        if problem or plan is None:
            fields[where].focus()
            return
        self._on_start(plan, serial, claim, remark)

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        # Enter on a sequence: go back to the serial field, which starts the run
        self.query_one("#serial", Input).focus()
