"""Crash drill: kill the controller with SIGKILL at seeded random points and check what survives.

A virtual bench runs in this process in real timing; the controller is a real ``rig run`` (or
``rig continue``) subprocess that prints each reading once the store has committed it.  After each
kill the drill checks, from outside the controller:

- every reading and step the controller reported is in the database;
- the relay box's watchdog opened every relay within its configured time (the box's own record);
- the next start marks the dead run ``incomplete`` and brings the bench to the safe state (supply
  switched off before any relay closes, from the bench's own change history);
- continuing the run finishes it with every planned step exactly once, none repeated, none lost.

Used by ``tests/test_reliability_crash.py`` and ``tests/benchmarks/reliability.py``.
"""

from __future__ import annotations

import json
import os
import queue
import random
import signal
import sqlite3
import subprocess
import sys
import threading
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path

from rig.config.fixture import load_fixture
from rig.config.unit_file import load_unit
from rig.sim.bench import VirtualBench
from rig.sim.fault_drill import (
    DRILL_SEQUENCE,
    UNIT_FILE,
    WATCHDOG_S,
    drill_station,
    interlock_violations_seen,
)
from rig.sim.timing import Timing

STEP_IDS = ("signal", "signal-at-controller", "feed", "feed-at-controller", "signal-to-chassis")
WATCHDOG_SLACK_S = 1.0
"""Allowed lateness of the watchdog beyond its timeout on a loaded machine (the box polls every
20 ms; the rest is thread scheduling)."""
START_TIMEOUT_S = 60.0


@dataclass
class CrashReport:
    kill_points: int = 0
    readings_reported: int = 0
    readings_lost: int = 0
    steps_lost: int = 0
    watchdog_late: int = 0
    watchdog_max_s: float = 0.0
    """Longest time from a kill to the watchdog's opening of the last closed relay."""
    unsafe_restarts: int = 0
    restarts_with_supply_on: int = 0
    """Starts that found the supply left on by a killed controller (the check above applies)."""
    kills_with_relays_closed: int = 0
    opened_by_watchdog: int = 0
    """Of those, kills after which the watchdog opened every relay left closed."""
    """Kills that left relays closed for the watchdog to open."""
    continued: int = 0
    """Starts that continued a killed run."""
    """Next starts that closed a relay before the supply had been switched off."""
    not_marked_incomplete: int = 0
    runs: int = 0
    runs_complete: int = 0
    repeated_or_missing_steps: int = 0
    interlock_violations: int = 0
    problems: list[str] = field(default_factory=list)


@dataclass
class _Controller:
    proc: subprocess.Popen[str]
    lines: queue.Queue[str | None]
    started: float


def _launch(args: list[str], folder: Path) -> _Controller:
    env = {**os.environ, "PYTHONUNBUFFERED": "1"}
    with (folder / "controller-stderr.txt").open("a", encoding="utf-8") as err:
        proc = subprocess.Popen(
            [sys.executable, "-m", "rig.cli", *args],
            stdout=subprocess.PIPE,
            stderr=err,
            text=True,
            env=env,
        )
    lines: queue.Queue[str | None] = queue.Queue()

    def pump() -> None:
        assert proc.stdout is not None
        for line in proc.stdout:
            lines.put(line.rstrip("\n"))
        lines.put(None)

    threading.Thread(target=pump, daemon=True).start()
    return _Controller(proc, lines, time.monotonic())


def _progress(line: str) -> bool:
    return line.startswith("    stored ") or line.startswith("  [")


def _drain(ctl: _Controller, *, until_progress: int | None) -> tuple[list[str], bool]:
    """Lines until ``until_progress`` progress lines were seen (None: until the end)."""
    seen: list[str] = []
    count = 0
    deadline = time.monotonic() + START_TIMEOUT_S
    while time.monotonic() < deadline:
        try:
            line = ctl.lines.get(timeout=0.5)
        except queue.Empty:
            continue
        if line is None:
            return seen, True
        seen.append(line)
        count += _progress(line)
        if until_progress is not None and count >= until_progress:
            return seen, False
    raise TimeoutError("the controller printed nothing for too long")


