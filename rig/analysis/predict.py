"""What a sequence would read on a unit with given faults, step by step, judged as a run is.

The plan's own step kinds run against a solver instead of instruments: each ``measure`` solves the
unit on its fixture for the relays the step closed (``rig.analysis.bench_model``), each reading
gets the uncertainty the station's accuracy table gives it, and each outcome is judged by the
engine's own rule.  Intermittent faults change from reading to reading and are refused here.
"""

from __future__ import annotations

import math
import time
from collections.abc import Sequence
from dataclasses import dataclass, field, replace

from drivers.base import MeterFunction
from rig.analysis.bench_model import Condition, StaticBench
from rig.config.fixture import FixtureMap
from rig.config.unit_file import UnitModel
from rig.errors import ConfigError, Problem, RigError
from rig.faults import Fault
from rig.judge.accuracy import AccuracySpec
from rig.judge.decision import Verdict
from rig.judge.reference_probe import ReferenceProbe
from rig.plan import Plan
from rig.routing import Route, plan_relays
from rig.step_judging import (
    autorange_estimate,
    judge_outcome,
    lead_zero_ohm,
    meter_accuracy,
    meter_ranges,
    reading_u,
    supply_current_u,
)
from rig.steps import KINDS, Outcome, Reading, SupplyRequest
from rig.steps.context import ConnectThenMeasure


@dataclass(frozen=True)
class StepPrediction:
    step_id: str
    value: float
    """In the step's unit, what a good meter would read."""
    unit: str
    expanded_u: float
    """k = 2 from the station's accuracy table, NaN if none."""
    verdict: Verdict


@dataclass(frozen=True)
class PredictedReading:
    """One raw reading a step would take, and what it depends on."""

    step_id: str
    role: str
    value: float
    u_std: float
    range_: float | None
    """The range the step asked for (None: autorange)."""
    condition: Condition


@dataclass
class Prediction:
    steps: list[StepPrediction] = field(default_factory=list)
    readings: list[PredictedReading] = field(default_factory=list)


@dataclass(frozen=True)
class _Earlier:
    value: float
    u_std: float


class _SolverContext(ConnectThenMeasure):
    """A ``StepContext`` whose instruments are the circuit solver."""

    def __init__(self, plan: Plan, bench: StaticBench, prediction: Prediction) -> None:
        self.plan = plan
        self.bench = bench
        self.prediction = prediction
        self.step_id = ""
        self.results: dict[str, _Earlier] = {}

    def connect(self, route: Route) -> None:
        self.bench.closed = plan_relays(self.plan.station.fixture, route)

    def measure(
        self, function: MeterFunction, *, role: str, range_: float | None, nplc: float
    ) -> Reading:
        value, current = self.bench.read(function, range_)
        station = self.plan.station
        used = range_ if range_ is not None else autorange_estimate(station, function, value)
        u = reading_u(station, function, value, used)
        self._keep(role, value, u, range_, self.bench.condition(function, current))
        return Reading(role, function.value, value, used, nplc, time.time(), u)

    def power(self, request: SupplyRequest | None) -> None:
        supply = self.bench.supply
        supply.output_on = request is not None
        if request is not None:
            supply.voltage_v, supply.current_limit_a = request.volts, request.limit_a

    def supply_current(self, *, role: str) -> Reading:
        value = self.bench.supply_current()
        u, range_ = supply_current_u(self.plan.station, value)
        self._keep(role, value, u, range_, self.bench.condition(None, 0.0))
        return Reading(role, "supply-current", value, range_, 0.0, time.time(), u)

    def earlier(self, step_id: str) -> _Earlier:
        if step_id not in self.results:
            raise RigError(f"step {step_id!r} has no result in this prediction")
        return self.results[step_id]

    def prompt(self, text: str, *, stops_run: bool = False) -> bool:
        return True

    def wait(self, seconds: float) -> None:
        return None

    @property
    def fixture(self) -> FixtureMap:
        return self.plan.station.fixture

    @property
    def reference_probe(self) -> ReferenceProbe | None:
        return self.plan.station.reference_probe

    def lead_zero(self, hi: str, lo: str) -> float:
        return lead_zero_ohm(self.plan.station, hi, lo)

    def meter_ranges(self, function: MeterFunction) -> list[float]:
        return meter_ranges(self.plan.station, function)

    def meter_accuracy(self, function: MeterFunction, range_: float | None) -> AccuracySpec | None:
        return meter_accuracy(self.plan.station, function, range_)

    def _keep(
        self, role: str, value: float, u: float, range_: float | None, condition: Condition
    ) -> None:
        self.prediction.readings.append(
            PredictedReading(self.step_id, role, value, u, range_, condition)
        )


def check_static(faults: Sequence[Fault]) -> None:
    """Refuse intermittent faults: they are not one state a prediction can describe."""
    moving = [f.spec for f in faults if f.kind == "intermittent"]
    if moving:
        raise ConfigError(
            [
                Problem(
                    "fault spec",
                    spec,
                    "intermittent faults change from reading to reading; predictions, coverage "
                    "and diagnosis take static faults only",
                )
                for spec in moving
            ]
        )


class SequencePredictor:
    """Predicts every step of a plan for a unit model with static faults."""

    def __init__(self, plan: Plan, unit: UnitModel) -> None:
        self.plan = plan
        self.unit = unit
        self._bench = StaticBench(unit, plan.station.fixture, [])

    def predict(self, faults: Sequence[Fault] = ()) -> list[StepPrediction]:
        """One prediction per step, in plan order."""
        return self.run(faults).steps

    def run(self, faults: Sequence[Fault] = ()) -> Prediction:
        """The step predictions and every raw reading behind them."""
        check_static(faults)
        self._bench.set_faults(list(faults))
        self._bench.closed = frozenset()
        self._bench.supply.output_on = False
        prediction = Prediction()
        ctx = _SolverContext(self.plan, self._bench, prediction)
        aborted = False
        for planned in self.plan.steps:
            spec = replace(planned.spec, range_=planned.range_)
            kind = KINDS[spec.kind]
            if aborted:  # the engine stops a run at a step that could not measure
                prediction.steps.append(
                    StepPrediction(spec.id, math.nan, kind.unit, math.nan, Verdict.SKIPPED)
                )
                continue
            ctx.step_id = spec.id
            try:
                outcome, error = kind.run(ctx, spec), False
            except RigError as exc:
                outcome = Outcome(math.nan, kind.unit, math.nan, spec.limits, note=str(exc))
                error = aborted = True
            verdict, expanded, _ = judge_outcome(spec, outcome, error=error)
            ctx.results[spec.id] = _Earlier(outcome.value, outcome.u_std)
            prediction.steps.append(
                StepPrediction(spec.id, outcome.value, outcome.unit, expanded, verdict)
            )
        return prediction
