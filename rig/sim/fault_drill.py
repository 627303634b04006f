"""Fault drills: one run on a fresh virtual bench with one instrument fault injected on command.

Each drill starts a virtual bench, writes its station file, and runs a short powered sequence
through the real drivers.  The moment the chosen step's relays have closed, the fault is armed on
the bench's side through the control channel's own command handler (``instrument NAME KIND N``),
so the point does not depend on how fast the controller runs (a fault of the meter's setup is
armed one step ahead: see ``ARMED_A_STEP_AHEAD``).  The drill's steps are powered, and the engine
sends a step's relays ahead of it only with the supply off, so each step's relays close once that
step has begun.  After the run the
bench's own side is watched until every relay is open and the supply is off; the drill records the
run's outcome, its reason, whether one retry cured the fault, and how long the bench took to be
safe.  Used by the reliability tests and ``tests/benchmarks/reliability.py``.
"""

from __future__ import annotations

import json
import time
from dataclasses import dataclass
from pathlib import Path

from rig.config.fixture import load_fixture
from rig.config.unit_file import load_unit
from rig.routing import interlock_violations
from rig.runner import load_plan, run_plan
from rig.sim.bench import VirtualBench
from rig.sim.control import UnitFaults, handle_command
from rig.store import ResultStore

FAULTS: dict[str, tuple[str, str]] = {
    "dmm-dropped": ("dmm", "drop"),
    "dmm-no-reply": ("dmm", "silent"),
    "dmm-garbled": ("dmm", "garble"),
    "dmm-scpi-error": ("dmm", "config_error"),
    "supply-trip": ("supply", "trip"),
    "relay-checksum": ("relay_box", "bad_checksum"),
    "relay-no-ack": ("relay_box", "no_ack"),
    "relay-pty-gone": ("relay_box", "close_pty"),
}
"""Drill name -> (instrument on the control channel, its fault kind)."""

POINTS = {"start": 1, "middle": 3, "end": 5}
"""Where in the five-step drill sequence the fault is armed (the step that is starting)."""

ARMED_A_STEP_AHEAD = ("dmm-scpi-error",)
"""Faults of the meter's setup: a step's setup is sent while its relays move, before they have
closed, so such a fault is armed when the step before has closed its relays (before the run, for
the first step); the step's own setup is then the next one the meter takes."""

NOT_RETRIED = ("supply-trip", "relay-pty-gone")
"""Faults a retry must not or cannot cure: a tripped unit is never re-powered; a vanished port
stays gone."""

WATCHDOG_S = 1.0
TIMEOUT_MS = 1000
SAFE_WAIT_S = 15.0
"""How long the drill watches the bench for the safe state before it calls the drill failed."""

_STEP = """
[[steps]]
id = "{id}"
kind = "volts"
hi = "{hi}"
lo = "{lo}"
low = "-1 V"
high = "6 V"
nplc = {nplc}
supply = {{ pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "50 mA" }}
"""
_ROUTES = [
    ("signal", "P_SIG", "P_GND"),
    ("signal-at-controller", "C_PSIG", "C_PGND"),
    ("feed", "P_5V", "P_GND"),
    ("feed-at-controller", "C_5V", "C_PGND"),
    ("signal-to-chassis", "P_SIG", "CHASSIS"),
]
DRILL_SEQUENCE = '[sequence]\nname = "fault-drill"\nreorder = false\n' + "".join(
    _STEP.format(id=i, hi=hi, lo=lo, nplc=1 + n % 2) for n, (i, hi, lo) in enumerate(_ROUTES)
)
"""Five powered steps on different routes and integration times, so that every step moves relays,
configures the meter and talks to all three instruments."""

UNIT_FILE = Path(__file__).resolve().parents[2] / "sequences" / "units" / "pressure-circuit.toml"


@dataclass(frozen=True)
class DrillResult:
    fault: str
    point: str
    persistent: bool
    status: str
    """Recorded run status (complete, aborted) or ``unrecorded`` if the store has no end."""
    reason: str
    retried: bool
    """The record notes a transient fault cured by one retry."""
    run_s: float
    safe_s: float
    """From arming the fault until the bench's own side showed every relay open, supply off."""
    safe: bool
    interlock_violations: int = 0
    """Relay states, replayed from the box's own record, that broke an interlock of the fixture."""
    error: str = ""
    """An exception that escaped the run (a defect), as text."""

    @property
    def expected_status(self) -> str:
        return "aborted" if self.persistent or self.fault in NOT_RETRIED else "complete"

    @property
    def survived(self) -> bool:
        """Recorded with a reason, safe in time, and aborted or cured as the fault calls for."""
        if self.error or not self.safe or self.interlock_violations:
            return False
        if self.status != self.expected_status:
            return False
        if self.status == "aborted":
            return bool(self.reason)
        return self.retried


