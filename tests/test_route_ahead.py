"""The next relay change sent as soon as it is known: the contacts move while the engine computes,
judges and files the step before (``Engine._move_ahead``); never across a step while the supply
is on, never after a stop, and with the supply on the safe state proves it off first.

The contract the engine relies on (``StepKind.routes_in_order``) is checked kind by kind against
what each kind's run really asks of the bench; the order of work is checked on the virtual bench
through the real drivers, with the relay box's calls and the engine's events logged side by side.
"""

from __future__ import annotations

import itertools
import time
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_bench
from offline_station import offline_demo_station

from drivers.base import InstrumentIdentity, MeterFunction, RelayBox
from drivers.relay_frames import WatchdogMode
from drivers.relay_serial import SerialRelayBox
from rig.bench_open import close_bench, open_bench
from rig.config.fixture import FixtureMap
from rig.engine import Bench, Engine, RunSummary, make_safe
from rig.events import Event, RunStarted, StepFinished, StepStarted
from rig.judge.decision import Verdict
from rig.judge.reference_probe import ReferenceProbe
from rig.plan import Plan
from rig.routing import Route, plan_relays
from rig.runner import load_plan
from rig.sim.fault_drill import DRILL_SEQUENCE
from rig.sim.timing import Timing
from rig.steps import KINDS, Reading, SupplyRequest
from rig.store import ResultStore

SHIPPED = ("ntc-sender-screen", "temp-circuit-check", "pressure-circuit-check")


class RecordingContext:
    """A ``StepContext`` that only writes down what a step asks of the bench."""

    def __init__(self, plan: Plan) -> None:
        self.plan = plan
        self.calls: list[tuple[str, object]] = []

    def power(self, request: SupplyRequest | None) -> None:
        self.calls.append(("power", request))

    def connect(self, route: Route) -> None:
        self.calls.append(("connect", route))

    def measure(
        self, function: MeterFunction, *, role: str, range_: float | None, nplc: float
    ) -> Reading:
        self.calls.append(("measure", function))
        # plausible values for the kinds' arithmetic: a Pt100 near 23 degC, an NTC near its
        # R25, a sensor signal of a few volts
        value = {MeterFunction.RES_4W: 109.0, MeterFunction.RES_2W: 2000.0}.get(function, 2.3)
        return Reading(role, function.value, value, range_, nplc, time.time(), 0.01)

    def measure_on(
        self,
        route: Route,
        function: MeterFunction,
        *,
        role: str,
        range_: float | None,
        nplc: float,
    ) -> Reading:
        self.calls.append(("measure_on", route))
        return self.measure(function, role=role, range_=range_, nplc=nplc)

    def supply_current(self, *, role: str) -> Reading:
        self.calls.append(("supply_current", role))
        return Reading(role, "supply-current", 0.01, 0.1, 0.0, time.time(), 1e-4)

    def earlier(self, step_id: str) -> Reading:
        kind = self.plan.sequence.step(step_id).kind
        value = 23.0 if kind == "reference-temperature" else 5.0
        return Reading("earlier", "", value, None, 1.0, 0.0, 0.05)

    def prompt(self, text: str, *, stops_run: bool = False) -> bool:
        self.calls.append(("prompt", text))
        return True

    def wait(self, seconds: float) -> None:
        self.calls.append(("wait", seconds))

    def lead_zero(self, hi: str, lo: str) -> float:
        return 0.0

    def meter_accuracy(self, function: MeterFunction, range_: float | None) -> None:
        return None

    @property
    def fixture(self) -> FixtureMap:
        return self.plan.station.fixture

    @property
    def reference_probe(self) -> ReferenceProbe | None:
        return self.plan.station.reference_probe


