"""Opening the operator console on a started virtual bench, and waiting on it from a test pilot.

Waits count pilot pauses up to a generous bound (the machine may be loaded); they never assert a
duration.  The console's clock is fixed so that screens and snapshots do not change with the time.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from bench_helpers import SEQUENCES, shipped_bench
from textual.pilot import Pilot

from rig.config.fixture import load_fixture
from rig.config.station import Station, load_station
from rig.console import ConsoleApp, ConsoleSetup
from rig.console.screens.run import RunScreen
from rig.harness.as_built import BuildFault
from rig.harness.wire_list import load_wire_list
from rig.runner import load_plan
from rig.sim.bench import VirtualBench
from rig.sim.harness_bench import harness_bench
from rig.sim.timing import Timing
from rig.store import ResultStore

FIXED_CLOCK = dt.datetime(2030, 1, 2, 8, 30, tzinfo=dt.UTC)
HARNESS = Path(__file__).resolve().parent.parent / "sequences" / "harness"
"""The shipped invented example harness: its wire list, fixture and proof sequence."""
HARNESS_PROBE = ("PT_FH", "PT_SH", "PT_FL", "PT_SL")
WAIT_PAUSES = 2400
"""Pilot pauses of 50 ms before a wait gives up: two minutes, far beyond any healthy run."""


def console_setup(
    station: Station, *sequences: Path, bench: VirtualBench | None = None
) -> ConsoleSetup:
    return ConsoleSetup(
        station,
        [load_plan(path, station) for path in sequences],
        operator="tester",
        unit=bench.unit if bench is not None else None,
        clock=lambda: FIXED_CLOCK,
    )


@contextmanager
def console_on_bench(
    unit: str,
    folder: Path,
    *sequences: Path | str,
    faults: tuple[str, ...] = (),
    **bench_args: object,
) -> Iterator[tuple[ConsoleApp, VirtualBench]]:
    """A console over a started virtual bench; a sequence given as a name is a shipped one."""
    paths = [SEQUENCES / f"{s}.toml" if isinstance(s, str) else s for s in sequences]
    with shipped_bench(unit, faults, folder=folder, **bench_args) as (bench, station):
        yield ConsoleApp(console_setup(station, *paths, bench=bench)), bench


@contextmanager
def harness_console(folder: Path, faults: list[BuildFault]) -> Iterator[ConsoleApp]:
    """A console offering the shipped harness proof, on a virtual harness bench built with
    ``faults`` (the ambient and the seed fixed)."""
    fixture = load_fixture(HARNESS / "fixture.toml")
    wires = load_wire_list(HARNESS / "wire-list.csv", fixture)
    bench = harness_bench(wires, fixture, faults, ambient_c=23.0, seed=4, probe=HARNESS_PROBE)
    bench.start()
    try:
        path = bench.write_station(folder / "station.toml", data_dir=str(folder / "d"))
        station = load_station(path)
        plan = load_plan(HARNESS / "harness-proof.toml", station)
        yield ConsoleApp(
            ConsoleSetup(station, [plan], operator="tester", clock=lambda: FIXED_CLOCK)
        )
    finally:
        bench.stop()


@contextmanager
def slow_console(folder: Path) -> Iterator[tuple[ConsoleApp, VirtualBench]]:
    """A console over the pressure circuit on real timing, offering ``slow_sequence``."""
    with console_on_bench(
        "pressure-circuit", folder, slow_sequence(folder), timing=Timing.REAL
    ) as opened:
        yield opened


def stored_run(app: ConsoleApp, run_id: int) -> tuple[dict[str, Any], list[dict[str, Any]]]:
    """The run's row and its step rows, read from the store file with a connection of our own."""
    store = ResultStore(app.setup.store_path)
    try:
        return store.run(run_id), store.steps(run_id)
    finally:
        store.close()


async def wait_for(pilot: Pilot[None], condition: Callable[[], bool], what: str) -> None:
    for _ in range(WAIT_PAUSES):
        if condition():
            return
        await pilot.pause(0.05)
    raise AssertionError(f"gave up waiting for {what}")


async def start_run(pilot: Pilot[None], serial: str, claim: str = "") -> RunScreen:
    """Acknowledge the cautions, scan ``serial`` (typed; with ``claim``, Tab to the claim field
    and that typed, no spaces), press Enter and return the run view."""
    app = pilot.app
    assert isinstance(app, ConsoleApp)
    await wait_for(
        pilot, lambda: not app.cautions_acknowledged and len(app.screen_stack) > 1, "the cautions"
    )
    await pilot.press("enter")
    await wait_for(pilot, lambda: app.cautions_acknowledged, "the cautions to be acknowledged")
    await pilot.press(*serial, *(("tab", *claim) if claim else ()), "enter")
    await wait_for(pilot, lambda: app.run_screen is not None, "the run view")
    screen = app.run_screen
    assert screen is not None
    return screen


async def finish(pilot: Pilot[None], screen: RunScreen) -> None:
    """Wait until the worker is done (verdict, diagnosis), the run view has shown it all and its
    next-serial field takes keys (it drops those typed just as the run ends)."""
    await wait_for(
        pilot,
        lambda: (
            screen.worker is not None
            and screen.worker.is_finished
            and not screen.running
            and not len(screen.inbox)
            and screen.takes_keys()
        ),
        "the run's end",
    )
    await pilot.pause()


SLOW_STEP = """
[[steps]]
id = "powered-{n}"
kind = "volts"
title = "Supply at the sensor pins, long integration"
hi = "P_5V"
lo = "P_GND"
low = "4.5 V"
high = "5.5 V"
nplc = 50
supply = {{ pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "50 mA" }}
"""


def slow_sequence(folder: Path, steps: int = 4) -> Path:
    """Powered readings of 50 NPLC (1 s each on the bench's real timing), supply on throughout."""
    head = (
        '[sequence]\nname = "slow-powered"\n'
        'description = "Powered readings with long integration (test sequence)"\n'
        "reorder = false\n"
    )
    path = folder / "slow-powered.toml"
    path.write_text(head + "".join(SLOW_STEP.format(n=n) for n in range(1, steps + 1)))
    return path


def long_sequence(folder: Path, steps: int, closing_soak_s: float = 0.0) -> Path:
    """``steps`` resistance checks of the sender, each its own step, 2-wire and 4-wire in turn
    (so every step is its own meter query: none can share one with the next, see
    ``rig.read_ahead``, and the run lasts long enough for keys to arrive while it runs).
    ``closing_soak_s``: a soak after the last check, so the run is still going when keys
    arrive however fast this machine takes the checks."""
    head = (
        '[sequence]\nname = "many-steps"\n'
        'description = "Many short resistance steps (test sequence)"\nreorder = false\n'
    )
    body = "".join(
        f'\n[[steps]]\nid = "r{n:03d}"\nkind = "resistance"\nhi = "T1"\nlo = "T2"\n'
        f'wires = {2 if n % 2 else 4}\nlow = "1 kohm"\nhigh = "4 kohm"\n'
        for n in range(1, steps + 1)
    )
    if closing_soak_s:
        body += f'\n[[steps]]\nid = "hold"\nkind = "soak"\nduration = "{closing_soak_s:g} s"\n'
    path = folder / "many-steps.toml"
    path.write_text(head + body)
    return path
