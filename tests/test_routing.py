"""Routing and interlocks on the relay set, and the planner's use of them on the shipped sequences.

Interlock rules under test (rig.routing's module docstring; they are common practice for switched
test fixtures, no published source): one pin per bus, never supply + and - on one pin, never HI and
LO (or both sense buses) on one pin except for a zero check, never more relays closed than the
fixture's closure limit.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from offline_station import offline_demo_station

from rig.config.fixture import Bus, FixtureMap, load_fixture
from rig.config.reader import TomlDoc
from rig.config.sequence import Sequence, load_sequence, parse_sequence
from rig.config.station import Station
from rig.errors import ConfigError, InterlockError
from rig.plan import Plan, build_plan
from rig.routing import (
    Route,
    check_interlocks,
    interlock_violations,
    plan_relays,
    relay_operations,
    relays_for,
)
from rig.steps import KINDS

ROOT = Path(__file__).resolve().parent.parent
SEQUENCES = ROOT / "sequences"
DEMO_FIXTURE = SEQUENCES / "demo-fixture.toml"
SHIPPED = sorted(p for p in SEQUENCES.glob("*.toml") if p != DEMO_FIXTURE)

# Four pins A-D, each on all six buses: relay = 6 * pin index + bus index + 1 (A: 1-6, B: 7-12 ...)
BUS_ORDER = (Bus.DMM_HI, Bus.DMM_LO, Bus.SENSE_HI, Bus.SENSE_LO, Bus.SUPPLY_POS, Bus.SUPPLY_NEG)
PINS = "ABCD"


def relay(pin: str, bus: Bus) -> int:
    return 6 * PINS.index(pin) + BUS_ORDER.index(bus) + 1


@pytest.fixture(scope="module")
def full(tmp_path_factory: pytest.TempPathFactory) -> FixtureMap:
    """A fixture where every pin reaches every bus, with a closure limit of 3."""
    lines = ['[fixture]\nname = "full"\nrelay_count = 30\nmax_closed = 3\n']
    for pin in PINS:
        lines.append(f"[pins.{pin}]")
        lines.extend(f"{bus.value} = {relay(pin, bus)}" for bus in BUS_ORDER)
        lines.append("")
    path = tmp_path_factory.mktemp("fixture") / "full.toml"
    path.write_text("\n".join(lines), encoding="utf-8")
    return load_fixture(path)


@pytest.fixture(scope="module")
def demo() -> FixtureMap:
    return load_fixture(DEMO_FIXTURE)


@pytest.fixture(scope="module")
def station(tmp_path_factory: pytest.TempPathFactory) -> Station:
    return offline_demo_station("routing-test", tmp_path_factory.mktemp("station"))


# ---- relays_for ------------------------------------------------------------------------------


def test_relays_for_routes(full: FixtureMap) -> None:
    assert relays_for(full, Route.dmm("A", "B")) == {1, 8}
    assert relays_for(full, Route.four_wire("A", "B", "C", "D")) == {1, 9, 14, 22}
    assert relays_for(full, Route.supply("C", "D")) == {17, 24}
    both = Route.dmm("A", "B") + Route.supply("C", "D")
    assert relays_for(full, both) == {1, 8, 17, 24}


def test_relays_for_the_demo_fixture(demo: FixtureMap) -> None:
    # read against sequences/demo-fixture.toml
    assert relays_for(demo, Route.dmm("S_SIG", "S_GND")) == {9, 12}
    assert relays_for(demo, Route.four_wire("PT_FH", "PT_SH", "PT_FL", "PT_SL")) == {5, 6, 7, 8}
    assert relays_for(demo, Route.supply("P_5V", "P_GND")) == {19, 24}


def test_relays_for_unknown_pin(demo: FixtureMap) -> None:
    with pytest.raises(InterlockError, match=r"pin 'S_SIGG' is not in fixture 'demo-fixture'"):
        relays_for(demo, Route.dmm("S_SIGG", "S_GND"))


def test_relays_for_a_bus_the_pin_cannot_reach(demo: FixtureMap) -> None:
    with pytest.raises(InterlockError, match=r"no relay joining T1 to dmm_lo"):
        relays_for(demo, Route((("T1", Bus.DMM_HI), ("T1", Bus.DMM_LO))))


# ---- interlock_violations -----------------------------------------------------------------


def test_safe_sets(full: FixtureMap) -> None:
    assert interlock_violations(full, []) == []
    assert interlock_violations(full, relays_for(full, Route.dmm("A", "B"))) == []
    assert interlock_violations(full, relays_for(full, Route.supply("C", "D"))) == []
    # exactly the closure limit is allowed
    assert interlock_violations(full, {1, 8, 17}) == []


def test_two_pins_on_one_bus(full: FixtureMap) -> None:
    (problem,) = interlock_violations(full, {relay("A", Bus.DMM_HI), relay("B", Bus.DMM_HI)})
    assert "bus dmm_hi" in problem
    assert "relay 1 (A to dmm_hi)" in problem
    assert "relay 7 (B to dmm_hi)" in problem


def test_two_pins_on_the_demo_bus(demo: FixtureMap) -> None:
    (problem,) = interlock_violations(demo, {9, 13})
    assert "relay 9 (S_SIG to dmm_hi)" in problem
    assert "relay 13 (C_SIG to dmm_hi)" in problem


def test_supply_plus_and_minus_on_one_pin(full: FixtureMap) -> None:
    pos, neg = relay("C", Bus.SUPPLY_POS), relay("C", Bus.SUPPLY_NEG)
    (problem,) = interlock_violations(full, {pos, neg})
    assert "supply + and - both on pin C" in problem
    assert f"relays {pos} and {neg}" in problem
    # a zero check never excuses it
    assert interlock_violations(full, {pos, neg}, zero_check=True) == [problem]


@pytest.mark.parametrize(("hi", "lo"), [(Bus.DMM_HI, Bus.DMM_LO), (Bus.SENSE_HI, Bus.SENSE_LO)])
def test_hi_and_lo_on_one_pin_only_for_a_zero_check(full: FixtureMap, hi: Bus, lo: Bus) -> None:
    relays = {relay("B", hi), relay("B", lo)}
    (problem,) = interlock_violations(full, relays)
    assert f"pin B on {hi.value} and {lo.value}" in problem
    assert f"relays {relay('B', hi)} and {relay('B', lo)}" in problem
    assert "zero check" in problem
    assert interlock_violations(full, relays, zero_check=True) == []


def test_demo_zero_check_route(demo: FixtureMap) -> None:
    route = Route.dmm("S_SIG", "S_SIG", zero_check=True)
    assert plan_relays(demo, route) == {9, 10}
    with pytest.raises(InterlockError, match="S_SIG"):
        plan_relays(demo, Route.dmm("S_SIG", "S_SIG"))


def test_more_than_the_closure_limit(full: FixtureMap) -> None:
    relays = {relay("A", Bus.DMM_HI), relay("B", Bus.DMM_LO), relay("C", Bus.SENSE_HI)}
    relays.add(relay("D", Bus.SENSE_LO))  # four buses, four pins: only the limit is broken
    (problem,) = interlock_violations(full, relays)
    assert "4 relays closed at once" in problem
    assert "closure limit is 3" in problem


def test_relays_the_fixture_does_not_have(full: FixtureMap) -> None:
    (problem,) = interlock_violations(full, {1, 29, 99})
    assert "[29, 99]" in problem
    assert "'full'" in problem


def test_every_violation_is_listed(full: FixtureMap) -> None:
    relays = {relay("A", Bus.DMM_HI), relay("A", Bus.DMM_LO), relay("B", Bus.DMM_HI)}
    relays |= {relay("D", Bus.SUPPLY_POS), relay("D", Bus.SUPPLY_NEG)}
    problems = interlock_violations(full, relays)
    assert len(problems) == 4  # limit, bus dmm_hi, supply on D, HI and LO on A
    with pytest.raises(InterlockError) as caught:
        check_interlocks(full, relays)
    message = str(caught.value)
    assert message.startswith("refused before any relay moved")
    for problem in problems:
        assert problem in message


def test_check_interlocks_accepts_a_safe_set(full: FixtureMap) -> None:
    check_interlocks(full, {1, 8})  # does not raise


# ---- relay_operations -----------------------------------------------------------------------


@pytest.mark.parametrize(
    ("path", "start", "ops"),
    [
        ([], frozenset(), 0),
        ([], frozenset({4, 5}), 2),  # open both at the end
        ([frozenset({1, 2})], frozenset(), 4),  # close 2, open 2
        ([frozenset({1})] * 3, frozenset(), 2),  # nothing moves between identical sets
        # close 1 and 2; open 1 close 3; open 2; open 3 at the end
        ([frozenset({1, 2}), frozenset({2, 3}), frozenset({3})], frozenset(), 6),
        ([frozenset({1, 2})], frozenset({2}), 3),  # close 1, then open 1 and 2
        ([frozenset(), frozenset({7})], frozenset({7}), 3),
    ],
)
def test_relay_operations(path: list[frozenset[int]], start: frozenset[int], ops: int) -> None:
    assert relay_operations(path, start) == ops


# ---- the planner on the shipped sequences ----------------------------------------------------


def assert_plan_is_sound(plan: Plan, sequence: Sequence) -> None:
    fixture = plan.station.fixture
    file_ids = [s.id for s in sequence.steps]
    plan_ids = [p.spec.id for p in plan.steps]
    assert sorted(plan_ids) == sorted(file_ids)
    for step in plan.steps:
        routes = KINDS[step.spec.kind].routes(step.spec)
        assert step.relay_sets == [relays_for(fixture, r) for r in routes]
        for route, relays in zip(routes, step.relay_sets, strict=True):
            assert interlock_violations(fixture, relays, zero_check=route.zero_check) == []
        for dependency in step.spec.depends_on:
            assert plan_ids.index(dependency) < plan_ids.index(step.spec.id)
    for index, spec in enumerate(sequence.steps):
        if spec.barrier:  # the same steps before the barrier, in the plan as in the file
            assert set(plan_ids[: plan_ids.index(spec.id)]) == set(file_ids[:index])
    assert plan.relay_ops == relay_operations(rs for p in plan.steps for rs in p.relay_sets)
    assert plan.relay_ops <= plan.relay_ops_file_order() <= plan.relay_ops_unordered()


@pytest.mark.parametrize("path", SHIPPED, ids=lambda p: p.stem)
def test_shipped_plans(path: Path, station: Station) -> None:
    sequence = load_sequence(path)
    plan = build_plan(sequence, station)
    assert_plan_is_sound(plan, sequence)
    assert plan.relay_ops > 0


def test_temp_circuit_curve_step_waits_for_its_temperature(station: Station) -> None:
    sequence = load_sequence(SEQUENCES / "temp-circuit-check.toml")
    plan = build_plan(sequence, station)
    ids = [p.spec.id for p in plan.steps]
    relay_sets = {p.spec.id: p.relay_sets for p in plan.steps}
    # signal-vs-curve uses the same relays as signal-at-controller, so the planner would like it
    # next to that step; it must still come after the ambient it depends on
    assert relay_sets["signal-vs-curve"] == relay_sets["signal-at-controller"]
    assert ids.index("ambient") < ids.index("signal-vs-curve")


def _sequence(tmp_path: Path, text: str) -> Sequence:
    doc = TomlDoc(tmp_path / "generated.toml", text=text)
    sequence = parse_sequence(doc)
    doc.raise_if_problems()
    return sequence


def _volts(step_id: str, hi: str, lo: str) -> str:
    return (
        f'[[steps]]\nid = "{step_id}"\nkind = "volts"\nhi = "{hi}"\nlo = "{lo}"\n'
        'low = "0 V"\nhigh = "5 V"\n'
    )


def _wire_drop(step_id: str, a: str, b: str, ref: str) -> str:
    return (
        f'[[steps]]\nid = "{step_id}"\nkind = "wire-drop"\nfrom = "{a}"\nto = "{b}"\n'
        f'reference = "{ref}"\nmax = "0.1 V"\n'
    )


def test_nothing_crosses_a_prompt(tmp_path: Path, station: Station) -> None:
    # after the prompt comes a step with the relays the segment before it ends on; before the
    # prompt, one step the planner moves (it costs less to reach from the first)
    text = (
        '[sequence]\nname = "prompted"\n'
        + _volts("a", "C_SIG", "C_GND")
        + _volts("b", "S_SIG", "S_GND")
        + _volts("c", "C_SIG", "S_GND")
        + '[[steps]]\nid = "swap"\nkind = "prompt"\ntext = "Swap the harness."\n'
        + _volts("d", "C_SIG", "C_GND")
        + _volts("e", "S_SIG", "S_GND")
    )
    sequence = _sequence(tmp_path, text)
    plan = build_plan(sequence, station)
    assert_plan_is_sound(plan, sequence)
    ids = [p.spec.id for p in plan.steps]
    assert ids != [s.id for s in sequence.steps]  # the planner did reorder
    assert ids.index("swap") == 3
    assert set(ids[:3]) == {"a", "b", "c"}


def test_no_reordering_when_the_sequence_forbids_it(tmp_path: Path, station: Station) -> None:
    text = (
        '[sequence]\nname = "fixed"\nreorder = false\n'
        + _volts("a", "C_SIG", "C_GND")
        + _volts("b", "S_SIG", "S_GND")
        + _volts("c", "C_SIG", "S_GND")
    )
    plan = build_plan(_sequence(tmp_path, text), station)
    assert [p.spec.id for p in plan.steps] == ["a", "b", "c"]
    assert plan.relay_ops == plan.relay_ops_file_order()


def test_a_route_that_breaks_an_interlock_is_refused_by_the_planner(
    tmp_path: Path, station: Station
) -> None:
    text = '[sequence]\nname = "bad"\n' + _volts("same-pin", "S_SIG", "S_SIG")
    with pytest.raises(ConfigError) as caught:
        build_plan(_sequence(tmp_path, text), station)
    (problem,) = caught.value.problems
    assert problem.key == "steps[0]"
    assert "interlock" in problem.message and "S_SIG" in problem.message


# A sequence found by a random search: the greedy order (a, c, b) costs 22 relay operations, the
# file order (a, b, c) 20.  Worked by hand from the demo fixture's relay numbers:
#   a: {22,10} -> {22,26} -> {9,26}          6 (2 to close, 2 + 2 between readings)
#   file: a -> b {16,17}: 4; b 4; -> c {15,26}: 0; c 4; open the last 2       = 20
#   greedy picks c first (2 from {9,26}); c ends {18,25} -> b {16,17}: 4     = 22
COUNTER_EXAMPLE = (
    '[sequence]\nname = "greedy-loses"\n'
    + _wire_drop("a", "P_GND", "S_SIG", "C_5V")
    + _wire_drop("b", "P_5V", "C_GND", "C_5V")
    + _wire_drop("c", "C_GND", "C_5V", "P_5V")
)


def test_counter_example_keeps_the_cheaper_file_order(tmp_path: Path, station: Station) -> None:
    sequence = _sequence(tmp_path, COUNTER_EXAMPLE)
    plan = build_plan(sequence, station)
    assert plan.relay_ops_file_order() == 20
    # the greedy order (a, c, b) would cost 22, so the planner keeps the file order
    assert [p.spec.id for p in plan.steps] == ["a", "b", "c"]
    assert plan.relay_ops == 20


def test_reordering_never_costs_more_than_file_order(tmp_path: Path, station: Station) -> None:
    plan = build_plan(_sequence(tmp_path, COUNTER_EXAMPLE), station)
    assert plan.relay_ops <= plan.relay_ops_file_order()
