"""Fault coverage on the shipped sensor circuit check (temp-circuit-check) and on a
deliberately weak sequence.

Expected detections follow from the pull-up divider of a 5 V sensor circuit: an open sensor or
signal wire reads near the pull-up voltage, a short to ground near 0 V; healthy signal 0.6 V to
4.8 V (SOURCES.md, sensor circuits: common practice, no published source)."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_bench, shipped_plan

from rig.analysis.coverage import fault_coverage, moves_no_reading
from rig.analysis.fault_set import DETECTING, single_faults, wire_pairs
from rig.analysis.predict import SequencePredictor, StepPrediction
from rig.cli import main
from rig.config.station import Station
from rig.config.unit_file import load_unit
from rig.faults import Fault
from rig.judge.decision import Verdict
from rig.runner import load_plan

WEAK = Path(__file__).parent / "data" / "weak-temp-check.toml"
UNIT = SEQUENCES / "units" / "temp-circuit.toml"


@pytest.fixture(scope="module")
def station(tmp_path_factory: pytest.TempPathFactory) -> Station:
    with shipped_bench("temp-circuit", folder=tmp_path_factory.mktemp("cov")) as (_, found):
        return found


def test_single_fault_set_covers_every_wire_pair_and_sensor(station: Station) -> None:
    unit = load_unit(UNIT)
    plan = shipped_plan("temp-circuit-check", station)
    specs = [f.spec.split("=")[0] for f in single_faults(unit, plan)]
    for wire in ("signal", "ground"):
        for kind in ("open", "short-ground", "short-ref", "short-feed", "series"):
            assert f"{kind}:{wire}" in specs
    # both wires have ends on J1 and J2 in the demo fixture, so they may touch each other
    assert wire_pairs(unit, station.fixture) == [("signal", "ground")]
    assert "short:signal,ground" in specs
    assert specs.count("drift:coolant") == 2
    assert not any(s.startswith("intermittent") for s in specs)


def test_open_ground_and_short_to_ground_are_detected(station: Station) -> None:
    unit = load_unit(UNIT)
    report = fault_coverage(shipped_plan("temp-circuit-check", station), unit)
    assert report.good_unit_passes
    detected = {f.spec for f in report.detected}
    assert {"open:ground", "open:signal", "short-ground:signal"} <= detected
    # the default series value is the smallest that fails a step: detected by construction
    assert all(f.kind != "series" for f in report.undetected)


def test_weak_sequence_misses_what_a_window_cannot_see(station: Station) -> None:
    unit = load_unit(UNIT)
    plan = load_plan(WEAK, station)
    report = fault_coverage(plan, unit, single_faults(unit, plan, series_ohm=15.0))
    # A window on the controller signal alone cannot see: 15 ohm in either wire (a few tenths of
    # a percent of a 2.5 kohm divider), a 10 % sensor drift (about 5 % of the signal), a ground
    # wire touching ground (the sensor ground stays at ground), or the ground wire touching the
    # reference (both ends of the divider rise together and the signal stays in the window).
    assert {f.spec for f in report.undetected} == {
        "series:signal=15ohm",
        "series:ground=15ohm",
        "drift:coolant=+10%",
        "drift:coolant=-10%",
        "short-ground:ground",
        "short-ref:ground",
    }
    assert report.coverage_pct == pytest.approx(100 * 7 / 13)
    # Each of them moves the controller signal by more than its uncertainty (about 0.25 mV): even
    # the ground wire touching ground, which takes the ground wire's drop of some millivolts out
    # of the divider (Ohm's law on the shared ground current); so none is unseen.
    assert [r.fault.spec for r in report.rows if r.unseen] == []


def test_a_fault_is_unseen_only_when_no_reading_moves_beyond_its_uncertainty() -> None:
    good = [StepPrediction("a", 2.0, "V", 0.001, Verdict.PASS), _nan_step()]
    within = [StepPrediction("a", 2.0009, "V", 0.001, Verdict.PASS), _nan_step()]
    beyond = [StepPrediction("a", 2.0011, "V", 0.001, Verdict.PASS), _nan_step()]
    lost = [StepPrediction("a", math.nan, "V", 0.001, Verdict.FAIL), _nan_step()]
    assert moves_no_reading(good, within)
    assert not moves_no_reading(good, beyond)
    assert not moves_no_reading(good, lost)  # a reading that is lost has moved


def _nan_step() -> StepPrediction:
    return StepPrediction("p", math.nan, "", math.nan, Verdict.SKIPPED)  # a prompt: no value


def test_coverage_json(station: Station, capsys: pytest.CaptureFixture[str]) -> None:
    code = main(
        ["coverage", str(WEAK), "--station", str(station.path), "--unit", str(UNIT), "--json"]
    )
    assert code == 0
    data = json.loads(capsys.readouterr().out)
    assert set(data) >= {"faults", "detected", "coverage_pct", "undetected", "matrix"}
    assert data["faults"] == len(data["matrix"]) == 13
    assert data["matrix"]["open:signal"]["signal-at-controller"] == "fail"
    assert "drift:coolant=+10%" in data["undetected"]


def test_no_coverage_figure_when_the_unit_with_no_fault_fails(
    station: Station, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # A window the healthy divider never reaches (it sits between 0.6 V and 4.8 V, common
    # practice for 5 V sensor circuits, no published source) fails the unit with no fault, so
    # that step "detects" every fault: a share of detected faults would count the sequence's own
    # error as coverage.
    failing = tmp_path / "fails-good-unit.toml"
    failing.write_text(
        WEAK.read_text(encoding="utf-8")
        + '\n[[steps]]\nid = "never-in-window"\nkind = "volts"\nhi = "C_SIG"\nlo = "C_GND"\n'
        'low = "4.95 V"\nhigh = "5.0 V"\n',
        encoding="utf-8",
    )
    args = ["coverage", str(failing), "--station", str(station.path), "--unit", str(UNIT)]
    assert main(args) == 1
    lines = capsys.readouterr().out.strip().splitlines()
    assert lines[-1] == (
        "coverage: not meaningful: the unit with no fault fails step never-in-window; fix the "
        "sequence or the unit model first"
    )
    assert "%" not in lines[-1]
    assert main([*args, "--json"]) == 1
    data = json.loads(capsys.readouterr().out)
    assert data["coverage_pct"] is None
    assert "fails step never-in-window" in data["coverage_reason"]
    # the sequence the unit passes still gives its figure, with no reason
    assert main([*args[:1], str(WEAK), *args[2:], "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["coverage_pct"] > 0 and data["coverage_reason"] is None


def test_coverage_bad_option_is_a_clear_error(
    station: Station, capsys: pytest.CaptureFixture[str]
) -> None:
    args = ["coverage", str(WEAK), "--station", str(station.path), "--unit", str(UNIT)]
    assert main([*args, "--series", "lots"]) == 2
    assert "--series" in capsys.readouterr().err
    assert main([*args, "--fault", "intermittent:signal"]) == 2
    assert "intermittent" in capsys.readouterr().err


def test_default_series_is_the_smallest_that_fails(station: Station) -> None:
    unit = load_unit(UNIT)
    plan = shipped_plan("temp-circuit-check", station)
    series = {f.targets[0]: f.value for f in single_faults(unit, plan) if f.kind == "series"}
    # Ohm's law on the ground wire: the shared 60 ohm load on the 12 V feed returns about
    # 12 V / 60 ohm = 0.2 A through it, and the sensor-ground step fails above 0.02 V, so the
    # wire plus the fault may not exceed 0.02 V / 0.2 A = 0.1 ohm.  The wire itself: 18 AWG,
    # 20.95 ohm/km at 20 degC (handbook AWG table, SOURCES.md), 1.6 m, alpha 0.00393 /K (from
    # memory, as the unit builder) at 23 degC.
    wire_ohm = 20.95e-3 * 1.6 * (1 + 0.00393 * 3)
    current_a = 12.0 / (60.0 + wire_ohm)
    assert series["ground"] == pytest.approx(0.02 / current_a - wire_ohm, abs=0.001)
    # two significant digits: one unit less no longer fails
    predictor = SequencePredictor(plan, unit)
    for wire, value in series.items():
        assert value is not None
        digit = 10 ** (math.floor(math.log10(value)) - 1)
        for r_ohm, fails in ((value, True), (value - digit, False)):
            steps = predictor.predict([Fault("series", (wire,), r_ohm)])
            assert any(s.verdict in DETECTING for s in steps) is fails, (wire, r_ohm)
