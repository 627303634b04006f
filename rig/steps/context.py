"""What a step may ask of the engine while it runs (the engine implements this)."""

from __future__ import annotations

from abc import ABC, abstractmethod
from typing import Protocol

from drivers.base import MeterFunction
from rig.config.fixture import FixtureMap
from rig.judge.accuracy import AccuracySpec
from rig.judge.reference_probe import ReferenceProbe
from rig.routing import Route
from rig.steps.base import Reading, SupplyRequest


class EarlierResult(Protocol):
    @property
    def value(self) -> float: ...

    @property
    def u_std(self) -> float: ...


class StepContext(Protocol):
    def connect(self, route: Route) -> None:
        """Close exactly the relays of ``route`` (break-before-make, interlocks checked)."""

    def measure(
        self, function: MeterFunction, *, role: str, range_: float | None, nplc: float
    ) -> Reading:
        """A settled reading on the current route; every raw reading is kept by the engine."""

    def measure_on(
        self,
        route: Route,
        function: MeterFunction,
        *,
        role: str,
        range_: float | None,
        nplc: float,
    ) -> Reading:
        """``connect(route)``, then ``measure(...)``: told both at once, the engine sets the
        meter up while the relays move."""

    def power(self, request: SupplyRequest | None) -> None:
        """Program and switch on the bench supply, or switch it off for ``None``."""

    def supply_current(self, *, role: str) -> Reading:
        """The supply's own current readback (with its uncertainty)."""

    def earlier(self, step_id: str) -> EarlierResult:
        """The result of an earlier step of this run, by id."""

    def prompt(self, text: str, *, stops_run: bool = False) -> bool:
        """Ask the operator; True when confirmed.  It is the step's last use of the bench: once
        confirmed, the engine may start the next step's first route.  ``stops_run``: a no ends
        the run (the front end says so as it asks)."""

    def wait(self, seconds: float) -> None:
        """A timed soak."""

    def lead_zero(self, hi: str, lo: str) -> float:
        """The station's stored fixture lead resistance for this pin pair (0 when none)."""

    def meter_ranges(self, function: MeterFunction) -> list[float]:
        """The ranges the station's accuracy table lists for ``function``, smallest first
        (empty where it lists none): a step that must pick a range for a value it has only
        estimated picks from these."""

    def meter_accuracy(self, function: MeterFunction, range_: float | None) -> AccuracySpec | None:
        """The station's accuracy spec for ``function`` on ``range_`` (None: not listed): a step
        that combines readings on one range needs its parts, not only each reading's u."""

    @property
    def fixture(self) -> FixtureMap:
        """The station's fixture map (a harness step joins its wire list to it)."""

    @property
    def reference_probe(self) -> ReferenceProbe | None:
        """The station's reference thermometer (None: not stated): its own uncertainty is part
        of a reference temperature's."""


class ConnectThenMeasure(ABC):
    """``measure_on`` as the two calls it stands for, for contexts with nothing to overlap."""

    @abstractmethod
    def connect(self, route: Route) -> None: ...

    @abstractmethod
    def measure(
        self, function: MeterFunction, *, role: str, range_: float | None, nplc: float
    ) -> Reading: ...

    def measure_on(
        self,
        route: Route,
        function: MeterFunction,
        *,
        role: str,
        range_: float | None,
        nplc: float,
    ) -> Reading:
        self.connect(route)
        return self.measure(function, role=role, range_=range_, nplc=nplc)