def _reported(lines: list[str]) -> tuple[list[tuple[str, str, float]], list[str]]:
    readings, steps = [], []
    for line in lines:
        if line.startswith("    stored "):
            _, step, role, value, _unit = line.split(maxsplit=4)
            readings.append((step, role, float(value)))
        elif line.startswith("  [") and "] " in line:
            steps.append(line.split("] ", 1)[1].rsplit(":", 1)[0])
    return readings, steps


class _History:
    """The bench's own record of supply output changes, with times on the bench clock."""

    def __init__(self, bench: VirtualBench) -> None:
        self.bench = bench
        self.supply: list[tuple[float, bool]] = []
        previous = bench.supply.on_change

        def changed() -> None:
            self.supply.append((bench.clock.now(), bench.supply_settings.output_on))
            if previous is not None:
                previous()

        bench.supply.on_change = changed


def run_crash_drill(kills: int, *, seed: int, folder: Path) -> CrashReport:
    """Kill a controller ``kills`` times at random points, then finish every run; the report."""
    rng = random.Random(seed)
    report = CrashReport()
    folder.mkdir(parents=True, exist_ok=True)
    sequence = folder / "crash-drill.toml"
    sequence.write_text(DRILL_SEQUENCE, encoding="utf-8")
    unit = load_unit(UNIT_FILE)
    bench = VirtualBench(
        unit,
        load_fixture(unit.fixture_path),
        timing=Timing.REAL,
        state_file=folder / "state.json",
    )
    bench.start()
    history = _History(bench)
    try:
        station = drill_station(bench, folder)
        db_path = folder / "data" / "results.sqlite"
        pending: int | None = None  # a killed run waiting to be continued
        serial = 0
        while report.kill_points < kills:
            if pending is not None and rng.random() < 0.7:
                args = ["continue", str(pending), "--station", str(station), "--readings"]
                continuing = pending
            else:
                serial += 1
                args = [
                    "run",
                    str(sequence),
                    "--station",
                    str(station),
                    "--serial",
                    f"CRASH-{serial}",
                    "--readings",
                ]
                continuing = None
            supply_was_on = bench.supply_settings.output_on
            ctl = _launch(args, folder)
            lines, ended = _drain(ctl, until_progress=rng.randint(1, 11))
            killed_at, closed_at_kill = bench.clock.now(), frozenset[int]()
            if not ended:
                time.sleep(rng.uniform(0.0, 0.2))
                ctl.proc.send_signal(signal.SIGKILL)
                ctl.proc.wait(timeout=30)  # dead: from here only the box moves its relays
                killed_at, closed_at_kill = bench.clock.now(), bench.relay_box.closed()
                lines += _drain(ctl, until_progress=None)[0]  # what it wrote before it died
            ctl.proc.wait(timeout=30)
            _check_restart(report, bench, history, ctl.started, supply_was_on)
            run_id = _run_id(lines)
            _check_reported(report, db_path, run_id, lines)
            report.continued += continuing is not None
            if pending is not None and continuing is None:  # a new run left the dead one behind
                _check_marked(report, db_path, pending)
            if ctl.proc.returncode == -signal.SIGKILL:
                report.kill_points += 1
                _check_watchdog(report, bench, killed_at, closed_at_kill)
                pending = run_id if _status(db_path, run_id) == "running" else None
            else:  # it ran to its end; a run it left behind is finished by _finish_all
                pending = None
        _finish_all(report, station, db_path, folder)
        report.interlock_violations = interlock_violations_seen(bench)
    finally:
        bench.stop()
        (folder / "crash-report.json").write_text(json.dumps(asdict(report), indent=1))
    return report


def _run_id(lines: list[str]) -> int:
    for line in lines:
        if line.startswith("run ") and ":" in line:
            return int(line.split()[1].rstrip(":"))
    raise RuntimeError("the controller did not say which run it started: " + " | ".join(lines))


def _status(db_path: Path, run_id: int) -> str:
    db = sqlite3.connect(db_path)
    try:
        return str(db.execute("SELECT status FROM runs WHERE id=?", (run_id,)).fetchone()[0])
    finally:
        db.close()


