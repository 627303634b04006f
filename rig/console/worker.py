"""Running the engine off the UI thread: an inbox of events, a blocking prompt, an instant stop.

The engine blocks on instruments for as long as a reading takes, so it runs in a worker thread.
Everything it reports goes into an ``Inbox`` that the UI empties in bounded batches on a timer;
the UI never waits for the engine and the engine never touches a widget.  ``StopSwitch`` makes the
bench safe at once from its own thread (the drivers lock each command) and keeps it safe: once it
is thrown, the engine may not close a relay or switch the supply on again.  Each guard checks
the switch and sends under one lock that the switch's own make-safe takes too, so a closing that
passed the check before the stop lands before the opening, never after it.
"""

from __future__ import annotations

import logging
import threading
from collections import deque
from collections.abc import Callable, Iterable
from dataclasses import dataclass

from drivers.base import Dmm, Instrument, InstrumentIdentity, MeterFunction, RelayBox, Supply
from rig.bench_open import check_calibration, close_bench, open_bench
from rig.config.station import FUNCTIONS
from rig.console.diagnosis import DiagnosisView
from rig.engine import Bench, Engine, RunSummary, StopRequested, make_safe
from rig.errors import ConfigError, RigError
from rig.events import Event, PromptShown
from rig.plan import Plan
from rig.station_clock import clock_warnings
from rig.store import ResultStore
from rig.store_sync import SyncReport, send_after_run, send_waiting_runs
from rig.tested_before import ask_server, tested_before

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class LiveReading:
    """One raw reading while a step settles (the engine reports only the settled one)."""

    value: float
    unit: str
    count: int


@dataclass(frozen=True)
class RunEnded:
    """The worker is done: the run's summary, or why no run could be made."""

    summary: RunSummary | None
    problem: str = ""


@dataclass(frozen=True)
class SafeStateMade:
    """The stop switch's own make-safe finished; ``failures`` lists what could not be made safe."""

    failures: tuple[str, ...]


@dataclass(frozen=True)
class SyncNote:
    """What happened when finished runs were sent to the station's results server."""

    text: str


@dataclass(frozen=True)
class EarlierRuns:
    """The unit, or the claim it came in under, has runs of the sequence on record already, on
    this station or (from the results server) on others: said as the run starts, in the lines
    ``rig run`` prints (``rig.tested_before``).  A retest is normal; the run goes on."""

    text: str


Item = Event | LiveReading | RunEnded | SafeStateMade | DiagnosisView | SyncNote | EarlierRuns


class Inbox:
    """A thread-safe queue from the worker to the UI, taken in batches of bounded size."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._items: deque[Item] = deque()

    def put(self, item: Item) -> None:
        with self._lock:
            self._items.append(item)

    def take(self, limit: int) -> list[Item]:
        with self._lock:
            count = min(limit, len(self._items))
            return [self._items.popleft() for _ in range(count)]

    def __len__(self) -> int:
        with self._lock:
            return len(self._items)


class _PassThrough:
    """The wrapped instrument's name, resource, identity and close, and the stop it watches."""

    inner: Instrument

    def _wrap(self, inner: Instrument, stop: threading.Event) -> None:
        self.inner = inner
        self.name = inner.name
        self.resource = inner.resource
        self._stop = stop
        # held from the stop check to the end of the command it allows, and by every command
        # that makes safe, so a stop's make-safe always comes after a command that passed
        self._gate = threading.Lock()

    def _unless_stopped(self, wanted: bool) -> None:
        """Refuse what ``wanted`` (a closing, a switch-on) once the stop is thrown; call with
        ``_gate`` held."""
        if wanted and self._stop.is_set():
            raise StopRequested("stopped by the operator")

    def identity(self) -> InstrumentIdentity:
        return self.inner.identity()

    def close(self) -> None:
        self.inner.close()


class LiveDmm(_PassThrough, Dmm):
    """Passes every call to the real meter and reports each raw reading as it comes.

    After the stop switch is thrown a reading no longer measures the unit (its relays were opened
    under it), so it is refused rather than judged.
    """

    inner: Dmm

    def __init__(
        self, inner: Dmm, report: Callable[[LiveReading], None], stop: threading.Event
    ) -> None:
        self._wrap(inner, stop)
        self._report = report
        self._unit = ""
        self._count = 0

    def reset(self) -> None:
        self.inner.reset()

    def configure(self, function: MeterFunction, range_: float | None, nplc: float) -> None:
        self.inner.configure(function, range_, nplc)
        self._new_function(function)

    def send_configuration(
        self, function: MeterFunction, range_: float | None, nplc: float
    ) -> None:
        self.inner.send_configuration(function, range_, nplc)
        self._new_function(function)

    def confirm_configuration(self) -> None:
        self.inner.confirm_configuration()

    def _new_function(self, function: MeterFunction) -> None:
        self._unit = FUNCTIONS[function.value]
        self._count = 0

    def read(self) -> float:
        value = self.inner.read()
        if self._stop.is_set():
            raise StopRequested("stopped by the operator")
        self._count += 1
        self._report(LiveReading(value, self._unit, self._count))
        return value

    def read_many(self, count: int) -> list[float]:
        values = self.inner.read_many(count)
        if self._stop.is_set():
            raise StopRequested("stopped by the operator")
        for value in values:
            self._count += 1
            self._report(LiveReading(value, self._unit, self._count))
        return values

    def check_errors(self) -> None:
        self.inner.check_errors()


