"""The engine: runs a plan on a bench, step by step, judging and keeping every reading.

It emits events (``rig.events``) and never prints.  Whatever way a run ends — normal end, failed
step, instrument fault, operator stop, Ctrl-C or SIGTERM turned into ``KeyboardInterrupt`` by the
CLI — the bench is brought to the safe state (every relay open, supply output off) and that is
verified by read-back; the run is recorded as complete or aborted with its reason.
"""

from __future__ import annotations

import datetime as dt
import logging
import math
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace

from drivers.base import Dmm, MeterFunction, RelayBox, Supply
from rig.config.fixture import FixtureMap
from rig.config.station import FUNCTIONS
from rig.errors import InstrumentError, InterlockError, RigError
from rig.events import (
    Event,
    PromptShown,
    ReadingTaken,
    RunFinished,
    RunStarted,
    StepFinished,
    StepResult,
    StepStarted,
)
from rig.judge.decision import Verdict, judge, test_uncertainty_ratio, tur_is_low, worst
from rig.plan import Plan, PlannedStep
from rig.routing import Route, plan_relays
from rig.steps import KINDS, Outcome, Reading, StepSpec, SupplyRequest
from rig.store import ResultStore, RunHeader

log = logging.getLogger(__name__)

COVERAGE_K = 2.0
"""Coverage factor for expanded uncertainty: about 95 % (JCGM 100:2008, 6.2)."""


@dataclass
class Bench:
    """The instruments of a station, opened."""

    dmm: Dmm
    supply: Supply
    relays: RelayBox

    def all(self) -> list[Dmm | Supply | RelayBox]:
        return [self.dmm, self.supply, self.relays]


@dataclass
class SettlePolicy:
    """Read until two successive readings agree within a fraction of the meter's uncertainty."""

    enabled: bool = True
    agree_fraction: float = 0.5
    max_readings: int = 12


@dataclass
class RunSummary:
    run_id: int
    serial: str
    sequence: str
    status: str
    verdict: Verdict
    reason: str
    results: list[StepResult] = field(default_factory=list)
    safe: bool = True
    notes: list[str] = field(default_factory=list)

    @property
    def failed_steps(self) -> list[str]:
        bad = (Verdict.FAIL, Verdict.CONDITIONAL_FAIL, Verdict.ERROR)
        return [r.step_id for r in self.results if r.verdict in bad]


WEAR_WARNING_FRACTION = 0.9
"""Warn when a relay has used this share of its rated operations (common practice)."""


def wear_warnings(wear: dict[int, int], fixture: FixtureMap) -> list[str]:
    """Relays near their rated life, in words, so they are replaced before they fail."""
    rated = fixture.rated_operations
    return [
        f"relay {relay} has made {ops} of its rated {rated} operations; plan to replace it"
        for relay, ops in sorted(wear.items())
        if ops >= WEAR_WARNING_FRACTION * rated
    ]


class StopRequested(RigError):
    """The operator asked to stop the run."""


def make_safe(bench: Bench) -> list[str]:
    """Open every relay and switch the supply off, each verified by read-back; returns what could
    not be made safe, in words (empty when the bench is safe)."""
    failures: list[str] = []
    try:
        bench.supply.set_output(False)
        if bench.supply.output_is_on():
            failures.append(f"supply {bench.supply.name}: output still reads on")
    except (RigError, OSError) as exc:
        failures.append(f"supply {bench.supply.name}: {exc}")
    try:
        bench.relays.open_all()
        still = bench.relays.closed_relays()
        if still:
            failures.append(f"relay box {bench.relays.name}: relays {sorted(still)} still closed")
    except (RigError, OSError) as exc:
        failures.append(f"relay box {bench.relays.name}: {exc}")
    return failures


