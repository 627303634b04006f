"""The engine: runs a plan on a bench, step by step, judging and keeping every reading.

It emits events (``rig.events``) and never prints.  Whatever way a run ends — normal end, failed
step, instrument fault, operator stop, Ctrl-C or SIGTERM turned into ``KeyboardInterrupt`` by the
CLI — the bench is brought to the safe state (every relay open, supply output off) and that is
verified by read-back; the run is recorded as complete or aborted with its reason.
"""

from __future__ import annotations

import contextlib
import logging
import math
import threading
import time
from collections import deque
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any, cast

from drivers.base import Dmm, InstrumentIdentity, MeterFunction, RelayBox, Supply
from rig.bench_identity import ask_identity
from rig.commit_ahead import CommitAhead, Pending, RowTicket
from rig.config.fixture import Bus, FixtureMap
from rig.config.station import FUNCTIONS
from rig.deadline import wait_until
from rig.end_cause import EndCause
from rig.entry_text import kept_entry_text
from rig.errors import (
    InstrumentError,
    InstrumentReportedError,
    InterlockError,
    RigError,
    SettingMismatch,
)
from rig.events import (
    AHEAD_UNUSED,
    SETTLE_PROOF,
    Event,
    PromptShown,
    ReadingTaken,
    RunFinished,
    RunStarted,
    StepFinished,
    StepResult,
    StepStarted,
)
from rig.instrument_faults import SupplyWentOff, is_transient, plain_reason
from rig.judge.accuracy import AccuracySpec
from rig.judge.decision import (
    COVERAGE_K,
    Verdict,
    tur_is_low,
    worst,
)
from rig.judge.reference_probe import ReferenceProbe
from rig.plan import Plan, PlannedStep
from rig.read_ahead import steps_ahead
from rig.reading_guard import guard_verdict, reading_problems
from rig.resume import INCOMPLETE_REASON, abandoned_notes, continuation
from rig.routing import Route, plan_relays
from rig.run_admission import refuse_unfiled
from rig.step_judging import (
    autorange_estimate,
    failed_input,
    judge_outcome,
    lead_zero_ohm,
    meter_accuracy,
    meter_ranges,
    no_uncertainty_note,
    reading_u,
    supply_current_u,
)
from rig.steps import KINDS, Outcome, Reading, StepSpec, SupplyRequest
from rig.store import ResultStore, RunHeader, StoreError, utc_now

log = logging.getLogger(__name__)


@dataclass
class Bench:
    """The instruments of a station, opened."""

    dmm: Dmm
    supply: Supply
    relays: RelayBox
    identities: dict[str, InstrumentIdentity] = field(default_factory=dict)
    """Who answered at each role's address when the bench was opened (``open_bench`` asks and
    checks them): the identities every run on this bench records."""

    def all(self) -> list[Dmm | Supply | RelayBox]:
        return [self.dmm, self.supply, self.relays]


@dataclass(frozen=True)
class _AheadReading:
    """A reading taken for a later step (stored at once as that step's settled reading), and the
    meter setup it was taken in."""

    step_id: str
    state: tuple[object, ...]
    reading: Reading
    row: RowTicket


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
    warnings: list[str] = field(default_factory=list)
    """The notes a technician must act on, in the order noted (each is in ``notes`` too):
    calibration past due, relays near their rated life, a bench not made safe, a transient fault
    or a relay-box command that needed a retry, a run left unfinished by a stopped controller."""
    cut_short: str | None = None
    """The planned step the run ended during, with no result (an aborted run), if any."""
    not_run: list[str] = field(default_factory=list)
    """Planned steps the run ended before beginning, in plan order; nothing is stored for them."""
    claim: str = ""
    """The claim or return number given at the start, as kept (``rig.entry_text``)."""
    remark: str = ""
    """The remark given at the start, as kept."""
    end_cause: EndCause = EndCause.NONE
    """Why the run ended short of its end, as stored with it; NONE where it went to its end."""

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


class RunInterrupted(KeyboardInterrupt):
    """Ctrl-C or SIGTERM ended a run, which is recorded (aborted) and left safe: raised on once
    it is, with the run's ``summary``, so that a caller can still say how it ended."""

    def __init__(self, summary: RunSummary) -> None:
        super().__init__(f"run {summary.run_id} interrupted")
        self.summary = summary


class StopRequested(RigError):
    """The operator asked to stop the run, or a question to the operator got no answer
    (``cause`` says which, for the run's record)."""

    def __init__(self, message: str, cause: EndCause = EndCause.OPERATOR_STOP) -> None:
        super().__init__(message)
        self.cause = cause


def supply_bus_relays(fixture: FixtureMap) -> frozenset[int]:
    """The relays that join a fixture pin to the supply's + or - bus."""
    buses = (Bus.SUPPLY_POS, Bus.SUPPLY_NEG)
    return frozenset(
        r for pin in fixture.pins.values() for b, r in pin.relays.items() if b in buses
    )


