"""Readings taken ahead: consecutive one-reading steps on one route share one meter query.

The planning rule is checked on small plans; on the virtual bench (real drivers, real SQLite) a
run of such steps takes fewer queries than steps, every step still gets its own settled reading,
and readings a stopped run never used are kept, unsettled, and named in the notes.
"""

from __future__ import annotations

import sqlite3
import threading
from pathlib import Path

import pytest
from bench_helpers import shipped_bench
from offline_station import offline_demo_station

from drivers.base import MeterFunction
from rig.bench_open import close_bench, open_bench
from rig.config.reader import TomlDoc
from rig.config.sequence import parse_sequence
from rig.config.station import Station
from rig.engine import Engine
from rig.events import AHEAD_UNUSED, Event, ReadingTaken
from rig.plan import Plan, build_plan
from rig.read_ahead import MAX_READINGS_AHEAD, steps_ahead
from rig.store import ResultStore


def volts(
    step_id: str, hi: str, lo: str, *, nplc: float = 1.0, low: str = "-6 V", high: str = "6 V"
) -> str:
    return (
        f'[[steps]]\nid = "{step_id}"\nkind = "volts"\nhi = "{hi}"\nlo = "{lo}"\n'
        f'low = "{low}"\nhigh = "{high}"\nnplc = {nplc:g}\n'
    )


def plan_text(steps: str) -> str:
    return '[sequence]\nname = "ahead"\nreorder = false\nsettle = "2 ms"\n' + steps


def make_plan(station: Station, steps: str) -> Plan:
    doc = TomlDoc(Path("ahead.toml"), text=plan_text(steps))
    sequence = parse_sequence(doc)
    doc.raise_if_problems()
    return build_plan(sequence, station)


@pytest.fixture(scope="module")
def station(tmp_path_factory: pytest.TempPathFactory) -> Station:
    return offline_demo_station("ahead-test", tmp_path_factory.mktemp("station"))


def ahead_of(plan: Plan, index: int, done: tuple[str, ...] = ()) -> list[str]:
    first = plan.steps[index]
    return steps_ahead(
        plan.steps,
        index,
        relays=first.relay_sets[0],
        supply=first.spec.supply,
        function=MeterFunction.DC_VOLTS,
        range_=first.range_,
        nplc=first.spec.nplc,
        line_hz=50.0,
        settle_s=first.spec.settle_s,
        skip=done,
    )


# ---- the rule ----------------------------------------------------------------------------------


def test_the_same_reading_in_a_row_is_taken_ahead_until_something_differs(
    station: Station,
) -> None:
    steps = (
        volts("a", "S_SIG", "C_GND")
        + volts("b", "S_SIG", "C_GND")
        + volts("c", "S_SIG", "C_GND")
        + volts("other-route", "C_SIG", "C_GND")
        + volts("d", "S_SIG", "C_GND")
    )
    plan = make_plan(station, steps)
    assert ahead_of(plan, 0) == ["b", "c"]  # a new route ends the run of steps
    assert ahead_of(plan, 3) == []  # its neighbours read another route


def test_an_ntc_checked_by_its_voltage_takes_part_like_a_volts_step(station: Station) -> None:
    # An NTC judged by its divider voltage is one DC-volts reading on one route, like a volts
    # step: the two in a row on the same pins share one query (values invented for the test).
    ntc = (
        '[[steps]]\nid = "curve"\nkind = "ntc"\nmeasure = "voltage"\nhi = "S_SIG"\n'
        'lo = "C_GND"\nr25 = "2 kohm"\nbeta = "3450 K"\ntemperature = "23 degC"\n'
        'tolerance = "5 %"\npullup = "2.49 kohm"\nreference = "5 V"\nnplc = 1\nrange = "10 V"\n'
    )
    plan = make_plan(station, volts("a", "S_SIG", "C_GND", low="0 V", high="5 V") + ntc)
    assert ahead_of(plan, 0) == ["curve"]


@pytest.mark.parametrize(
    "different",
    [
        volts("x", "S_SIG", "C_GND", nplc=10),  # another aperture
        volts("x", "S_SIG", "C_GND", low="0 V", high="0.05 V"),  # limits fixing another range
        '[[steps]]\nid = "x"\nkind = "resistance"\nhi = "S_SIG"\nlo = "C_GND"\n'
        'low = "0 ohm"\nhigh = "1 Mohm"\n',  # ohms
        '[[steps]]\nid = "x"\nkind = "prompt"\ntext = "look"\n',  # an operator in between
        volts("x", "S_SIG", "C_GND") + 'settle = "50 ms"\n',  # a settle of its own
    ],
)
def test_any_other_setup_or_step_ends_the_run(station: Station, different: str) -> None:
    steps = volts("a", "S_SIG", "C_GND") + different + volts("b", "S_SIG", "C_GND")
    assert ahead_of(make_plan(station, steps), 0) == []