class Engine:
    """Runs plans on one bench; one run at a time."""

    def __init__(
        self,
        plan: Plan,
        bench: Bench,
        store: ResultStore,
        *,
        listener: Callable[[Event], None] | None = None,
        ask: Callable[[str], bool] | None = None,
        stop: threading.Event | None = None,
        settle: SettlePolicy | None = None,
    ) -> None:
        self.plan = plan
        self.bench = bench
        self.store = store
        self.listener = listener or (lambda event: None)
        self.ask = ask or (lambda text: True)
        self.stop = stop or threading.Event()
        self.settle = settle or SettlePolicy()
        self._closed: frozenset[int] = frozenset()
        self._supply_state: SupplyRequest | None = None
        self._results: dict[str, StepResult] = {}
        self._run_id = 0
        self._step_id = ""
        self._step_settle = 0.0
        self._step_readings = 0
        self._last_reading_row = 0

    # --- the run ------------------------------------------------------------------------------

    def run(
        self,
        serial: str,
        operator: str = "",
        *,
        unit: str = "",
        faults: tuple[str, ...] = (),
        notes: list[str] | None = None,
    ) -> RunSummary:
        station = self.plan.station
        sequence = self.plan.sequence
        notes = list(notes or [])
        identities = self._identities(notes)
        run_id = self.store.start_run(
            RunHeader(
                serial=serial,
                sequence_name=sequence.name,
                sequence_hash=sequence.content_hash,
                sequence_path=str(sequence.path),
                station=station.name,
                operator=operator,
                unit=unit,
                faults=faults,
                instruments=tuple(identities),
            )
        )
        self._run_id = run_id
        self.listener(
            RunStarted(run_id, serial, sequence.name, tuple(p.spec.id for p in self.plan.steps))
        )
        notes.extend(wear_warnings(self.store.relay_wear(station.name), station.fixture))
        counts_before = self._relay_counts()
        status, reason = "complete", ""
        results: list[StepResult] = []
        interrupted: BaseException | None = None
        try:
            self._start_safe()
            self.bench.relays.start_watchdog(station.watchdog_s)
            for position, planned in enumerate(self.plan.steps, start=1):
                if self.stop.is_set():
                    raise StopRequested("stopped by the operator")
                result = self._run_step(position, planned)
                results.append(result)
                self._results[result.step_id] = result
                if result.verdict is Verdict.ERROR:
                    status, reason = "aborted", f"step {result.step_id}: {result.note}"
                    break
        except StopRequested as exc:
            status, reason = "aborted", str(exc)
        except InstrumentError as exc:
            status, reason = "aborted", f"instrument fault: {exc}"
        except KeyboardInterrupt as exc:
            status, reason = "aborted", "interrupted (Ctrl-C or SIGTERM)"
            interrupted = exc
        except RigError as exc:
            status, reason = "aborted", str(exc)
        finally:
            failures = self._end_safe()
            self._record_wear(counts_before)
        safe = not failures
        if failures:
            notes.append("could not make safe: " + "; ".join(failures))
        verdict = worst(r.verdict for r in results)
        if status == "aborted":
            verdict = Verdict.ERROR
        summary = RunSummary(
            run_id, serial, sequence.name, status, verdict, reason, results, safe, notes
        )
        self.store.finish_run(
            run_id, status=status, verdict=verdict.value, reason=reason, notes=notes
        )
        self.listener(
            RunFinished(
                run_id, status, verdict, reason, tuple(summary.failed_steps), safe, tuple(notes)
            )
        )
        if interrupted is not None:
            raise interrupted
        return summary

    def _identities(self, notes: list[str]) -> list[dict[str, str]]:
        found = []
        for role, inst in (
            ("dmm", self.bench.dmm),
            ("supply", self.bench.supply),
            ("relay_box", self.bench.relays),
        ):
            config = self.plan.station.instruments[role]
            try:
                ident = str(inst.identity())
            except RigError as exc:
                ident = f"unknown ({exc})"
            due = config.calibration_due.isoformat() if config.calibration_due else ""
            found.append(
                {
                    "role": role,
                    "identity": ident,
                    "resource": config.resource,
                    "calibration_due": due,
                }
            )
        return found

    def _relay_counts(self) -> dict[int, int]:
        try:
            return dict(self.bench.relays.operation_counts())
        except (RigError, OSError):
            return {}

    def _record_wear(self, before: dict[int, int]) -> None:
        after = self._relay_counts()
        delta = {r: n - before.get(r, 0) for r, n in after.items() if n > before.get(r, 0)}
        self.store.add_relay_operations(self.plan.station.name, delta)

    def _start_safe(self) -> None:
        """Bring the box to a known state (all open, read back) before anything else."""
        failures = make_safe(self.bench)
        if failures:
            raise InstrumentError(
                "the bench could not be brought to the safe state: " + "; ".join(failures)
            )
        self._closed = frozenset()
        self._supply_state = None

    def _end_safe(self) -> list[str]:
        failures = make_safe(self.bench)
        try:
            self.bench.relays.stop_watchdog()
        except (RigError, OSError) as exc:
            log.warning("could not stop the relay watchdog: %s", exc)
        self._closed = frozenset()
        self._supply_state = None
        return failures

    # --- one step -----------------------------------------------------------------------------

    def _run_step(self, position: int, planned: PlannedStep) -> StepResult:
        spec = replace(planned.spec, range_=planned.range_)
        self.listener(StepStarted(position, spec.id, spec.title, spec.kind))
        self._step_id = spec.id
        self._step_settle = 0.0
        self._step_readings = 0
        started = _now()
        kind = KINDS[spec.kind]
        try:
            outcome = kind.run(self, spec)
        except (InstrumentError, InterlockError) as exc:
            outcome = Outcome(math.nan, kind.unit, math.nan, spec.limits, note=str(exc))
            result = self._judged(position, spec, outcome, error=True)
            self._store_step(result, started)
            self.listener(StepFinished(result))
            return result
        outcome.settle_s = self._step_settle
        result = self._judged(position, spec, outcome, error=False)
        self._store_step(result, started)
        self.listener(StepFinished(result))
        return result

    def _judged(
        self, position: int, spec: StepSpec, outcome: Outcome, *, error: bool
    ) -> StepResult:
        expanded = COVERAGE_K * outcome.u_std if math.isfinite(outcome.u_std) else math.nan
        tur = None
        if error:
            verdict = Verdict.ERROR
        elif outcome.limits is None:
            verdict = Verdict.PASS if math.isfinite(outcome.value) else Verdict.FAIL
        else:
            verdict = judge(
                outcome.value,
                outcome.limits,
                expanded if math.isfinite(expanded) else 0.0,
                spec.rule,
            )
            if math.isfinite(expanded) and expanded > 0:
                tur = test_uncertainty_ratio(outcome.limits, expanded)
        return StepResult(
            position=position,
            step_id=spec.id,
            kind=spec.kind,
            title=spec.title,
            pins=dict(spec.pins),
            value=outcome.value,
            unit=outcome.unit,
            limits=outcome.limits,
            predicted=outcome.predicted,
            u_std=outcome.u_std,
            expanded_u=expanded,
            coverage_k=COVERAGE_K,
            rule=spec.rule,
            verdict=verdict,
            tur=tur,
            tur_low=tur is not None and tur_is_low(tur),
            readings=self._step_readings,
            settle_s=outcome.settle_s,
            note=outcome.note,
            extras=dict(outcome.extras),
        )

    def _store_step(self, result: StepResult, started: str) -> None:
        limits = result.limits
        self.store.add_step(
            self._run_id,
            result.position,
            {
                "step_id": result.step_id,
                "kind": result.kind,
                "title": result.title,
                "value": result.value,
                "unit": result.unit,
                "low": None if limits is None else limits.low,
                "high": None if limits is None else limits.high,
                "predicted": result.predicted,
                "u_std": result.u_std,
                "expanded_u": result.expanded_u,
                "coverage_k": result.coverage_k,
                "decision_rule": result.rule.value,
                "verdict": result.verdict.value,
                "tur": result.tur,
                "started_at": started,
                "ended_at": _now(),
                "settle_s": result.settle_s,
                "note": result.note,
                "extras": result.extras,
            },
        )

    # --- StepContext: what steps ask of the bench ---------------------------------------------

    def connect(self, route: Route) -> None:
        relays = plan_relays(self.plan.station.fixture, route)
        if relays != self._closed:
            self.bench.relays.apply(relays)
            self._closed = relays

    def measure(
        self, function: MeterFunction, *, role: str, range_: float | None, nplc: float
    ) -> Reading:
        dmm = self.bench.dmm
        dmm.configure(function, range_, nplc)
        started = time.monotonic()
        reading = self._record(function, role, dmm.read(), range_, nplc)
        limit = self.settle.max_readings if self.settle.enabled else 1
        for _ in range(1, limit):
            if not math.isfinite(reading.value):
                break
            previous, reading = reading, self._record(function, role, dmm.read(), range_, nplc)
            tolerance = self.settle.agree_fraction * max(reading.u_std, 1e-12)
            if abs(reading.value - previous.value) <= tolerance:
                break
        self._step_settle += time.monotonic() - started
        self.store.mark_settled(self._last_reading_row)
        self.listener(
            ReadingTaken(self._step_id, role, reading.value, FUNCTIONS[function.value], True)
        )
        return reading

    def _record(
        self, function: MeterFunction, role: str, value: float, range_: float | None, nplc: float
    ) -> Reading:
        """Store one raw reading at once, with the range it was taken on and its uncertainty."""
        used_range = range_ if range_ is not None else self._autorange(function, value)
        u = self._u_reading(function, value, used_range)
        taken_at = time.time()
        self._last_reading_row = self.store.add_reading(
            self._run_id,
            self._step_id,
            role=role,
            function=function.value,
            value=value,
            range_=used_range,
            nplc=nplc,
            u_std=u,
            taken_at=taken_at,
            settled=False,
        )
        self._step_readings += 1
        return Reading(role, function.value, value, used_range, nplc, taken_at, u)

    def _autorange(self, function: MeterFunction, value: float) -> float | None:
        """The range autorange would pick for ``value`` (None for no reading)."""
        if not math.isfinite(value):
            return None
        try:
            return float(self.plan.station.dmm_accuracy.range_for(function.value, abs(value)))
        except ValueError:
            return None

    def _u_reading(self, function: MeterFunction, value: float, range_: float | None) -> float:
        """Standard uncertainty of one reading from the station's accuracy table (GUM 4.3.7)."""
        if not math.isfinite(value) or range_ is None:
            return math.nan
        try:
            spec = self.plan.station.dmm_accuracy.spec_for(function.value, range_)
        except ValueError:
            return math.nan
        return float(spec.standard_uncertainty(value, range_))

    def power(self, request: SupplyRequest | None) -> None:
        if request == self._supply_state:
            return
        supply = self.bench.supply
        if request is None:
            supply.set_output(False)
        else:
            supply.set_output(False)
            supply.set_voltage(request.volts)
            supply.set_current_limit(request.limit_a)
            supply.set_output(True)
        self._supply_state = request

    def supply_current(self, *, role: str) -> Reading:
        value = self.bench.supply.measure_current()
        spec = self.plan.station.supply_accuracy.get("current")
        u = math.nan
        range_: float | None = None
        if spec is not None and math.isfinite(value):
            range_, accuracy = spec
            u = float(accuracy.standard_uncertainty(value, range_))
        taken_at = time.time()
        self.store.add_reading(
            self._run_id,
            self._step_id,
            role=role,
            function="supply-current",
            value=value,
            range_=range_,
            nplc=None,
            u_std=u,
            taken_at=taken_at,
            settled=True,
        )
        self._step_readings += 1
        self.listener(ReadingTaken(self._step_id, role, value, "A", True))
        return Reading(role, "supply-current", value, range_, 0.0, taken_at, u)

    def earlier(self, step_id: str) -> StepResult:
        if step_id not in self._results:
            raise RigError(f"step {step_id!r} has no result in this run")
        return self._results[step_id]

    def prompt(self, text: str) -> bool:
        self.listener(PromptShown(self._step_id, text))
        return self.ask(text)

    def lead_zero(self, hi: str, lo: str) -> float:
        zeros = self.plan.station.lead_zero_ohm
        return zeros.get(f"{hi}:{lo}", zeros.get(f"{lo}:{hi}", 0.0))

    def wait(self, seconds: float) -> None:
        end = time.monotonic() + seconds
        while time.monotonic() < end:
            if self.stop.is_set():
                raise StopRequested("stopped by the operator")
            time.sleep(min(0.05, max(0.0, end - time.monotonic())))


def _now() -> str:
    return dt.datetime.now(dt.UTC).isoformat(timespec="milliseconds")