def make_safe(bench: Bench, *, run_ending: bool = False) -> list[str]:
    """Open every relay and switch the supply off, each verified by read-back; returns what could
    not be made safe, in words (empty when the bench is safe).

    Before or during a run the supply's error queue is emptied as well, so that a stale trip is
    not blamed on a later step.  At a run's end (``run_ending``) it is read only if the output
    still reads on, with the switch-off sent again: a round trip less a run, and the next run's
    safe start empties the queue.  The supply is proven off before the relays are told to open,
    so they never break a current it still drives; where the engine sent an opening ahead (the
    supply was off already), the box's answer to it is the proof and ``open_all`` sends nothing
    more."""
    failures: list[str] = []
    supply, relays = bench.supply, bench.relays
    # The read-back decides: a command that reports an error (a stale trip in the supply's queue,
    # a lost acknowledgement) may still have been carried out.
    if run_ending:
        refused = _attempt(supply.send_output_off)
    else:
        refused = _attempt(lambda: supply.set_output(False))
    try:
        on = supply.output_is_on()
        if on and run_ending:
            refused = _attempt(lambda: supply.set_output(False))  # again, with its error check
            on = supply.output_is_on()
        if on:
            failures.append(f"supply {supply.name}: output still reads on {refused}".strip())
    except (RigError, OSError) as exc:
        failures.append(f"supply {supply.name}: {refused or exc}")
    refused = _attempt(relays.open_all)
    if not refused:
        return failures  # open_all compared the state the box reported after opening
    try:
        still = relays.closed_relays()
        if still:
            failures.append(
                f"relay box {relays.name}: relays {sorted(still)} still closed {refused}".strip()
            )
    except (RigError, OSError) as exc:
        failures.append(f"relay box {relays.name}: {refused or exc}")
    return failures


