"""The physical limit of a plan, against hand computations on tiny plans, and against the bench.

Figures used by hand (``InstrumentTiming``, typical values from memory, no published source):
relay operate 5 ms, release 3 ms, relays of one change moving together (break before make);
integration time = NPLC / mains frequency (the definition of NPLC, common practice), 50 Hz here,
plus 1 ms of the meter's own time per reading; autorange 5 ms where the range is not fixed.
"""

from __future__ import annotations

import inspect
import time
from pathlib import Path

import pytest
from bench_helpers import shipped_bench, shipped_plan
from offline_station import offline_demo_station

from rig.bench_open import close_bench, open_bench
from rig.config.reader import TomlDoc
from rig.config.sequence import parse_sequence
from rig.config.station import Station
from rig.engine import Engine, SettlePolicy
from rig.plan import InstrumentTiming, Plan, build_plan
from rig.sim import sim_dmm, sim_supply
from rig.sim.bench import VirtualBench
from rig.sim.timing import Timing
from rig.store import ResultStore


@pytest.fixture(scope="module")
def station(tmp_path_factory: pytest.TempPathFactory) -> Station:
    """The demo fixture on a station whose instruments are never opened (planning only)."""
    return offline_demo_station("limit-test", tmp_path_factory.mktemp("station"))


def plan_of(tmp_path: Path, station: Station, steps: str) -> Plan:
    text = '[sequence]\nname = "tiny"\nreorder = false\n' + steps
    doc = TomlDoc(tmp_path / "tiny.toml", text=text)
    sequence = parse_sequence(doc)
    doc.raise_if_problems()
    return build_plan(sequence, station)


def volts(step_id: str, hi: str, lo: str, nplc: float) -> str:
    return (
        f'[[steps]]\nid = "{step_id}"\nkind = "volts"\nhi = "{hi}"\nlo = "{lo}"\n'
        f'low = "0 V"\nhigh = "5 V"\nnplc = {nplc:g}\n'
    )


def test_physical_limit_of_two_relay_operations_and_three_readings_by_hand(
    tmp_path: Path, station: Station
) -> None:
    # Three 2-NPLC readings on one route (S_SIG on DMM HI = relay 9, C_GND on DMM LO = relay 16):
    # the two relays close together once (5 ms) and release together at the end (3 ms);
    # 3 readings x (2 / 50 Hz + 1 ms) = 123 ms; the 0-5 V limits fix the 10 V range.
    steps = "".join(volts(i, "S_SIG", "C_GND", 2) for i in ("a", "b", "c"))
    limit = plan_of(tmp_path, station, steps).physical_limit()
    assert limit.transitions == 2 and limit.readings == 3 and limit.autoranged == 0
    assert limit.relays_s == pytest.approx(0.005 + 0.003)
    assert limit.readings_s == pytest.approx(3 * (2 / 50 + 0.001))
    assert limit.strict_s == pytest.approx(0.131)
    assert limit.settle_proof_s == pytest.approx(2 / 50 + 0.001)  # one route change
    assert limit.total_s == pytest.approx(0.131 + 0.041)  # no settle stated: the proof counts


def test_physical_limit_of_a_route_change_by_hand(tmp_path: Path, station: Station) -> None:
    # {9, 16} then {13, 16} (C_SIG on DMM HI): close both (5 ms); open 9 (3 ms) then close 13
    # (5 ms); open both (3 ms) = 16 ms, plus 2 x (1 / 50 + 1 ms) = 42 ms.
    steps = volts("a", "S_SIG", "C_GND", 1) + volts("b", "C_SIG", "C_GND", 1)
    limit = plan_of(tmp_path, station, steps).physical_limit()
    assert limit.transitions == 3
    assert limit.relays_s == pytest.approx(0.016)
    assert limit.strict_s == pytest.approx(0.016 + 0.042)
    assert limit.settle_proof_s == pytest.approx(0.042)
    assert limit.total_s == pytest.approx(0.016 + 0.042 + 0.042)


def test_a_stated_settle_time_replaces_the_proof(tmp_path: Path, station: Station) -> None:
    # The same two routes, each step stating 2 ms: two changes of route, 2 x 2 ms of settling
    # and no proving integration; the strict part is unchanged (16 ms + 42 ms).
    steps = (volts("a", "S_SIG", "C_GND", 1) + volts("b", "C_SIG", "C_GND", 1)).replace(
        "nplc = 1\n", 'nplc = 1\nsettle = "2 ms"\n'
    )
    limit = plan_of(tmp_path, station, steps).physical_limit()
    assert limit.settle_proof_s == 0.0
    assert limit.settle_s == pytest.approx(0.004)
    assert limit.total_s == pytest.approx(0.016 + 0.042 + 0.004)


def test_physical_limit_adds_autorange_where_the_range_is_not_fixed(
    tmp_path: Path, station: Station
) -> None:
    # A Pt100 on four relays (5-8), 10 NPLC, without limits, so nothing bounds its range:
    # 5 + 3 ms relays, 10 / 50 Hz + 1 ms reading, 5 ms autorange = 214 ms.
    steps = (
        '[[steps]]\nid = "pt"\nkind = "reference-temperature"\nforce_hi = "PT_FH"\n'
        'sense_hi = "PT_SH"\nforce_lo = "PT_FL"\nsense_lo = "PT_SL"\nnplc = 10\n'
    )
    limit = plan_of(tmp_path, station, steps).physical_limit()
    assert limit.autoranged == 1
    assert limit.strict_s == pytest.approx(0.008 + 0.201 + 0.005)