@pytest.mark.parametrize("sequence", SHIPPED)
def test_kinds_that_say_they_run_their_routes_in_order_do(sequence: str, tmp_path: Path) -> None:
    # The engine sends a step's next route, and the next step's first, the moment a reading is
    # in: right only if the kind asks exactly power(spec.supply), then one measure_on per route
    # in the order routes() gives, and nothing else of the bench.
    plan = load_plan(SEQUENCES / f"{sequence}.toml", offline_demo_station("order", tmp_path))
    checked = 0
    for planned in plan.steps:
        kind = KINDS[planned.spec.kind]
        if not kind.routes_in_order:
            continue
        context = RecordingContext(plan)
        kind.run(context, planned.spec)  # type: ignore[arg-type]
        bench_calls = [c for c in context.calls if c[0] != "measure"]
        expected = [("power", planned.spec.supply)]
        expected += [("measure_on", route) for route in kind.routes(planned.spec)]
        assert bench_calls == expected, planned.spec.id
        routes = kind.routes(planned.spec)
        assert [plan_relays(plan.station.fixture, r) for r in routes] == planned.relay_sets
        checked += 1
    assert checked >= 3


class LoggedRelays(RelayBox):
    """The real relay-box driver, with each change it is given written into a shared log."""

    def __init__(self, inner: RelayBox, log: list[tuple[str, object]]) -> None:
        self.inner, self.log = inner, log
        self.name, self.resource = inner.name, inner.resource

    def identity(self) -> InstrumentIdentity:
        return self.inner.identity()

    def close(self) -> None:
        self.inner.close()

    def open_all(self) -> None:
        self.log.append(("open_all", frozenset()))
        self.inner.open_all()

    def apply(self, closed: Iterable[int]) -> None:
        self.log.append(("apply", frozenset(closed)))
        self.inner.apply(closed)

    def send_change(self, closed: Iterable[int]) -> None:
        self.log.append(("send", frozenset(closed)))
        self.inner.send_change(closed)

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


@dataclass
class LoggedRun:
    summary: RunSummary
    plan: Plan
    log: list[tuple[str, object]]
    """The relay box's changes and the step events, in the order the engine made them."""
    operations: int
    """Contact operations the box counted during the run."""


def logged_run(
    tmp_path: Path,
    *,
    unit: str = "temp-circuit",
    sequence: Path = SEQUENCES / "temp-circuit-check.toml",
    stop_when_read: bool = False,
    answer: bool = True,
) -> LoggedRun:
    """A sequence on the virtual bench, the relay box's changes and the engine's step events
    written into one log as the engine thread makes them.  ``stop_when_read``: the operator's
    stop comes while the run's first reading integrates, so it is there when the reading is.
    ``answer``: the operator's answer to every prompt."""
    with shipped_bench(unit, folder=tmp_path) as (bench, station):
        plan = load_plan(sequence, station)
        log: list[tuple[str, object]] = []
        if stop_when_read:
            handle = bench.dmm.handle

            def stop_on_reading(line: str) -> str | None:
                if "READ?" in line.upper() and not engine.stop.is_set():
                    engine.stop.set()
                    log.append(("stop", None))
                return handle(line)

            bench.dmm.handle = stop_on_reading  # type: ignore[method-assign]
        opened = open_bench(station)
        instruments = Bench(opened.dmm, opened.supply, LoggedRelays(opened.relays, log))
        store = ResultStore(tmp_path / "r.sqlite")
        try:
            engine = Engine(plan, instruments, store, ask=lambda text: answer)
            deliver = engine.listener

            def emitted(event: Event) -> None:  # in the engine's thread, in order
                if isinstance(event, StepStarted):
                    log.append(("StepStarted", event.step_id))
                elif isinstance(event, StepFinished):
                    log.append(("StepFinished", event.result.step_id))
                deliver(event)

            engine.listener = emitted
            operations = sum(bench.relay_box.operation_counts().values())
            summary = engine.run("AHEAD-1")
            operations = sum(bench.relay_box.operation_counts().values()) - operations
        finally:
            close_bench(opened)
            store.close()
        assert bench.relay_box.closed() == frozenset()  # left safe, however it ended
        assert not bench.supply_settings.output_on
    return LoggedRun(summary, plan, log, operations)