def _attempt(action: Callable[[], None]) -> str:
    """Run ``action``; its error in words, in parentheses (empty when it worked)."""
    try:
        action()
    except InstrumentError as exc:
        return f"({plain_reason(exc)})"
    except (RigError, OSError) as exc:
        return f"({exc})"
    return ""


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
        self._writes = CommitAhead(store, listener or (lambda event: None))
        # the store's writes commit while the next relays move; every other call waits its turn
        self.store = cast(ResultStore, self._writes)
        self.listener: Callable[[Event], None] = self._writes.emit
        self.ask = ask or (lambda text: True)
        self.stop = stop or threading.Event()
        self.settle = settle or SettlePolicy()
        self._closed: frozenset[int] = frozenset()
        self._relays_moving: frozenset[int] | None = None
        """A change sent to the relay box whose answer is still to be read (``_move_ahead``)."""
        self._supply_state: SupplyRequest | None = None
        self._output_due: SupplyRequest | None = None
        """A supply ``power`` asked for whose output is still off: it comes on once its relays
        have closed (``_switch_on``)."""
        self._supply_relays = supply_bus_relays(plan.station.fixture)
        """The fixture's relays to the supply's buses: found once, checked at every change."""
        self._model_params = {
            p.spec.id: KINDS[p.spec.kind].model_parameters(p.spec) for p in plan.steps
        }
        """Each step's model parameters as text for its record: fixed by the plan, so written
        once here, not between a run's readings."""
        self._moves = 0
        """Relay and supply changes so far; a settled reading is valid until the next one."""
        self._settled_state: tuple[object, ...] | None = None
        self._results: dict[str, StepResult] = {}
        self._run_id = 0
        self._step_id = ""
        self._step_settle = 0.0
        self._step_readings = 0
        self._relays_changed_at = 0.0
        self._moved_at = 0.0
        """``time.monotonic()`` of the last relay, supply or meter-setup change: a stated settle
        runs from it."""
        self._meter_setup: tuple[object, ...] | None = None
        self._step_settle_s: float | None = None
        self._position = 0
        self._run_notes: list[str] = []
        """The running run's notes (for what a step finds that concerns the whole run)."""
        self._warnings: list[str] = []
        """Those of the running run's notes a technician must act on (``RunSummary.warnings``)."""
        self._done_ids: frozenset[str] = frozenset()
        self._ahead: deque[_AheadReading] = deque()
        """Readings already taken for the next steps (``rig.read_ahead``), with the state they
        were taken in: served while nothing moves, stored unsettled if never used."""
        self._step_finals: list[Reading] = []
        self._step_problems: list[str] = []
        self._step_notes: list[str] = []
        """What the running step's record must say about how it was measured (a settle that
        was never proved), beside what its kind notes."""
        self._step_routes: list[frozenset[int]] | None = None
        """The relay sets the running step measures on, in order, where its kind says so
        (``StepKind.routes_in_order``); None where not known."""
        self._routes_done = 0
        self._move_when_read: frozenset[int] | None = None
        """The relay change to send once the reading being taken is in (``_reading_in``)."""
        self._ends_run = ""
        """Why the run ends after the step just run (``Outcome.ends_run``); empty: it goes on."""

    # --- the run ------------------------------------------------------------------------------

    def run(
        self,
        serial: str,
        operator: str = "",
        *,
        unit: str = "",
        faults: tuple[str, ...] = (),
        notes: list[str] | None = None,
        warnings: list[str] | None = None,
        resume: int | None = None,
        study_part: str = "",
        study_trial: int | None = None,
        claim: str = "",
        remark: str = "",
    ) -> RunSummary:
        """Run the plan, or with ``resume`` continue that incomplete run from its next step.
        ``notes`` and ``warnings``: what the caller found before (calibration allowed past due
        is a warning), kept with the run's own.  ``claim`` and ``remark``: the claim or return
        number and the inspector's remark, kept with a new run (a continued run keeps its own)."""
        station = self.plan.station
        # the commands ask first; this holds for every other caller
        refuse_unfiled(
            station, serial, operator, continuing=resume is not None, claim=claim, remark=remark
        )
        entered = {"serial": serial, "operator": operator, "claim": claim, "remark": remark}
        kept, byte_notes = kept_entry_text(entered)
        serial, operator, claim, remark = (kept[k] for k in entered)
        sequence = self.plan.sequence
        notes = [*(notes or []), *(warnings or []), *byte_notes]
        self._run_notes = notes
        self._warnings = list(warnings or [])
        counts_before = self._relay_counts()  # the safe start's own openings are this run's
        step_ids = tuple(p.spec.id for p in self.plan.steps)  # in run order
        # the store's writes at the start commit on its worker while the instruments are asked
        abandoned = self._writes.meanwhile("mark_incomplete", station.name, INCOMPLETE_REASON)
        try:
            identities = self._identities()
            # the run this continues was left by a stopped controller too: it is said below,
            # as continued, not as a run left unfinished
            left = [run for run in abandoned.result() if run != resume]
            self._warn(*abandoned_notes(left))
            done: dict[str, StepResult] = {}
            if resume is None:
                started = self._writes.meanwhile(
                    "start_run",
                    RunHeader(
                        serial=serial,
                        sequence_name=sequence.name,
                        sequence_hash=sequence.content_hash,
                        sequence_path=sequence.recorded_path(),
                        station=station.name,
                        operator=operator,
                        unit=unit,
                        faults=faults,
                        instruments=tuple(identities),
                        study_part=study_part,
                        study_trial=study_trial,
                        planned_steps=step_ids,
                        claim=claim,
                        remark=remark,
                    ),
                )
                wear = self._writes.meanwhile("relay_wear", station.name)
                start_problem = self._start_safe()  # while the run's row commits
                run_id = self._run_row(started, start_problem)
            else:
                cont = continuation(self.store, resume, self.plan)
                run_id, serial, done = cont.run_id, cont.serial, cont.done
                header = self.store.run(run_id)  # the claim and remark given at its start
                claim, remark = str(header["claim"]), str(header["remark"])
                self._done_ids = frozenset(done)
                self.store.reopen_run(run_id, step_ids)
                notes.append(
                    f"continued after an interruption; {len(done)} of {len(self.plan.steps)} steps "
                    "were already done"
                )
                # the run's header keeps who started it; whoever carries on is noted
                if operator.strip() and operator != cont.operator:
                    notes.append(f"continued by operator {operator}")
                wear = self._writes.meanwhile("relay_wear", station.name)
                start_problem = self._start_safe()
        except BaseException:
            # no run to record this in: the bench is left safe (the safe start may have armed
            # the watchdog and sent the first route ahead) and the first error is the one raised
            with contextlib.suppress(RigError, OSError):
                self._end_safe()
            with contextlib.suppress(RigError):
                self._writes.close()  # the worker ends before the caller may close the store
            raise
        self._run_id = run_id
        status, reason, cause = "complete", "", EndCause.NONE
        results: list[StepResult] = []
        begun: str | None = None  # the step under way, until its result is in
        interrupted: BaseException | None = None
        try:  # from here on, however the run ends, it ends safe and recorded
            self.listener(RunStarted(run_id, serial, sequence.name, step_ids))
            self._warn(*wear_warnings(wear.result(), station.fixture))
            if start_problem is not None:  # raised here: the run ends as any other, recorded
                raise start_problem
            for position, planned in enumerate(self.plan.steps, start=1):
                if self.stop.is_set():
                    raise StopRequested("stopped by the operator")
                if planned.spec.id in done:  # continuing: done before the interruption
                    result = done[planned.spec.id]
                    results.append(result)
                    self._results[result.step_id] = result
                    continue
                begun = planned.spec.id
                result = self._run_step(position, planned)
                results.append(result)
                self._results[result.step_id] = result
                begun = None
                if result.verdict is Verdict.ERROR:
                    status, reason = "aborted", f"step {result.step_id}: {result.note}"
                    cause = EndCause.STEP_ERROR
                    break
                if self._ends_run:  # the step's own word: nothing after it may run
                    status, reason = "aborted", f"step {result.step_id}: {self._ends_run}"
                    cause = EndCause.DECLINED
                    break
        except StopRequested as exc:
            status, reason, cause = "aborted", str(exc), exc.cause
        except InstrumentError as exc:
            status, reason = "aborted", f"instrument fault: {plain_reason(exc)}"
            cause = EndCause.INSTRUMENT
        except KeyboardInterrupt as exc:
            status, reason = "aborted", "interrupted (Ctrl-C or SIGTERM)"
            cause, interrupted = EndCause.OPERATOR_STOP, exc
        except RigError as exc:  # named by the step under way, where there is one
            status, reason = "aborted", f"step {begun}: {exc}" if begun else str(exc)
            cause = _cause_of(exc, begun)
        finally:
            failures = self._end_safe()  # first: the last rows commit while the bench goes safe
            self._drop_ahead()
            try:
                self._writes.flush()
            except RigError as exc:
                if status == "complete":
                    status, reason, cause = "aborted", str(exc), _cause_of(exc, None)
            operations = self._operations_since(counts_before)
        safe = not failures
        if failures:
            self._warn("could not make safe: " + "; ".join(failures))
            if status == "complete":  # every step done, but the bench needs a person first
                status, cause = "aborted", EndCause.INSTRUMENT
                reason = "the bench could not be made safe at the end: " + "; ".join(failures)
        verdict = worst(r.verdict for r in results)
        if status == "aborted":
            verdict = Verdict.ERROR
        judged = {r.step_id for r in results}
        not_run = [
            p.spec.id for p in self.plan.steps if p.spec.id not in judged and p.spec.id != begun
        ]
        summary = RunSummary(
            run_id,
            serial,
            sequence.name,
            status,
            verdict,
            reason,
            results,
            safe,
            notes,
            list(self._warnings),
            cut_short=begun,
            not_run=not_run,
            claim=claim,
            remark=remark,
            end_cause=cause,
        )
        self.store.finish_run(
            run_id,
            status=status,
            verdict=verdict.value,
            reason=reason,
            notes=notes,
            relay_operations=operations,
            cut_short=begun,
            end_cause=cause.value,
        )
        self.listener(
            RunFinished(
                run_id, status, verdict, reason, tuple(summary.failed_steps), safe, tuple(notes)
            )
        )
        self._writes.close()  # every write committed, every event delivered, the worker gone
        if interrupted is not None:
            raise RunInterrupted(summary) from interrupted
        return summary

    def _identities(self) -> list[dict[str, str]]:
        """The run's record of its instruments: who answered when the bench was opened (a bench
        put together without ``open_bench`` is asked here, and refused as there)."""
        found = []
        for role, inst in (
            ("dmm", self.bench.dmm),
            ("supply", self.bench.supply),
            ("relay_box", self.bench.relays),
        ):
            config = self.plan.station.instruments[role]
            known = self.bench.identities.get(role)
            ident = known if known is not None else ask_identity(role, inst)
            due = config.calibration_due.isoformat() if config.calibration_due else ""
            found.append(
                {
                    "role": role,
                    "identity": str(ident),
                    "resource": config.resource,
                    "calibration_due": due,
                }
            )
        probe = self.plan.station.reference_probe
        if probe is not None:  # the standard a reference temperature rests on
            found.append(probe.record())
        return found

    def _relay_counts(self) -> dict[int, int]:
        try:
            return dict(self.bench.relays.operation_counts())
        except (RigError, OSError):
            return {}

    def _operations_since(self, before: dict[int, int]) -> dict[int, int]:
        """The relay operations of this run, by relay (recorded with the run's end)."""
        after = self._relay_counts()
        return {r: n - before.get(r, 0) for r, n in after.items() if n > before.get(r, 0)}

    def _start_safe(self) -> BaseException | None:
        """Bring the bench to a known state (all open, supply off, read back) before any step,
        arm the relay box's watchdog, and send the first step's route ahead.

        Returns what to raise once the run exists (its row is still committing): an
        ``InstrumentError`` naming what could not be made safe or armed, or an interrupt (Ctrl-C)
        that came meanwhile; None when the bench is safe and guarded.  The run then ends as any
        aborted or interrupted run does (made safe, recorded)."""
        try:
            self._empty_meter_errors()
            failures = make_safe(self.bench)
            if not failures:
                self.bench.relays.start_watchdog(self.plan.station.watchdog_s)
        except BaseException as exc:
            return exc
        finally:
            self._closed = frozenset()
            self._relays_moving = None
            self._supply_state = None
            self._output_due = None
        if failures:
            return InstrumentError(
                "the bench could not be brought to the safe state: " + "; ".join(failures)
            )
        self._move_ahead(self._opening_relays(0))  # while the run's row commits
        return None

    def _empty_meter_errors(self) -> None:
        """Empty the DMM's error queue before the first step, as ``make_safe`` does the
        supply's: what front-panel use or another program left there would be blamed on this
        run's first command.  What it held is a note of the run, no step's fault."""
        try:
            self.bench.dmm.check_errors()
        except InstrumentReportedError as exc:
            found = exc.message.removeprefix("instrument reported ")
            self._run_notes.append(
                f"the DMM's error queue held {found} before this run (left by front-panel use "
                "or another program); emptied at the start, no step is charged with it"
            )

    @staticmethod
    def _run_row(started: Pending, start_problem: BaseException | None) -> int:
        """The new run's id once its row has committed; a failed commit says, besides, whether
        the bench could not be made safe (no run then exists to say it)."""
        try:
            return int(started.result())
        except StoreError as exc:
            if isinstance(start_problem, InstrumentError):
                raise StoreError(f"{exc}; besides, {start_problem}") from exc
            raise

    def _end_safe(self) -> list[str]:
        """The safe state at a run's end; the watchdog is switched off only once it holds.  On a
        bench that could not be made safe it stays armed: when the bench is closed and its
        heartbeat stops, the box opens every relay by itself."""
        failures = make_safe(self.bench, run_ending=True)
        try:
            if not failures:
                self.bench.relays.stop_watchdog()
        except (RigError, OSError) as exc:
            log.warning("could not stop the relay watchdog: %s", exc)
        self._closed = frozenset()
        self._relays_moving = None
        self._supply_state = None
        self._output_due = None
        return failures

    # --- one step -----------------------------------------------------------------------------

    def _warn(self, *texts: str) -> None:
        """Note what a technician must act on: kept with the run's notes, and listed apart."""
        self._run_notes.extend(texts)
        self._warnings.extend(texts)

    def _run_step(self, position: int, planned: PlannedStep) -> StepResult:
        spec = replace(planned.spec, range_=planned.range_)
        self.listener(StepStarted(position, spec.id, spec.title, spec.kind))
        self._step_id = spec.id
        self._step_settle = 0.0
        self._step_settle_s = spec.settle_s
        self._position = position
        self._step_readings = 0
        self._ends_run = ""
        self._step_routes = planned.relay_sets if KINDS[spec.kind].routes_in_order else None
        started = utc_now()
        kind = KINDS[spec.kind]
        unjudged = failed_input(spec, self._results)
        if unjudged:  # an input step failed: nothing to judge this one against
            outcome = Outcome(math.nan, kind.unit, math.nan, None, note=unjudged)
            judged = self._judged(position, spec, outcome, error=True)
            result = replace(judged, verdict=Verdict.SKIPPED)
            self._store_step(result, started, spec)
            self.listener(StepFinished(result))
            return result
        retried = ""
        relay_retries = getattr(self.bench.relays, "retries", 0)
        while True:
            self._step_finals, self._step_problems, self._step_notes = [], [], []
            self._routes_done = 0
            try:
                outcome = kind.run(self, spec)
                self._check_supply_still_on(spec)
                break
            except InterlockError as exc:
                error = str(exc)
            except InstrumentError as exc:
                error = plain_reason(exc)
                if not retried and self._may_retry(exc):
                    retried = error
                    log.warning("step %s: retrying once after: %s", spec.id, error)
                    continue
            note = error if not retried else f"{error}; a retry did not cure it"
            outcome = Outcome(math.nan, kind.unit, math.nan, spec.limits, note=note)
            result = self._judged(position, spec, outcome, error=True)
            self._store_step(result, started, spec)
            self.listener(StepFinished(result))
            return result
        outcome.settle_s = self._step_settle
        self._ends_run = outcome.ends_run
        box_retries = getattr(self.bench.relays, "retries", 0) - relay_retries
        for text in (
            f"transient fault cured by one retry of the step: {retried}" if retried else "",
            f"the relay box needed a second try for {box_retries} command(s) (corrupted or "
            "missing reply)"
            if box_retries
            else "",
        ):
            if text:
                outcome.note = f"{outcome.note}; {text}" if outcome.note else text
                self._warn(f"step {spec.id}: {text}")
        result = self._judged(position, spec, outcome, error=False)
        self._store_step(result, started, spec)
        self.listener(StepFinished(result))
        return result

    def _may_retry(self, exc: InstrumentError) -> bool:
        """Whether to try the step once more: only for a transient fault, and only from a bench
        proven safe again with a freshly reset meter (its settings may be lost or unknown)."""
        if not is_transient(exc, supply_name=self.bench.supply.name):
            return False
        if make_safe(self.bench):
            return False
        self._moves += 1  # relays opened and the meter reset: nothing read before is settled
        self._meter_setup = None
        self._closed = frozenset()
        self._relays_moving = None
        self._supply_state = None
        self._output_due = None
        try:
            self.bench.dmm.reset()
        except (RigError, OSError) as again:
            log.warning("meter reset before the retry failed: %s", again)
            return False
        return True

    def _check_supply_still_on(self, spec: StepSpec) -> None:
        """A powered step whose supply went off (a trip) measured an unpowered unit."""
        if self.stop.is_set():  # the operator's stop switched it off (the console does at once)
            raise StopRequested("stopped by the operator")
        supply = self.bench.supply
        switched_on = self._supply_state is not None and self._output_due is None
        if switched_on and not supply.output_is_on():
            raise SupplyWentOff(
                f"output reads off at the end of step {spec.id}",
                instrument=supply.name,
                resource=str(getattr(supply, "resource", "")),
                command="output query",
            )

    def _judged(
        self, position: int, spec: StepSpec, outcome: Outcome, *, error: bool
    ) -> StepResult:
        verdict, expanded, tur = judge_outcome(spec, outcome, error=error)
        if not error:
            finals = [] if KINDS[spec.kind].overload_is_a_result else self._step_finals
            verdict = guard_verdict(verdict, finals, self._step_problems)
            unknown_u = no_uncertainty_note(spec, outcome, self._results, self.plan.station)
            notes = [outcome.note, *self._step_problems, *self._step_notes, unknown_u]
            outcome.note = "; ".join(note for note in notes if note)
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

    def _store_step(self, result: StepResult, started: str, spec: StepSpec) -> None:
        """File the step's result with what it was judged against: its model's parameters as
        text with units (a reviewer of the record must see them; ``model_parameters``)."""
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
                "ended_at": utc_now(),
                "settle_s": result.settle_s,
                "note": result.note,
                "extras": result.extras,
                "model_params": self._model_params[spec.id],
            },
        )

    # --- StepContext: what steps ask of the bench ---------------------------------------------

    def connect(self, route: Route) -> None:
        self._connect(route, None)

    def measure_on(
        self,
        route: Route,
        function: MeterFunction,
        *,
        role: str,
        range_: float | None,
        nplc: float,
    ) -> Reading:
        self._connect(route, (function, range_, nplc))
        self._routes_done += 1
        known = self._step_routes is not None
        return self._measure(function, role=role, range_=range_, nplc=nplc, move_on=known)

    def _connect(
        self, route: Route, setup: tuple[MeterFunction, float | None, float] | None
    ) -> None:
        """Close the route's relays, then switch on a supply ``power`` asked for (its relays are
        closed now: it never switches live)."""
        self._close(route, setup)
        if self._output_due is not None:
            self._switch_on()

    def _close(self, route: Route, setup: tuple[MeterFunction, float | None, float] | None) -> None:
        """Close the route's relays; with the ``setup`` of the reading to come, set the meter up
        while they move (its change then needs no settle of its own: the relays', later, starts
        it)."""
        relays = plan_relays(self.plan.station.fixture, route)
        if self._relays_moving is not None and self._relays_moving != relays:
            self._relays_landed()  # another change is on its way: it ends first
        if self._relays_moving is None:
            if relays == self._closed:
                return
            self._output_off_for(relays)
            self._moves += 1  # before the change: a failed change must not leave a settled state
            self.bench.relays.send_change(relays)
            self._relays_moving = relays
        # the contacts are moving: the meter is set up and the last step's rows commit meanwhile
        ahead = setup if setup is not None and setup != self._meter_setup else None
        if ahead is not None:
            self._meter_setup = None  # unknown until the meter has taken it
            try:
                self.bench.dmm.send_configuration(*ahead)
            except Exception:
                self._relays_landed()  # a failed change is the more urgent news: raised first
                raise
            set_up_at = time.monotonic()
        self._relays_landed()
        if ahead is not None:
            self.bench.dmm.confirm_configuration()
            self._meter_setup = ahead
            # the settle runs from the later of the two: the contacts may have landed (a change
            # sent ahead) before the meter took a setup that drives the circuit anew
            self._moved_at = max(self._moved_at, set_up_at)
        self._writes.flush()
        if self.stop.is_set():  # a listener may have asked on an event held until now
            raise StopRequested("stopped by the operator")

    def _relays_landed(self) -> None:
        """Wait for the change on its way and verify it; the settle runs from now."""
        relays, self._relays_moving = self._relays_moving, None
        if relays is None:
            return
        self.bench.relays.finish_change()
        self._closed = relays
        self._relays_changed_at = time.time()
        self._moved_at = time.monotonic()

    def _move_ahead(self, relays: frozenset[int] | None) -> None:
        """Send the relay change the bench needs next as soon as that is known (the reading
        before it is in, the safe start done), so that the contacts move while the engine
        computes, judges and files; the next connect then only waits for them.  Not once a stop
        has been asked for.  A change that cannot be sent now is left to the connect, which then
        meets its error itself."""
        if relays is None or relays in (self._closed, self._relays_moving) or self.stop.is_set():
            return
        self._moves += 1
        try:
            self.bench.relays.send_change(relays)
        except (RigError, OSError) as exc:
            log.debug("next route not sent ahead: %s", exc)
            return
        self._relays_moving = relays

    def _reading_in(self) -> None:
        """The step's reading is in (not yet stored): send the relay change that comes next,
        where ``_measure`` found it known."""
        relays, self._move_when_read = self._move_when_read, None
        self._move_ahead(relays)

    def _next_relays(self) -> frozenset[int] | None:
        """The relays the running step needs after its reading just taken, where that is known
        (its kind runs its routes in order, ``StepKind.routes_in_order``): its next route, or
        after its last what comes after it (``_opening_relays``)."""
        routes = self._step_routes
        if routes is None:
            return None
        if self._routes_done < len(routes):
            return routes[self._routes_done]
        return self._opening_relays(self._position)

    def _opening_relays(self, position: int) -> frozenset[int] | None:
        """The relays the step after ``position`` (1-based; 0 for the first) begins on, where it
        begins by closing its first route with the supply off; at the plan's end every relay
        open (what the run's end does next).  None where unknown, and None while the supply is
        on: a step's supply is checked once its last reading is in, and a trip that the next
        route caused must not be blamed on it."""
        if self._supply_state is not None:
            return None
        upcoming = self._next_planned(position)
        if upcoming is None:
            return frozenset()
        if not (KINDS[upcoming.spec.kind].routes_in_order and upcoming.relay_sets):
            return None
        return upcoming.relay_sets[0] if upcoming.spec.supply is None else None

    def _next_planned(self, position: int) -> PlannedStep | None:
        """The step that runs after the one at ``position`` (1-based), skipping steps a
        continued run has done already."""
        for planned in self.plan.steps[position:]:
            if planned.spec.id not in self._done_ids:
                return planned
        return None

    def measure(
        self, function: MeterFunction, *, role: str, range_: float | None, nplc: float
    ) -> Reading:
        return self._measure(function, role=role, range_=range_, nplc=nplc, move_on=False)

    def _measure(
        self,
        function: MeterFunction,
        *,
        role: str,
        range_: float | None,
        nplc: float,
        move_on: bool,
    ) -> Reading:
        """A settled reading; with ``move_on`` (the step runs its routes in order), the next
        route is sent as soon as the reading is in."""
        started = time.monotonic()
        self._move_when_read = self._next_relays() if move_on else None
        try:
            reading = self._reading_taken_ahead(function, role, range_, nplc)
            if reading is None:
                if self._configure(function, range_, nplc):
                    self._moved_at = time.monotonic()
                started = time.monotonic()
                reading = self._settled_reading(function, role, range_, nplc)
            else:
                self._reading_in()  # taken ahead: in since before this step began
            self._step_settle += time.monotonic() - started
        finally:
            self._move_when_read = None
        self._step_finals.append(reading)
        self._step_problems.extend(
            reading_problems(
                reading,
                function=function.value,
                range_=range_,
                relays_changed_at=self._relays_changed_at,
            )
        )
        self.listener(
            ReadingTaken(self._step_id, role, reading.value, FUNCTIONS[function.value], True)
        )
        return reading

    def _configure(self, function: MeterFunction, range_: float | None, nplc: float) -> bool:
        """Set the meter up; True when that changed its setup, for another function or range
        drives the circuit anew (an ohms test current charges its capacitors)."""
        setup = (function, range_, nplc)
        changed = setup != self._meter_setup
        self._meter_setup = None  # unknown until the meter has taken it (the driver skips a repeat)
        self.bench.dmm.configure(function, range_, nplc)
        self._meter_setup = setup
        return changed

    def _settled_reading(
        self, function: MeterFunction, role: str, range_: float | None, nplc: float
    ) -> Reading:
        """Read until two successive readings agree, the first two from one query (sample count
        2, one round trip).  When nothing moved since the last settled reading with the same
        meter setup (relays, supply, function, range, NPLC), the input cannot be settling: one
        reading, no proof.  When the step states its settle time, wait out what is left of it
        since the last change and read once: the circuit's time constant replaces the proof."""
        dmm = self.bench.dmm
        state = (self._moves, function, range_, nplc)
        if self._step_settle_s is not None and state != self._settled_state:
            self._sleep_until(self._moved_at + self._step_settle_s)
            reading = self._read_with_ahead(state, function, role, range_, nplc)
            self._settled_state = state if math.isfinite(reading.value) else None
            return reading
        proof = self.settle.enabled and self.settle.max_readings > 1
        proof = proof and state != self._settled_state
        if not proof and state == self._settled_state:  # settled already: read once
            return self._read_with_ahead(state, function, role, range_, nplc)
        values = dmm.read_many(2) if proof else [dmm.read()]
        agreed = not proof or self._agree_values(function, values, range_)
        done = agreed or not math.isfinite(values[-1]) or len(values) >= self.settle.max_readings
        taken_at = time.time()
        if done:
            self._reading_in()
        readings = [
            self._record(
                function, role, v, range_, nplc, settled=done and i == len(values) - 1, at=taken_at
            )
            for i, v in enumerate(values)
        ]
        shown = self._show_proof(readings, 0)
        while not done:
            readings.append(self._record(function, role, dmm.read(), range_, nplc))
            shown = self._show_proof(readings, shown)
            agreed = self._agree(readings)
            last = readings[-1].value
            done = agreed or len(readings) >= self.settle.max_readings or not math.isfinite(last)
            if done:
                self._reading_in()  # after its row: agreeing needs the reading's uncertainty
                self._writes.mark_last_settled()
        if proof and agreed:
            self._settled_state = state
        elif proof and math.isfinite(readings[-1].value):  # read to the end without agreeing
            self._step_notes.append(self._unproved_settle(readings[-1]))
        return readings[-1]

    def _show_proof(self, readings: list[Reading], shown: int) -> int:
        """Announce the readings from ``shown`` on that a later one followed: they only prove
        settling (the last is the step's, announced by ``_measure`` once judged usable).
        Returns how many are announced now."""
        for reading in readings[shown:-1]:
            unit = FUNCTIONS[reading.function]
            self.listener(
                ReadingTaken(self._step_id, reading.role, reading.value, unit, False, SETTLE_PROOF)
            )
        return max(shown, len(readings) - 1)

    def _unproved_settle(self, last: Reading) -> str:
        """The note of a reading whose settling the proof could not show: the step's value
        rests on a reading that may still have been moving."""
        why = "" if math.isfinite(last.u_std) else " (it has none to agree by)"
        return (
            f"settling not proved: {self.settle.max_readings} {last.function} readings "
            f"({last.role}), no two in a row within {self.settle.agree_fraction:g} x the "
            f"reading's standard uncertainty{why}, the last one used"
        )

    def _sleep_until(self, deadline: float) -> None:
        """Wait for ``time.monotonic()`` to reach ``deadline`` (not later: a stated settle is
        part of the physical limit), answering a stop within 50 ms."""
        wait_until(deadline, check=self._check_stop)

    def _check_stop(self) -> None:
        if self.stop.is_set():
            raise StopRequested("stopped by the operator")

    def _read_with_ahead(
        self,
        state: tuple[object, ...],
        function: MeterFunction,
        role: str,
        range_: float | None,
        nplc: float,
    ) -> Reading:
        """One settled reading for this step, and in the same query one for each next step
        that will take the same reading with nothing moving in between (``rig.read_ahead``);
        all stored at once, this step's first."""
        ids = steps_ahead(
            self.plan.steps,
            self._position - 1,
            relays=self._closed,
            supply=self._supply_state,
            function=function,
            range_=range_,
            nplc=nplc,
            line_hz=self.plan.station.line_hz,
            settle_s=self._step_settle_s,
            skip=self._done_ids,
        )
        if not ids:
            value, taken_at = self.bench.dmm.read(), time.time()
            self._reading_in()
            return self._record(function, role, value, range_, nplc, settled=True, at=taken_at)
        values, taken_at = self.bench.dmm.read_many(1 + len(ids)), time.time()
        self._reading_in()
        own = self._record(function, role, values[0], range_, nplc, settled=True, at=taken_at)
        for step_id, value in zip(ids, values[1:], strict=True):
            # kept the moment it is taken (a crash loses nothing), as the settled reading of
            # the step it is for; the flag is taken back if that step never uses it
            their_spec = self.plan.sequence.step(step_id)
            their_role = KINDS[their_spec.kind].one_reading(their_spec) or "ahead"
            reading = self._reading(function, their_role, value, range_, nplc, taken_at)
            row = self._writes.add_reading_for_later(
                self._run_id, step_id, **_row_fields(reading, settled=True)
            )
            self._ahead.append(_AheadReading(step_id, state, reading, row))
        return own

    def _reading_taken_ahead(
        self, function: MeterFunction, role: str, range_: float | None, nplc: float
    ) -> Reading | None:
        """This step's reading if it was taken ahead in the state the bench is still in."""
        if not self._ahead:
            return None
        ahead = self._ahead[0]
        if ahead.step_id != self._step_id or ahead.state != (self._moves, function, range_, nplc):
            self._drop_ahead()
            return None
        self._ahead.popleft()
        self._step_readings += 1
        return ahead.reading

    def _drop_ahead(self) -> None:
        """Readings taken ahead that no step used (a step failed or was stopped before its
        turn): already stored under the step they were taken for, now flagged unsettled, and
        named in the notes."""
        if not self._ahead:
            return
        unused, self._ahead = list(self._ahead), deque()
        self._writes.mark_unsettled_later([a.row for a in unused])
        for a in unused:
            unit = FUNCTIONS[a.reading.function]
            value = a.reading.value
            self.listener(ReadingTaken(a.step_id, a.reading.role, value, unit, False, AHEAD_UNUSED))
        steps = ", ".join(a.step_id for a in unused)
        note = f"{len(unused)} reading(s) taken ahead were not used (for {steps}); kept"
        self._run_notes.append(note)

    def _agree_values(
        self, function: MeterFunction, values: list[float], range_: float | None
    ) -> bool:
        """Whether the first pair agrees, judged before either is stored (so the settled flag
        goes in with the row, not as a second write)."""
        used = range_ if range_ is not None else self._autorange(function, values[-1])
        return self._within(values[-2], values[-1], self._u_reading(function, values[-1], used))

    def _agree(self, readings: list[Reading]) -> bool:
        """The last two readings agree within a fraction of the meter's uncertainty."""
        if len(readings) < 2:
            return False
        return self._within(readings[-2].value, readings[-1].value, readings[-1].u_std)

    def _within(self, previous: float, last: float, u_std: float) -> bool:
        return abs(last - previous) <= self.settle.agree_fraction * max(u_std, 1e-12)

    def _record(
        self,
        function: MeterFunction,
        role: str,
        value: float,
        range_: float | None,
        nplc: float,
        *,
        settled: bool = False,
        at: float | None = None,
    ) -> Reading:
        """Store one raw reading at once, with the range it was taken on and its uncertainty;
        ``at``: when it came in (``time.time()``; now where not given)."""
        reading = self._reading(function, role, value, range_, nplc, at or time.time())
        self.store.add_reading(self._run_id, self._step_id, **_row_fields(reading, settled))
        self._step_readings += 1
        return reading

    def _reading(
        self,
        function: MeterFunction,
        role: str,
        value: float,
        range_: float | None,
        nplc: float,
        taken_at: float,
    ) -> Reading:
        """A raw reading with the range it was taken on (autorange: estimated) and its
        uncertainty."""
        used = range_ if range_ is not None else self._autorange(function, value)
        u = self._u_reading(function, value, used)
        return Reading(role, function.value, value, used, nplc, taken_at, u)

    def _autorange(self, function: MeterFunction, value: float) -> float | None:
        return autorange_estimate(self.plan.station, function, value)

    def _u_reading(self, function: MeterFunction, value: float, range_: float | None) -> float:
        return reading_u(self.plan.station, function, value, range_)

    def power(self, request: SupplyRequest | None) -> None:
        """Switch the output off, and for a ``request`` switch it on once the relays that take
        it to the unit have closed: the supply's relays make and break with no current flowing
        (cold switching, common practice for relay contacts), and a contact never closes onto
        a live output.  Where those relays are closed already the output comes on now."""
        if request == self._supply_state:
            return
        self._moves += 1
        self.bench.supply.set_output(False)
        self._supply_state = request
        self._output_due = request
        self._moved_at = time.monotonic()
        if request is not None and self._relays_moving is None:
            fixture = self.plan.station.fixture
            if plan_relays(fixture, Route.supply(request.pos, request.neg)) <= self._closed:
                self._switch_on()

    def _output_off_for(self, relays: frozenset[int]) -> None:
        """Whatever a step asked in what order: a change that moves a relay of the supply's
        buses finds the output off, and ``_connect`` switches it on again once it has landed."""
        on = self._supply_state is not None and self._output_due is None
        if on and (relays ^ self._closed) & self._supply_relays:
            self.bench.supply.set_output(False)
            self._output_due = self._supply_state

    def _switch_on(self) -> None:
        """Program and switch on the supply as ``power`` asked, its relays now closed."""
        request, self._output_due = self._output_due, None
        if request is None:
            return
        supply = self.bench.supply
        supply.set_voltage(request.volts)
        supply.set_current_limit(request.limit_a)
        supply.set_output(True)
        self._moved_at = time.monotonic()

    def supply_current(self, *, role: str) -> Reading:
        value = self.bench.supply.measure_current()
        u, range_ = supply_current_u(self.plan.station, value)
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

    def prompt(self, text: str, *, stops_run: bool = False) -> bool:
        """Ask the operator.  A prompt is its step's last use of the bench, so once it is
        confirmed the next step's first route is sent at once: its contacts move while the
        engine files the answer.  A no sends nothing (with ``stops_run`` the run ends next)."""
        self._writes.flush()  # the operator sees every result before being asked
        self.listener(PromptShown(self._step_id, text, stops_run))
        try:
            confirmed = self.ask(text)
        except RigError:
            raise
        except Exception as exc:  # a front end that cannot ask (its terminal or window gone)
            raise StopRequested(
                f"the prompt {text!r} could not be put: {exc!r}", EndCause.NO_ANSWER
            ) from exc
        if confirmed:
            self._move_ahead(self._opening_relays(self._position))
        return confirmed

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

    def wait(self, seconds: float) -> None:
        self._writes.flush()
        end = time.monotonic() + seconds
        while time.monotonic() < end:
            if self.stop.is_set():
                raise StopRequested("stopped by the operator")
            time.sleep(min(0.05, max(0.0, end - time.monotonic())))


def _cause_of(exc: RigError, begun: str | None) -> EndCause:
    """The cause stored for a run ended by ``exc`` (no instrument fault, no stop), with
    ``begun`` the step under way (None: none was)."""
    if isinstance(exc, SettingMismatch):
        return EndCause.CONFIGURATION
    if isinstance(exc, StoreError):
        return EndCause.STORE
    return EndCause.STEP_ERROR if begun else EndCause.OTHER


def _row_fields(reading: Reading, settled: bool) -> dict[str, Any]:
    """A reading as the store's ``add_reading`` takes it."""
    return {
        "role": reading.role,
        "function": reading.function,
        "value": reading.value,
        "range_": reading.range_,
        "nplc": reading.nplc,
        "u_std": reading.u_std,
        "taken_at": reading.taken_at,
        "settled": settled,
    }