def test_done_steps_and_the_caps_end_the_run(station: Station) -> None:
    steps = "".join(volts(f"s{i:02d}", "S_SIG", "C_GND") for i in range(30))
    plan = make_plan(station, steps)
    assert ahead_of(plan, 0, done=("s03",)) == ["s01", "s02"]  # continuing: never past a done one
    # 1 NPLC at 50 Hz is 20 ms: the 0.25 s cap allows 12 more, the count cap 14
    assert len(ahead_of(plan, 0)) == min(MAX_READINGS_AHEAD - 1, 12)


# ---- on the bench ------------------------------------------------------------------------------


def run_on_bench(
    tmp_path: Path,
    steps: str,
    *,
    stop_on_batch: bool = False,
    events: list[Event] | None = None,
) -> tuple[object, list[tuple[str, int, str]], int, int]:
    """The summary, the stored readings (step, settled, role), meter messages handled, steps;
    ``events``: where the run's events go, as a front end hears them."""
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        path = tmp_path / "ahead.toml"
        path.write_text(plan_text(steps), encoding="utf-8")
        doc = TomlDoc(path)
        plan = build_plan(parse_sequence(doc), station)
        doc.raise_if_problems()
        stop = threading.Event()
        if stop_on_batch:  # the operator's stop arrives while a shared query integrates
            handle = bench.dmm.handle

            def handle_and_stop(line: str) -> str | None:
                if "SAMP:COUN" in line and not line.rstrip().endswith(" 1"):
                    stop.set()
                return handle(line)

            bench.dmm.handle = handle_and_stop  # type: ignore[method-assign]
        instruments = open_bench(station)
        store = ResultStore(station.store_path)
        try:
            before = bench.dmm.lines_handled
            listener = None if events is None else events.append
            summary = Engine(plan, instruments, store, stop=stop, listener=listener).run("AHEAD-1")
            messages = bench.dmm.lines_handled - before
        finally:
            close_bench(instruments)
            store.close()
        with sqlite3.connect(station.store_path) as db:
            rows = db.execute(
                "SELECT step_id, settled, role FROM readings WHERE run_id=? ORDER BY id",
                (summary.run_id,),
            ).fetchall()
    return summary, rows, messages, len(plan.steps)


def test_steps_in_a_row_share_one_query_and_each_keeps_its_own_reading(tmp_path: Path) -> None:
    ids = [f"s{i}" for i in range(6)]
    steps = "".join(volts(i, "S_SIG", "C_GND") for i in ids)
    summary, rows, messages, count = run_on_bench(tmp_path, steps)
    assert summary.status == "complete"  # type: ignore[attr-defined]
    assert [r[0] for r in rows] == ids and all(r[1] == 1 for r in rows)  # one settled each
    # one reading query for all six (plus setting the meter up): not six round trips
    assert messages < count
    values = [r.value for r in summary.results]  # type: ignore[attr-defined]
    assert max(values) - min(values) < 1e-3  # the same signal, read six times


def test_readings_a_stopped_run_never_used_are_kept_unsettled(tmp_path: Path) -> None:
    ids = [f"s{i}" for i in range(5)]
    steps = "".join(volts(i, "S_SIG", "C_GND") for i in ids)
    events: list[Event] = []
    summary, rows, _, _ = run_on_bench(tmp_path, steps, stop_on_batch=True, events=events)
    # the stop lands while s0's shared query integrates: s0 ends there, nothing after it runs
    assert summary.status == "aborted"  # type: ignore[attr-defined]
    assert "operator" in summary.reason  # type: ignore[attr-defined]
    assert rows[0] == ("s0", 1, "hi-lo")
    assert rows[1:] == [(i, 0, "hi-lo") for i in ids[1:]]  # taken, not used, still kept
    notes = summary.notes  # type: ignore[attr-defined]
    assert any("4 reading(s) taken ahead were not used" in n for n in notes), notes
    # a front end hears of each stored reading, those never used marked as such (rig run
    # --readings prints them)
    heard = [(e.step_id, e.settled, e.note) for e in events if isinstance(e, ReadingTaken)]
    assert heard[-4:] == [(i, False, AHEAD_UNUSED) for i in ids[1:]]
