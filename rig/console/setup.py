"""What the console is opened on: a station, its planned sequences, and where runs are kept.

Everything the screens need from outside is gathered here once, so the screens stay free of file
handling and the tests can open the console on a virtual bench with a fixed clock.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from rig.config.station import Station
from rig.config.unit_file import UnitModel
from rig.plan import Plan


def _local_now() -> dt.datetime:
    return dt.datetime.now().astimezone()


@dataclass
class ConsoleSetup:
    """The station, the sequences offered on it, and the optional virtual-bench context."""

    station: Station
    plans: list[Plan]
    operator: str = ""
    unit: UnitModel | None = None
    """The unit model when it is known (a virtual bench); lets diagnosis run without a lookup."""
    unit_file: Path | None = None
    """The unit file given with ``--unit``: each run records it, as ``rig run --unit`` does, so
    ``rig diagnose`` and ``rig report`` find it later wherever it lies (else the unit's name)."""
    faults: tuple[str, ...] = ()
    """Faults injected on a virtual bench, recorded with each run."""
    bench_label: str = ""
    """One line saying what the bench is, e.g. that it is virtual and its values invented."""
    clock: Callable[[], dt.datetime] = field(default=_local_now)
    """The clock shown on screen (fixed in the snapshot tests)."""

    @property
    def store_path(self) -> Path:
        return self.station.store_path

    def show_time(self, iso: str | None, *, short: bool = False) -> str:
        """A stored ISO time in local time: to the second, or day, month and minute."""
        if not iso:
            return "-"
        try:
            when = dt.datetime.fromisoformat(iso)
        except ValueError:
            return iso
        return when.astimezone().strftime("%d %b %H:%M" if short else "%Y-%m-%d %H:%M:%S")

    def plan_named(self, name: str) -> Plan | None:
        return next((p for p in self.plans if p.sequence.name == name), None)