def _check_reported(report: CrashReport, db_path: Path, run_id: int, lines: list[str]) -> None:
    readings, steps = _reported(lines)
    report.readings_reported += len(readings)
    db = sqlite3.connect(db_path)
    try:
        for step, role, value in readings:
            found = db.execute(
                "SELECT COUNT(*) FROM readings WHERE run_id=? AND step_id=? AND role=? AND value=?",
                (run_id, step, role, value),
            ).fetchone()[0]
            if not found:
                report.readings_lost += 1
                report.problems.append(f"run {run_id}: reported reading {step} {value} not stored")
        for step in steps:
            found = db.execute(
                "SELECT COUNT(*) FROM steps WHERE run_id=? AND step_id=?", (run_id, step)
            ).fetchone()[0]
            if not found:
                report.steps_lost += 1
                report.problems.append(f"run {run_id}: reported step {step} not stored")
    finally:
        db.close()


def _check_marked(report: CrashReport, db_path: Path, run_id: int) -> None:
    status = _status(db_path, run_id)
    if status != "incomplete":
        report.not_marked_incomplete += 1
        report.problems.append(f"run {run_id} left by a killed controller is {status}")


def _check_watchdog(
    report: CrashReport, bench: VirtualBench, killed_at: float, closed: frozenset[int]
) -> None:
    """Relays closed once the controller is dead must be opened in time; measure how long.

    Nearly always the watchdog opens them; a command the box had received just before the death
    may still be carried out first, which is as safe."""
    if not closed:
        return  # killed between steps or after the run: nothing was left closed
    report.kills_with_relays_closed += 1
    deadline = time.monotonic() + WATCHDOG_S + 10.0
    box = bench.relay_box
    while time.monotonic() < deadline and box.closed():
        time.sleep(0.01)
    later = [e for e in box.events() if e.t >= killed_at and e.relay in closed]
    opened = [e.t for e in later if e.action == "open"]
    if box.closed() or not closed <= {e.relay for e in later if e.action == "open"}:
        report.watchdog_late += 1
        report.problems.append(f"relays {sorted(closed)} were not opened after the kill")
        return
    report.opened_by_watchdog += all(e.cause == "watchdog" for e in later)
    took = max(opened) - killed_at
    report.watchdog_max_s = max(report.watchdog_max_s, took)
    if took > WATCHDOG_S + WATCHDOG_SLACK_S:
        report.watchdog_late += 1
        report.problems.append(f"watchdog opened the relays {took:.2f} s after the kill")


def _check_restart(
    report: CrashReport,
    bench: VirtualBench,
    history: _History,
    started: float,
    supply_was_on: bool,
) -> None:
    """With the supply left on by a dead controller, the next start switches it off before it
    closes any relay."""
    if not supply_was_on:
        return
    report.restarts_with_supply_on += 1
    first_close = min(
        (e.t for e in bench.relay_box.events() if e.action == "close" and e.t >= started),
        default=None,
    )
    first_supply = next(((t, on) for t, on in history.supply if t >= started), None)
    if first_close is None:
        return
    if first_supply is None or first_supply[1] or first_supply[0] > first_close:
        report.unsafe_restarts += 1
        report.problems.append("a restart closed a relay before switching the supply off")


def _finish_all(report: CrashReport, station: Path, db_path: Path, folder: Path) -> None:
    """Continue every unfinished run once more, without a kill, and check each run's steps."""
    db = sqlite3.connect(db_path)
    try:
        unfinished = [
            int(r[0])
            for r in db.execute("SELECT id FROM runs WHERE status IN ('running', 'incomplete')")
        ]
    finally:
        db.close()
    for run_id in unfinished:
        ctl = _launch(["continue", str(run_id), "--station", str(station), "--readings"], folder)
        lines, _ = _drain(ctl, until_progress=None)
        ctl.proc.wait(timeout=60)
        _check_reported(report, db_path, run_id, lines)
    db = sqlite3.connect(db_path)
    try:
        runs = db.execute("SELECT id, status FROM runs").fetchall()
        report.runs = len(runs)
        for run_id, status in runs:
            report.runs_complete += status == "complete"
            if status != "complete":
                report.problems.append(f"run {run_id} ended {status}")
            ids = [
                r[0]
                for r in db.execute(
                    "SELECT step_id FROM steps WHERE run_id=? ORDER BY position", (run_id,)
                )
            ]
            if tuple(ids) != STEP_IDS:
                report.repeated_or_missing_steps += 1
                report.problems.append(f"run {run_id} has steps {ids}")
    finally:
        db.close()