class GuardedRelays(_PassThrough, RelayBox):
    """The real relay box, refusing to close anything once the stop switch is thrown."""

    inner: RelayBox

    def __init__(self, inner: RelayBox, stop: threading.Event) -> None:
        self._wrap(inner, stop)

    def open_all(self) -> None:
        with self._gate:
            self.inner.open_all()

    def apply(self, closed: Iterable[int]) -> None:
        wanted = frozenset(closed)
        with self._gate:
            self._unless_stopped(bool(wanted))
            self.inner.apply(wanted)

    def send_change(self, closed: Iterable[int]) -> None:
        wanted = frozenset(closed)
        with self._gate:
            self._unless_stopped(bool(wanted))
            self.inner.send_change(wanted)

    def finish_change(self) -> None:
        self.inner.finish_change()

    def closed_relays(self) -> frozenset[int]:
        return self.inner.closed_relays()

    def start_watchdog(self, timeout_s: float) -> None:
        self.inner.start_watchdog(timeout_s)

    def stop_watchdog(self) -> None:
        self.inner.stop_watchdog()

    def operation_counts(self) -> dict[int, int]:
        return self.inner.operation_counts()


class GuardedSupply(_PassThrough, Supply):
    """The real supply, refusing to switch its output on once the stop switch is thrown."""

    inner: Supply

    def __init__(self, inner: Supply, stop: threading.Event) -> None:
        self._wrap(inner, stop)

    def set_voltage(self, volts: float) -> None:
        self.inner.set_voltage(volts)

    def set_current_limit(self, amps: float) -> None:
        self.inner.set_current_limit(amps)

    def set_output(self, on: bool) -> None:
        with self._gate:
            self._unless_stopped(on)
            self.inner.set_output(on)

    def send_output_off(self) -> None:
        with self._gate:
            self.inner.send_output_off()

    def output_is_on(self) -> bool:
        return self.inner.output_is_on()

    def measure_voltage(self) -> float:
        return self.inner.measure_voltage()

    def measure_current(self) -> float:
        return self.inner.measure_current()


MAKE_SAFE_WAIT_S = 60.0
"""Longest the worker waits for the stop's make-safe before closing the bench: each command it
sends is bounded by its instrument's timeout, so this is only reached by a bench that hangs."""


class StopSwitch:
    """The operator's stop: tells the engine, and opens relays and supply now, not later.

    Attach the guarded bench, not the instruments behind it: its make-safe then waits for a
    command the guards let through just before the stop, and undoes it."""

    def __init__(self, inbox: Inbox) -> None:
        self.event = threading.Event()
        self._inbox = inbox
        self._bench: Bench | None = None
        self._lock = threading.Lock()
        self._making_safe: threading.Thread | None = None

    def attach(self, bench: Bench) -> None:
        with self._lock:
            self._bench = bench

    def detach(self) -> None:
        """Forget the bench, once a make-safe already under way has finished with it: the caller
        closes the instruments next, and closing them under it would fail it."""
        with self._lock:
            self._bench = None
            making_safe, self._making_safe = self._making_safe, None
        if making_safe is not None:
            making_safe.join(MAKE_SAFE_WAIT_S)

    def throw(self) -> None:
        if self.event.is_set():
            return
        self.event.set()
        with self._lock:
            bench = self._bench
            if bench is not None:
                self._making_safe = threading.Thread(
                    target=self._make_safe, args=(bench,), name="stop: make safe", daemon=True
                )
                self._making_safe.start()

    def _make_safe(self, bench: Bench) -> None:
        self._inbox.put(SafeStateMade(tuple(make_safe(bench))))


