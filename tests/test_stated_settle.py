"""A settle time stated in the sequence: read, judged by RC physics, and trusted by the engine.

Physics used (textbook first-order RC settling, no project source): after a step change, a
capacitor's voltage is left ``exp(-t / tau)`` of the way from its final value, ``tau = R C``.
Settled to 1 ppm of the swing takes ``ln(1e6) = 13.8`` time constants (mathematics).
"""

from __future__ import annotations

import sqlite3
import time
from collections.abc import Callable
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_plan
from offline_station import offline_demo_station

from rig.analysis.settling import PPM_TIME_CONSTANTS, route_settling
from rig.cli import main
from rig.config.fixture import load_fixture
from rig.config.reader import TomlDoc
from rig.config.sequence import parse_sequence
from rig.config.station import load_station
from rig.config.unit_file import load_unit
from rig.events import StepResult
from rig.plan import build_plan
from rig.runner import run_plan
from rig.sim.bench import VirtualBench
from rig.sim.timing import Timing

R_OHM, C_FARAD = 10_000.0, 1e-6
TAU_S = R_OHM * C_FARAD  # 10 ms

SLOW_UNIT = f"""
# invented test unit: 10 kohm with 1 uF across it (tau 10 ms on the meter's ohms source), and a
# 100 ohm resistor elsewhere to read first, so the next route starts far from its final value
[unit]
name = "slow"
fixture = "{SEQUENCES / "demo-fixture.toml"}"
[resistors.slow]
between = ["T1", "T2"]
value = "10 kohm"
[capacitors.slow_cap]
between = ["T1", "T2"]
value = "1 uF"
[resistors.quick]
between = ["S_SIG", "S_GND"]
value = "100 ohm"
"""


def slow_sequence(settle: str | None) -> str:
    stated = "" if settle is None else f'settle = "{settle}"\n'
    return (
        '[sequence]\nname = "slow"\nreorder = false\n'
        + stated
        + '[[steps]]\nid = "quick"\nkind = "resistance"\nhi = "S_SIG"\nlo = "S_GND"\n'
        'range = "1 kohm"\nlow = "90 ohm"\nhigh = "110 ohm"\n'
        '[[steps]]\nid = "slow"\nkind = "resistance"\nhi = "T1"\nlo = "T2"\n'
        'range = "100 kohm"\nlow = "9.5 kohm"\nhigh = "10.5 kohm"\n'
    )


def parsed(text: str) -> tuple[object, list[str]]:
    doc = TomlDoc(Path("s.toml"), text=text)
    sequence = parse_sequence(doc)
    return sequence, [f"{p.key}: {p.message}" for p in doc.problems]


# ---- the file ----------------------------------------------------------------------------------


def test_settle_is_read_from_the_sequence_and_a_step_overrides_it() -> None:
    text = slow_sequence("2 ms").replace('id = "slow"\n', 'id = "slow"\nsettle = "150 ms"\n')
    sequence, problems = parsed(text)
    assert problems == []
    quick, slow = sequence.steps  # type: ignore[attr-defined]
    assert quick.settle_s == pytest.approx(0.002) and slow.settle_s == pytest.approx(0.150)
    sequence, _ = parsed(slow_sequence(None))
    assert all(s.settle_s is None for s in sequence.steps)  # type: ignore[attr-defined]


def test_a_negative_or_misplaced_settle_names_its_key() -> None:
    _, problems = parsed(
        slow_sequence(None).replace('id = "slow"\n', 'id = "slow"\nsettle = "-1 ms"\n')
    )
    assert problems == ["steps[1].settle: expected a settle time of 0 s or more, found '-1 ms'"]
    prompt = '[sequence]\nname = "p"\n[[steps]]\nid = "ask"\nkind = "prompt"\ntext = "go"\n'
    _, problems = parsed(prompt + 'settle = "1 ms"\n')
    assert problems == [
        "steps[0].settle: a prompt step takes no settle: it asks the operator; no meter is read"
    ]


# ---- the engine on the bench -----------------------------------------------------------------


def run_slow(tmp_path: Path, settle: str | None) -> tuple[float, int]:
    """The slow step's value and how many readings it took, in real timing."""
    result = run_slow_text(tmp_path, slow_sequence(settle))
    return result.value, result.readings