def test_the_next_route_moves_while_the_step_before_is_filed(tmp_path: Path) -> None:
    run = logged_run(tmp_path)
    log = run.log
    assert run.summary.status == "complete"
    assert run.operations == run.plan.relay_ops  # sent ahead, never sent twice or in vain
    sends = [entry for entry in log if entry[0] == "send"]
    assert not any(entry[0] == "apply" for entry in log)

    def at(entry: tuple[str, object]) -> int:
        return log.index(entry)

    steps = run.plan.steps
    # the first route goes out with the safe start, before the first step begins
    assert at(("send", steps[0].relay_sets[0])) < at(("StepStarted", steps[0].spec.id))
    for step, following in itertools.pairwise(steps):
        inside = step.relay_sets[1:]  # a step's own later routes: sent before it is filed too
        for relays in inside:
            assert at(("send", relays)) < at(("StepFinished", step.spec.id))
        nxt = following.relay_sets[0]
        if nxt != step.relay_sets[-1]:
            # sent once the step's last reading was in: before the step is judged and filed
            assert at(("send", nxt)) < at(("StepFinished", step.spec.id)), step.spec.id
    # after the last reading every relay opens at once (the supply is off)
    assert sends[-1] == ("send", frozenset())
    assert at(sends[-1]) < at(("StepFinished", steps[-1].spec.id))


def test_a_confirmed_prompt_sends_the_next_route_before_it_is_filed(tmp_path: Path) -> None:
    # The sensor screen begins with a prompt (relays all open, supply off, then the question):
    # once the operator confirms, the well probe's route moves while the answer is filed.
    run = logged_run(
        tmp_path, unit="ntc-sender", sequence=SEQUENCES / "ntc-sender-screen.toml", answer=True
    )
    assert run.summary.status == "complete"
    assert run.operations == run.plan.relay_ops  # sent ahead, never twice
    prompt, first = run.plan.steps[0], run.plan.steps[1]
    assert prompt.spec.kind == "prompt" and first.relay_sets
    sent = run.log.index(("send", first.relay_sets[0]))
    assert sent < run.log.index(("StepFinished", prompt.spec.id))
    assert sent > run.log.index(("StepStarted", prompt.spec.id))  # not before the question


def test_a_prompt_answered_no_sends_nothing_ahead(tmp_path: Path) -> None:
    # "No" fails the prompt's step; whatever the run does next, no route went out on that answer.
    run = logged_run(
        tmp_path, unit="ntc-sender", sequence=SEQUENCES / "ntc-sender-screen.toml", answer=False
    )
    prompt = run.plan.steps[0]
    filed = run.log.index(("StepFinished", prompt.spec.id))
    asked = run.log.index(("StepStarted", prompt.spec.id))
    assert not [e for e in run.log[asked:filed] if e[0] == "send" and e[1]]


def _stopping_screen(folder: Path) -> Path:
    """The shipped sensor screen with its opening prompt made to stop the run on a no."""
    text = (SEQUENCES / "ntc-sender-screen.toml").read_text(encoding="utf-8")
    asked = 'text = "Place the sender in the well and clip its two leads to T1 and T2."\n'
    assert asked in text
    path = folder / "stopping-screen.toml"
    path.write_text(text.replace(asked, asked + 'declined = "stop"\n'), encoding="utf-8")
    return path


def test_a_prompt_that_stops_the_run_on_no_ends_it_there_sending_nothing(tmp_path: Path) -> None:
    # A no to a prompt with declined = "stop": its step fails and is kept, no route goes out on
    # that answer, the run ends aborted with the prompt named, the bench safe (logged_run reads
    # it back from the box and the supply), and the three measuring steps are never begun.
    run = logged_run(tmp_path, unit="ntc-sender", sequence=_stopping_screen(tmp_path), answer=False)
    summary, prompt = run.summary, run.plan.steps[0]
    assert summary.status == "aborted" and summary.verdict is Verdict.ERROR
    assert summary.reason == (
        f"step {prompt.spec.id}: the operator declined {prompt.spec.params['text']!r}; "
        "the sequence stops the run on a no"
    )
    assert [(r.step_id, r.verdict) for r in summary.results] == [(prompt.spec.id, Verdict.FAIL)]
    assert summary.cut_short is None
    assert summary.not_run == [p.spec.id for p in run.plan.steps[1:]]
    asked = run.log.index(("StepStarted", prompt.spec.id))
    assert not [e for e in run.log[asked:] if e[0] == "send" and e[1]]
    store = ResultStore(tmp_path / "r.sqlite")
    try:
        stored = store.run(summary.run_id)
        steps = store.steps(summary.run_id)
    finally:
        store.close()
    assert (stored["status"], stored["reason"]) == ("aborted", summary.reason)
    assert [(s["step_id"], s["verdict"]) for s in steps] == [(prompt.spec.id, "fail")]