def test_a_wire_drops_reference_reading_pays_for_autorange(
    tmp_path: Path, station: Station
) -> None:
    # The direct reading across the wire is on the range its +-10 mV limits hold (100 mV); the
    # reading from the reference cannot be bounded (it is the signal's own voltage), so the
    # meter autoranges onto it: 5 ms; the third reading stays on the range that one found.
    steps = (
        '[[steps]]\nid = "drop"\nkind = "wire-drop"\nfrom = "S_SIG"\nto = "C_SIG"\n'
        'reference = "CHASSIS"\nmax = "0.01 V"\nnplc = 1\n'
    )
    limit = plan_of(tmp_path, station, steps).physical_limit()
    assert limit.readings == 3 and limit.autoranged == 1
    assert limit.autorange_s == pytest.approx(0.005)


def test_a_ratiometric_supply_reading_pays_for_autorange_even_with_a_range_held(
    tmp_path: Path, station: Station
) -> None:
    # The output reading on the stated range, the supply reading in autorange (it is the
    # sensor's own supply, which the file does not bound): one autorange, as with no range held,
    # where both readings autorange onto what is, as a rule, one range.
    steps = (
        '[[steps]]\nid = "map"\nkind = "ratiometric"\noutput = "P_SIG"\npower = "P_5V"\n'
        'ground = "P_GND"\nrange_low = "20 kPa"\nrange_high = "250 kPa"\n'
        'tolerance = "2 %"\nnplc = 1\n'
    )
    for held in ("", 'range = "10 V"\n'):
        limit = plan_of(tmp_path, station, steps + held).physical_limit()
        assert limit.readings == 2 and limit.autoranged == 1, held


def test_stated_figures_are_those_of_the_virtual_bench() -> None:
    stated = InstrumentTiming()
    defaults = inspect.signature(VirtualBench).parameters
    assert defaults["relay_operate_s"].default == stated.relay_operate_s
    assert defaults["relay_release_s"].default == stated.relay_release_s
    assert stated.reading_overhead_s == sim_dmm.READING_OVERHEAD_S
    assert stated.autorange_s == sim_dmm.AUTORANGE_COST_S
    assert stated.supply_readback_s == sim_supply.READBACK_S


@pytest.mark.slow
def test_no_run_on_the_bench_beats_the_physical_limit(tmp_path: Path) -> None:
    # A floor, not a speed goal: in real timing the bench spends at least the relay and
    # integration time the plan needs, whatever the controller does.  The autorange part is left
    # out: the virtual meter pays it only when autorange changes the range.
    with shipped_bench("temp-circuit", folder=tmp_path, timing=Timing.REAL) as (bench, station):
        plan = shipped_plan("temp-circuit-check", station)
        limit = plan.physical_limit()
        instruments = open_bench(station)
        store = ResultStore(tmp_path / "r.sqlite")
        try:
            engine = Engine(plan, instruments, store, settle=SettlePolicy(enabled=False))
            spent, start = bench.clock.spent_s, time.perf_counter()
            summary = engine.run("FLOOR-1")
            wall = time.perf_counter() - start
            spent = bench.clock.spent_s - spent
        finally:
            close_bench(instruments)
            store.close()
    assert summary.status == "complete"
    assert sum(r.readings for r in summary.results) == limit.readings
    floor = limit.strict_s - limit.autorange_s
    assert spent >= floor * 0.99  # sleeps are never shorter than asked; 1 % for clock rounding
    assert wall >= spent
    # the sequence states its settle (2 ms a route): the engine waits it out on top of the
    # instruments' time, so the run cannot be shorter than the whole limit less autorange either
    assert limit.settle_s > 0
    assert wall >= (limit.total_s - limit.autorange_s) * 0.99


@pytest.mark.parametrize(
    ("unit", "sequence"),
    [
        ("ntc-sender", "ntc-sender-screen"),
        ("temp-circuit", "temp-circuit-check"),
        ("pressure-circuit", "pressure-circuit-check"),
    ],
)
def test_the_limit_counts_all_the_time_the_bench_charges(
    tmp_path: Path, unit: str, sequence: str
) -> None:
    # The other side of the floor: the instrument time the virtual bench charges for a run, by
    # its instruments' own figures, is no more than the limit's own instrument part (relays,
    # readings, autorange), so nothing the instruments spend is left out of the limit and
    # counted against the controller.  (It may be less: the meter pays autorange only when
    # autorange changes the range.)  The figures charged do not depend on the host's timing.
    with shipped_bench(unit, folder=tmp_path) as (bench, station):
        plan = shipped_plan(sequence, station)
        limit = plan.physical_limit()
        instruments = open_bench(station)
        store = ResultStore(tmp_path / "r.sqlite")
        try:
            charged = []
            for n in range(2):  # the second run starts from the ranges the first left
                before = bench.clock.charged_s
                summary = Engine(plan, instruments, store).run(f"CHARGED-{n}")
                assert summary.status == "complete"
                charged.append(bench.clock.charged_s - before)
        finally:
            close_bench(instruments)
            store.close()
    for spent in charged:
        assert spent <= limit.strict_s + 1e-9
        assert spent >= limit.strict_s - limit.autorange_s - 1e-9