def run_slow_text(
    tmp_path: Path,
    text: str,
    *,
    relay_operate_s: float = 0.005,
    watch: Callable[[VirtualBench], None] = lambda bench: None,
) -> StepResult:
    """The result of the step ``slow`` of sequence ``text`` on the slow unit, in real timing;
    ``watch`` is given the started bench before the run."""
    tmp_path.mkdir(parents=True, exist_ok=True)
    unit_file = tmp_path / "slow-unit.toml"
    unit_file.write_text(SLOW_UNIT, encoding="utf-8")
    unit = load_unit(unit_file)
    bench = VirtualBench(
        unit, load_fixture(unit.fixture_path), timing=Timing.REAL, relay_operate_s=relay_operate_s
    )
    bench.start()
    watch(bench)
    try:
        station_path = bench.write_station(tmp_path / "station.toml", data_dir=str(tmp_path))
        sequence_path = tmp_path / "slow.toml"
        sequence_path.write_text(text, encoding="utf-8")
        station = load_station(station_path)
        doc = TomlDoc(sequence_path)
        plan = build_plan(parse_sequence(doc), station)
        doc.raise_if_problems()
        summary = run_plan(plan, "SLOW-1")
    finally:
        bench.stop()
    result = next(r for r in summary.results if r.step_id == "slow")
    with sqlite3.connect(station.store_path) as db:
        settled = db.execute(
            "SELECT settled FROM readings WHERE run_id=? AND step_id='slow' ORDER BY id",
            (summary.run_id,),
        ).fetchall()
    assert settled[-1] == (1,)  # the reading judged is the one marked settled
    return result


@pytest.mark.slow
def test_a_long_enough_stated_settle_gives_the_final_value_in_one_reading(tmp_path: Path) -> None:
    # 150 ms = 15 tau: within exp(-15) = 3e-7 of the final value, one reading after the wait.
    value, readings = run_slow(tmp_path, "150 ms")
    assert readings == 1
    assert value == pytest.approx(R_OHM, rel=1e-3)


@pytest.mark.slow
def test_a_stated_settle_is_trusted_and_without_one_the_proof_waits_it_out(tmp_path: Path) -> None:
    # Stated as 0 ms on a 10 ms circuit: read at once, about exp(-t / tau) of the 100 ohm ->
    # 10 kohm swing still missing, and the engine takes the engineer's word for it (one reading).
    value, readings = run_slow(tmp_path / "trusted", "0 ms")
    assert readings == 1
    assert value < R_OHM * 0.99  # visibly short of 10 kohm: why a settle must not be guessed
    # Not stated: the engine reads until two readings agree, which takes some integrations.
    value, readings = run_slow(tmp_path / "proved", None)
    assert readings >= 3
    assert value == pytest.approx(R_OHM, rel=1e-3)


# ---- settling on the unit model ---------------------------------------------------------------


def slow_plan(tmp_path: Path, settle: str | None) -> tuple[object, object]:
    unit_file = tmp_path / "slow-unit.toml"
    unit_file.write_text(SLOW_UNIT, encoding="utf-8")
    station = offline_demo_station("settle-test", tmp_path)
    doc = TomlDoc(tmp_path / "slow.toml", text=slow_sequence(settle))
    plan = build_plan(parse_sequence(doc), station)
    doc.raise_if_problems()
    return plan, load_unit(unit_file)


def test_the_time_constant_of_a_route_is_r_times_c(tmp_path: Path) -> None:
    # The ohms source is a current source (no conductance): the capacitor sees the 10 kohm alone,
    # plus two relay contacts of a fraction of an ohm.  tau = R C (textbook).
    plan, unit = slow_plan(tmp_path, "1 ms")
    by_step = {r.step_id: r for r in route_settling(plan, unit)}  # type: ignore[arg-type]
    assert by_step["slow"].tau_s == pytest.approx(TAU_S, rel=1e-3)
    assert by_step["slow"].needed_s == pytest.approx(PPM_TIME_CONSTANTS * TAU_S, rel=1e-3)
    assert by_step["slow"].short  # 1 ms stated against 138 ms needed
    assert by_step["quick"].tau_s == 0.0 and not by_step["quick"].short  # no capacitor there