def test_a_prompt_that_stops_the_run_on_no_goes_on_when_confirmed(tmp_path: Path) -> None:
    run = logged_run(tmp_path, unit="ntc-sender", sequence=_stopping_screen(tmp_path), answer=True)
    assert run.summary.status == "complete" and run.summary.verdict is Verdict.PASS
    first = run.plan.steps[1]
    sent = run.log.index(("send", first.relay_sets[0]))  # still sent ahead on a yes
    assert sent < run.log.index(("StepFinished", run.plan.steps[0].spec.id))


def test_the_supply_is_proven_off_before_the_relays_open(tmp_path: Path) -> None:
    # Relays that take 100 ms to release (invented for the test): with the supply on, the safe
    # state proves it off before the box is told to open, so no contact breaks a current the
    # supply still drives (the engine opens ahead only where the supply was off already).
    with shipped_bench(
        "temp-circuit", folder=tmp_path, timing=Timing.REAL, relay_release_s=0.1
    ) as (bench, station):
        lines: list[tuple[float, str]] = []
        handle = bench.supply.handle

        def logged(line: str) -> str | None:
            lines.append((time.monotonic(), line.strip().upper()))
            return handle(line)

        bench.supply.handle = logged  # type: ignore[method-assign]
        instruments = open_bench(station)
        try:
            instruments.relays.apply([9, 12])
            instruments.supply.set_voltage(5.0)
            instruments.supply.set_output(True)
            assert make_safe(instruments, run_ending=True) == []
        finally:
            close_bench(instruments)
    opened = [e for e in bench.relay_box.events() if e.action == "open"]
    assert {e.relay for e in opened} == {9, 12}
    release_began = min(e.t for e in opened) - 0.1
    asked_at = max(t for t, line in lines if line == "OUTP?")
    assert asked_at < release_began
    assert not bench.supply_settings.output_on
    assert bench.relay_box.closed() == frozenset()


def test_nothing_moves_ahead_once_a_stop_is_asked(tmp_path: Path) -> None:
    # The stop comes while the first route's reading integrates: the reading still comes in
    # (it is kept), but the next route is not sent, and the run ends aborted and safe.
    run = logged_run(tmp_path, stop_when_read=True)
    assert run.summary.status == "aborted"
    after_stop = run.log[run.log.index(("stop", None)) :]
    assert not [entry for entry in after_stop if entry[0] == "send"]  # only the safe state


def test_nothing_moves_ahead_across_steps_while_the_supply_is_on(tmp_path: Path) -> None:
    # Five powered steps (the fault drills' sequence, each on its own route): a step's supply is
    # checked once its reading is in, so the next step's route waits for that step to start, and
    # a trip the next route causes is that step's own.  At the end, with the supply on, the safe
    # state proves it off before any relay opens (no opening ahead).
    path = tmp_path / "powered.toml"
    path.write_text(DRILL_SEQUENCE, encoding="utf-8")
    run = logged_run(tmp_path, unit="pressure-circuit", sequence=path)
    assert run.summary.status == "complete"
    log = run.log
    for planned in run.plan.steps:
        assert log.index(("send", planned.relay_sets[0])) > log.index(
            ("StepStarted", planned.spec.id)
        )
    assert ("send", frozenset()) not in log and ("open_all", frozenset()) in log