def drill_station(bench: VirtualBench, folder: Path) -> Path:
    """The bench's station file with a short watchdog and instrument timeouts (bounded drills)."""
    path = bench.write_station(folder / "station.toml", data_dir=str(folder / "data"))
    text = path.read_text(encoding="utf-8")
    text = text.replace('watchdog = "2 s"', f'watchdog = "{WATCHDOG_S:g} s"')
    text = text.replace("timeout_ms = 3000", f"timeout_ms = {TIMEOUT_MS}")
    path.write_text(text, encoding="utf-8")
    return path


def _bench_safe(bench: VirtualBench) -> bool:
    state = bench.state()
    return not state["closed_relays"] and not state["outputs_on"]


def run_drill(fault: str, point: str, *, persistent: bool, folder: Path) -> DrillResult:
    """One drill; never raises for what the run does (an escaped exception is recorded)."""
    instrument, kind = FAULTS[fault]
    at_step = POINTS[point]
    folder.mkdir(parents=True, exist_ok=True)
    sequence = folder / "fault-drill.toml"
    sequence.write_text(DRILL_SEQUENCE, encoding="utf-8")
    unit = load_unit(UNIT_FILE)
    bench = VirtualBench(unit, load_fixture(unit.fixture_path), state_file=folder / "state.json")
    bench.start()
    armed: list[float] = []

    def arm() -> None:
        reply = handle_command(
            UnitFaults(bench), f"instrument {instrument} {kind} {0 if persistent else 1}"
        )
        if "error" in reply:
            raise RuntimeError(f"the bench refused the fault: {reply['error']}")
        armed.append(time.monotonic())

    started = time.monotonic()
    error = ""
    status, reason, retried = "unrecorded", "", False
    try:
        plan = load_plan(sequence, drill_station(bench, folder))
        # armed on the bench's side when the chosen step's relays have closed
        arm_at = at_step - 1 if fault in ARMED_A_STEP_AHEAD else at_step
        if arm_at == 0:
            arm()
        else:
            bench.relay_box.when_closed(plan.steps[arm_at - 1].relay_sets[0], arm)
        summary = run_plan(plan, f"DRILL-{fault}-{point}")
        store = ResultStore(plan.station.store_path)  # the record, not the summary, is judged
        try:
            record = store.run(summary.run_id)
        finally:
            store.close()
        status, reason = str(record["status"]), str(record["reason"])
        notes = json.loads(record["notes"])
        retried = any("cured by one retry" in n or "second try" in n for n in notes)
    except Exception as exc:  # a drill records what escaped; the tests count it as a defect
        error = f"{type(exc).__name__}: {exc}"
    run_s = time.monotonic() - started
    t0 = armed[0] if armed else started
    deadline = time.monotonic() + SAFE_WAIT_S
    while not _bench_safe(bench) and time.monotonic() < deadline:
        time.sleep(0.01)
    safe = _bench_safe(bench)
    safe_s = time.monotonic() - t0
    bench.stop()
    violations = interlock_violations_seen(bench)
    return DrillResult(
        fault, point, persistent, status, reason, retried, run_s, safe_s, safe, violations, error
    )


def interlock_violations_seen(bench: VirtualBench) -> int:
    """Replay every contact movement the box recorded; count the states that broke an interlock."""
    closed: set[int] = set()
    count = 0
    for event in bench.relay_box.events():
        if event.action == "close":
            closed.add(event.relay)
        else:
            closed.discard(event.relay)
        count += bool(interlock_violations(bench.fixture, closed))
    return count


def table(results: list[DrillResult]) -> list[str]:
    """The drill table as text lines: fault x point -> outcome, time to safe state."""
    head = f"{'fault':<16} {'point':<7} {'mode':<10} {'outcome':<9} {'retry':<5} "
    lines = [head + f"{'run s':>6} {'safe s':>6}  reason", "-" * 100]
    for r in results:
        mode = "persistent" if r.persistent else "once"
        outcome = r.status if r.survived else f"{r.status}!"
        reason = r.error or r.reason
        lines.append(
            f"{r.fault:<16} {r.point:<7} {mode:<10} {outcome:<9} {'yes' if r.retried else '-':<5} "
            f"{r.run_s:6.2f} {r.safe_s:6.2f}  {reason[:60]}"
        )
    return lines