def test_rig_check_with_a_unit_warns_of_a_settle_stated_too_short(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    slow_plan(tmp_path, "1 ms")  # writes the unit and the station
    sequence = tmp_path / "slow.toml"
    sequence.write_text(slow_sequence("1 ms"), encoding="utf-8")
    args = ["check", str(sequence), "--station", str(tmp_path / "station.toml")]
    assert main([*args, "--unit", str(tmp_path / "slow-unit.toml")]) == 0
    out = capsys.readouterr().out
    assert "settling on the unit model slow-unit.toml" in out
    assert "warning: step slow states settle 1 ms but its route needs 138 ms" in out


@pytest.mark.parametrize(
    ("unit", "sequence"),
    [
        ("temp-circuit", "temp-circuit-check"),
        ("pressure-circuit", "pressure-circuit-check"),
        ("ntc-sender", "ntc-sender-screen"),
    ],
)
def test_shipped_settle_times_cover_the_units_time_constants(
    unit: str, sequence: str, tmp_path: Path
) -> None:
    """Every meter step states a settle of at least 13.8 times the slowest time constant its
    route shows on the unit model (settled to 1 ppm)."""
    station = offline_demo_station("shipped-settle", tmp_path)
    plan = shipped_plan(sequence, station)
    found = route_settling(plan, load_unit(SEQUENCES / "units" / f"{unit}.toml"))
    assert found and all(r.stated_s is not None and not r.short for r in found), found
    model = load_unit(SEQUENCES / "units" / f"{unit}.toml")
    if model.capacitors:  # a real check, not a vacuous one: the filter shows on some route
        assert max(r.tau_s for r in found) > 0


@pytest.mark.slow
def test_a_new_meter_function_on_the_same_route_waits_the_settle_again(tmp_path: Path) -> None:
    # Volts, then ohms on the same two pins: no relay moves, but the ohms test current now
    # charges the 1 uF, so the stated 150 ms runs again from the change of function.
    text = (
        '[sequence]\nname = "slow"\nreorder = false\nsettle = "150 ms"\n'
        '[[steps]]\nid = "volts-first"\nkind = "volts"\nhi = "T1"\nlo = "T2"\n'
        'low = "-1 V"\nhigh = "1 V"\n'
        '[[steps]]\nid = "slow"\nkind = "resistance"\nhi = "T1"\nlo = "T2"\n'
        'range = "100 kohm"\nlow = "9.5 kohm"\nhigh = "10.5 kohm"\n'
    )
    result = run_slow_text(tmp_path, text)
    assert result.readings == 1
    assert result.settle_s >= 0.14  # the wait, measured by the engine (a floor: never shorter)
    assert result.value == pytest.approx(R_OHM, rel=1e-3)


def test_the_meter_is_set_up_while_the_relays_move_and_the_settle_runs_from_them(
    tmp_path: Path,
) -> None:
    # The quick step leaves the meter on its 1 kohm range; the slow step needs 100 kohm on other
    # pins.  The range is sent while the relays close (40 ms here, so the order is plain), and
    # the stated 150 ms still runs from the relays' change, when the 1 uF starts charging.
    got: list[tuple[float, str]] = []  # what the virtual meter received, and when
    benches: list[VirtualBench] = []

    def watch(bench: VirtualBench) -> None:
        handle = bench.dmm.handle

        def noted(line: str) -> str | None:
            got.append((time.monotonic(), line))
            return handle(line)

        bench.dmm.handle = noted  # type: ignore[method-assign]
        benches.append(bench)

    result = run_slow_text(tmp_path, slow_sequence("150 ms"), relay_operate_s=0.04, watch=watch)
    events = benches[0].relay_box.events()
    closed = max(e.t for e in events if e.action == "close")  # the slow route's contacts
    setup = next(t for t, line in reversed(got) if "RANG 100000" in line)
    read = max(t for t, line in got if "READ?" in line)
    assert setup < closed  # set up while the contacts moved
    assert read - closed >= 0.15  # the settle counted from the relays, never shorter
    assert result.readings == 1
    assert result.value == pytest.approx(R_OHM, rel=1e-3)