class _Powered:
    """Step texts for every kind that runs its routes in order, with the supply on where the
    kind can have it (values invented for the test)."""

    SUPPLY = 'supply = { pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "50 mA" }\n'
    STEPS = (
        '[[steps]]\nid = "pt"\nkind = "reference-temperature"\nforce_hi = "PT_FH"\n'
        'sense_hi = "PT_SH"\nforce_lo = "PT_FL"\nsense_lo = "PT_SL"\nlow = "10 degC"\n'
        'high = "40 degC"\n'
        '[[steps]]\nid = "v"\nkind = "volts"\nhi = "P_SIG"\nlo = "P_GND"\nlow = "0 V"\n'
        'high = "5 V"\n' + SUPPLY + '[[steps]]\nid = "r2"\nkind = "resistance"\nhi = "S_SIG"\n'
        'lo = "C_SIG"\nhigh = "1 ohm"\n'
        '[[steps]]\nid = "r4"\nkind = "resistance"\nhi = "T1"\nlo = "T2"\nwires = 4\n'
        'high = "10 kohm"\n'
        '[[steps]]\nid = "drop"\nkind = "wire-drop"\nfrom = "P_SIG"\nto = "C_PSIG"\n'
        'reference = "CHASSIS"\nmax = "0.01 V"\n' + SUPPLY + '[[steps]]\nid = "gnd"\n'
        'kind = "ground-drop"\npin = "P_GND"\nmax = "0.02 V"\n' + SUPPLY + "[[steps]]\n"
        'id = "ntc-v"\nkind = "ntc"\nmeasure = "voltage"\nhi = "S_SIG"\nlo = "S_GND"\n'
        'r25 = "2 kohm"\nbeta = "3450 K"\ntemperature_from = "pt"\ntolerance = "5 %"\n'
        'pullup = "2.49 kohm"\nreference = "5 V"\n' + SUPPLY + '[[steps]]\nid = "ntc-r"\n'
        'kind = "ntc"\nhi = "T1"\nlo = "T2"\nr25 = "2 kohm"\nbeta = "3450 K"\n'
        'temperature_from = "pt"\ntolerance = "5 %"\n'
        '[[steps]]\nid = "map"\nkind = "ratiometric"\noutput = "P_SIG"\npower = "P_5V"\n'
        'ground = "P_GND"\nrange_low = "20 kPa"\nrange_high = "250 kPa"\ntolerance = "2 %"\n'
        + SUPPLY
    )


def test_every_kind_and_mode_keeps_its_promise_powered_or_not(tmp_path: Path) -> None:
    path = tmp_path / "kinds.toml"
    path.write_text('[sequence]\nname = "kinds"\nreorder = false\n' + _Powered.STEPS)
    plan = load_plan(path, offline_demo_station("kinds", tmp_path))
    powered = 0
    for planned in plan.steps:
        kind = KINDS[planned.spec.kind]
        assert kind.routes_in_order, planned.spec.kind
        context = RecordingContext(plan)
        kind.run(context, planned.spec)  # type: ignore[arg-type]
        expected = [("power", planned.spec.supply)]
        expected += [("measure_on", route) for route in kind.routes(planned.spec)]
        assert [c for c in context.calls if c[0] != "measure"] == expected, planned.spec.id
        powered += planned.spec.supply is not None
    assert powered == 5


def test_ctrl_c_as_the_run_starts_still_ends_it_safe_and_recorded(tmp_path: Path) -> None:
    # The safe start arms the watchdog and sends the first route ahead before the run's first
    # event; Ctrl-C while that event is shown (the CLI printing it) must still end the run safe,
    # the watchdog off, and recorded as interrupted.
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        plan = load_plan(SEQUENCES / "temp-circuit-check.toml", station)
        instruments = open_bench(station)
        store = ResultStore(tmp_path / "r.sqlite")
        started: list[int] = []
        try:
            engine = Engine(plan, instruments, store)
            deliver = engine.listener

            def interrupted(event: Event) -> None:
                deliver(event)
                if isinstance(event, RunStarted):
                    started.append(event.run_id)
                    raise KeyboardInterrupt

            engine.listener = interrupted
            with pytest.raises(KeyboardInterrupt):
                engine.run("CTRL-C-1")
            relays = instruments.relays
            assert isinstance(relays, SerialRelayBox)
            assert relays.closed_relays() == frozenset()
            assert relays.watchdog_state().watchdog is WatchdogMode.OFF
            run = store.run(started[0])
        finally:
            close_bench(instruments)
            store.close()
    assert run["status"] == "aborted" and "interrupted" in str(run["reason"])
