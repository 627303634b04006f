"""The operator console: a full-screen textual app over one station.

Screens stack: the start view at the bottom, a run view on top of it for each unit, the history and
a run's record on top of either; the cautions and operator prompts are modal.  The app keeps one
results-store connection of its own for reading; each run's worker writes through its own.
"""

from __future__ import annotations

from functools import partial
from pathlib import Path
from typing import Any, ClassVar

from textual.app import App
from textual.binding import Binding, BindingType

from rig.cautions import cautions_for
from rig.console.decision import run_decisions
from rig.console.screens.caution import CautionScreen
from rig.console.screens.history import HistoryScreen, RecordScreen
from rig.console.screens.run import RunScreen
from rig.console.screens.start import RECENT_RUNS, StartScreen
from rig.console.setup import ConsoleSetup
from rig.console.worker import RunRequest
from rig.demo import sequences_dir
from rig.plan import Plan
from rig.store import ResultStore


class ConsoleApp(App[None]):
    """``rig console``: scan, run, read the verdict, next unit."""

    TITLE = "rig console"
    BINDINGS: ClassVar[list[BindingType]] = [Binding("ctrl+q", "quit", "Quit", priority=True)]

    def __init__(self, setup: ConsoleSetup, *, units_dir: Path | None = None) -> None:
        super().__init__()
        self.setup = setup
        self.units_dir = units_dir or sequences_dir() / "units"
        self.store = ResultStore(setup.store_path)
        self.cautions_acknowledged = False
        self.start_screen = StartScreen(setup, self.start_run, self.open_record, self.recent_runs)

    def on_mount(self) -> None:
        self.push_screen(self.start_screen)
        cautions = cautions_for(self.setup.plans)
        self.push_screen(CautionScreen(cautions, self.setup.bench_label), self._acknowledged)

    def _acknowledged(self, result: bool | None) -> None:
        self.cautions_acknowledged = bool(result)

    def on_unmount(self) -> None:
        self.store.close()

    # --- what the screens ask of the app ------------------------------------------------------

    def recent_runs(self) -> list[dict[str, Any]]:
        """The newest runs at this station (the store may hold other stations' runs too)."""
        station = self.setup.station.name
        runs = [r for r in self.store.runs(limit=RECENT_RUNS * 4) if r["station"] == station]
        return runs[:RECENT_RUNS]

    def start_run(self, plan: Plan, serial: str, claim: str = "", remark: str = "") -> None:
        """A run of ``plan`` on unit ``serial``; the next unit scanned in its view runs the same
        plan with no claim or remark (they belong to this unit)."""
        if self.setup.unit_file is not None:
            unit = str(self.setup.unit_file)
        else:
            unit = self.setup.unit.name if self.setup.unit is not None else ""
        request = RunRequest(
            plan, serial, self.setup.operator, unit, self.setup.faults, claim=claim, remark=remark
        )

        def next_unit(serial: str | None) -> None:
            if serial:
                self.start_run(plan, serial)

        self.push_screen(
            RunScreen(self.setup, request, self.units_dir, self.store, self.open_history),
            next_unit,
        )

    def open_history(self) -> None:
        decide = partial(run_decisions, self.store)
        self.push_screen(HistoryScreen(self.setup, self.recent_runs, self.open_record, decide))

    def open_record(self, run_id: int) -> None:
        self.push_screen(RecordScreen(self.setup, self.store, run_id))

    async def action_quit(self) -> None:
        """Quitting during a run stops it first, so that the bench ends in the safe state."""
        screen = self.run_screen
        if screen is not None and screen.running:
            screen.quit_when_done = True
            screen.action_stop()
            self.notify("stopping the run and making the bench safe before quitting")
            return
        self.exit()

    @property
    def run_screen(self) -> RunScreen | None:
        """The run view on the stack, if a run is open."""
        return next((s for s in self.screen_stack if isinstance(s, RunScreen)), None)