class PromptGate:
    """Lets the engine thread put a question to the operator and wait for the answer.

    ``show(step_id, text, answer)`` must arrange, on the UI thread, for ``answer(bool)`` to be
    called once.  A stop while the question is open answers no.
    """

    def __init__(
        self, show: Callable[[str, str, Callable[[bool], None]], None], stop: StopSwitch
    ) -> None:
        self._show = show
        self._stop = stop
        self.step_id = ""
        self.stops_run = False
        """A no to the question being asked ends the run (``PromptShown.stops_run``)."""

    def listen(self, event: Event) -> None:
        """Note which step is asking, and whether a no ends the run (the engine announces a
        prompt just before it asks)."""
        if isinstance(event, PromptShown):
            self.step_id = event.step_id
            self.stops_run = event.stops_run

    def ask(self, text: str) -> bool:
        answered = threading.Event()
        box: list[bool] = []

        def answer(yes: bool) -> None:
            box.append(yes)
            answered.set()

        try:
            self._show(self.step_id, text, answer)
        except RuntimeError as exc:  # the app is closing
            log.warning("prompt %r could not be shown: %s", text, exc)
            return False
        while not answered.wait(0.05):
            if self._stop.event.is_set():
                return False
        return box[0]


@dataclass(frozen=True)
class RunRequest:
    plan: Plan
    serial: str
    operator: str = ""
    unit: str = ""
    faults: tuple[str, ...] = ()
    claim: str = ""
    """The claim or return number typed on the start view, kept with the run."""
    remark: str = ""


def run_in_worker(
    request: RunRequest,
    inbox: Inbox,
    gate: PromptGate,
    stop: StopSwitch,
    after: Callable[[RunSummary, ResultStore], None] | None = None,
) -> None:
    """The worker thread's body: open the bench, run, close; every outcome ends in ``RunEnded``.

    Before the run, the unit's earlier runs of the sequence are said (``EarlierRuns``), as
    ``rig run`` says them: this station's from its own file, the other stations' from the
    results server on the connection of the send before the run.  The verdict goes out as soon
    as the bench is safe; ``after`` then runs in the worker with the summary and the open store
    (the diagnosis of a failed run is slow work too), and finished runs are sent to the
    station's results server, as ``rig run`` does.
    """
    plan = request.plan

    def listener(event: Event) -> None:
        gate.listen(event)
        inbox.put(event)

    def synced(report: SyncReport) -> None:
        inbox.put(SyncNote(report.describe()))

    def seen(text: str) -> None:
        inbox.put(EarlierRuns(text))

    try:
        notes = check_calibration(plan.station, reads_probe=plan.reads_reference_probe)
        _say_earlier_runs(request, seen)
        on_server = ask_server(
            plan.station.name, request.serial, plan.sequence.name, seen, request.claim
        )
        before = send_waiting_runs(plan.station, synced, on_server)
        store = ResultStore(plan.station.store_path)
        notes += clock_warnings(store)
    except RigError as exc:
        inbox.put(RunEnded(None, _problem_text(exc)))
        return
    try:
        summary = _run(request, store, inbox, listener, gate, stop, notes)
        if summary is not None:
            inbox.put(RunEnded(summary))
            if after is not None:
                after(summary, store)
    except RigError as exc:
        inbox.put(RunEnded(None, _problem_text(exc)))
    except Exception as exc:  # keep the console alive and the message readable
        log.exception("the run could not be completed")
        inbox.put(RunEnded(None, f"unexpected error: {exc!r}"))
    finally:
        store.close()
    send_after_run(plan.station, before, synced)


def _say_earlier_runs(request: RunRequest, say: Callable[[str], None]) -> None:
    """This station's earlier runs of the sequence on the unit and under its claim, read before
    the run is recorded (it would count itself); the server's come on the send before the run."""
    plan = request.plan
    for line in tested_before(
        plan.station.store_path, request.serial, plan.sequence.name, request.claim
    ):
        say(line)


def _run(
    request: RunRequest,
    store: ResultStore,
    inbox: Inbox,
    listener: Callable[[Event], None],
    gate: PromptGate,
    stop: StopSwitch,
    notes: list[str],
) -> RunSummary | None:
    """Open the bench behind the console's guards and run; None (and why, in the inbox) when the
    bench could not be opened."""
    try:
        real = open_bench(request.plan.station)
    except RigError as exc:
        inbox.put(RunEnded(None, _problem_text(exc)))
        return None
    bench = Bench(
        LiveDmm(real.dmm, inbox.put, stop.event),
        GuardedSupply(real.supply, stop.event),
        GuardedRelays(real.relays, stop.event),
        real.identities,
    )
    stop.attach(bench)  # through the guards: its make-safe follows a closing already allowed
    try:
        engine = Engine(
            request.plan, bench, store, listener=listener, ask=gate.ask, stop=stop.event
        )
        return engine.run(
            request.serial,
            request.operator,
            unit=request.unit,
            faults=request.faults,
            warnings=notes,  # calibration allowed past due
            claim=request.claim,
            remark=request.remark,
        )
    finally:
        stop.detach()
        close_bench(real)


def _problem_text(exc: RigError) -> str:
    if isinstance(exc, ConfigError):
        return "; ".join(str(p) for p in exc.problems)
    return str(exc)
